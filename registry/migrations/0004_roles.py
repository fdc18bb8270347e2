"""Create the role groups (viewer, technician, manager, signatory, admin) and their permissions."""

from django.db import migrations


def forward(apps, schema_editor):
    from registry.roles import ensure_roles

    ensure_roles(apps)


class Migration(migrations.Migration):
    dependencies = [
        ("registry", "0003_integrity_triggers"),
        ("auth", "0012_alter_user_first_name_max_length"),
        ("contenttypes", "0002_remove_content_type_name"),
    ]
    operations = [migrations.RunPython(forward, migrations.RunPython.noop)]
