"""Our own words for the mark description and the visit findings; suspect marks.

Mark columns renamed (data kept): ``monument_type`` → ``monument``, ``setting`` → ``monument_detail``,
``stamping`` → ``marking``, ``to_reach`` → ``access_directions``, ``custodian`` → ``keeper``.
Visit column ``condition`` → ``finding`` (wider: 20 characters), values converted: ``good`` → ``intact``,
``poor`` → ``damaged``, ``not_found`` → ``searched_not_found`` (``disturbed`` and ``destroyed`` keep theirs).

New: the mark status ``suspect`` with ``suspect_since`` and ``suspect_reason``. The data step makes an
active mark suspect when its latest visit that found it disturbed or did not find it is dated on or after
the publication date of its newest published position (or when it has none), the rule of
``registry.services.suspect``, written out here again so that this migration never changes with the code.
Each mark made suspect gets an audit row (``mark_make_suspect``, no actor). Backwards, suspect marks
become active again (their audit rows stay: the audit trail is append-only) and the values and names
go back.

Tables touched: ``registry_mark`` and ``registry_visit``. The triggers of migrations 0003 and 0005 are on
``registry_position`` and ``registry_auditevent`` and do not refer to these tables, so SQLite's table
rebuilds here leave them in place (tests/models/test_vocabulary_migration.py checks them afterwards on
both databases).
"""

import datetime as dt

from django.db import migrations, models

FINDING_FORWARD = {"good": "intact", "poor": "damaged", "not_found": "searched_not_found"}
FINDING_BACKWARD = {new: old for old, new in FINDING_FORWARD.items()}
SUSPECT_FINDINGS = ("disturbed", "searched_not_found")
REASON = {
    "disturbed": "the visit of {day} found it disturbed",
    "searched_not_found": "the visit of {day} searched for it and did not find it",
}


def _convert(apps, mapping):
    Visit = apps.get_model("registry", "Visit")
    for old, new in mapping.items():
        Visit.objects.filter(finding=old).update(finding=new)


def findings_forward(apps, schema_editor):
    _convert(apps, FINDING_FORWARD)


def findings_backward(apps, schema_editor):
    _convert(apps, FINDING_BACKWARD)


def _utc_date(moment):
    if moment.tzinfo is not None:
        moment = moment.astimezone(dt.UTC)
    return moment.date()


def suspects_forward(apps, schema_editor):
    Mark = apps.get_model("registry", "Mark")
    Visit = apps.get_model("registry", "Visit")
    Position = apps.get_model("registry", "Position")
    AuditEvent = apps.get_model("registry", "AuditEvent")
    latest_bad: dict[int, tuple] = {}
    for mark_id, day, finding in (
        Visit.objects.filter(finding__in=SUSPECT_FINDINGS, mark__status="active")
        .order_by("mark_id", "visited_on", "created_at", "id")
        .values_list("mark_id", "visited_on", "finding")
    ):
        latest_bad[mark_id] = (day, finding)  # the last one per mark wins
    newest_publication: dict[int, dt.date] = {}
    for mark_id, decided_at in Position.objects.filter(
        mark_id__in=list(latest_bad), state="published", decided_at__isnull=False
    ).values_list("mark_id", "decided_at"):
        day = _utc_date(decided_at)
        if mark_id not in newest_publication or day > newest_publication[mark_id]:
            newest_publication[mark_id] = day
    events = []
    for mark in Mark.objects.filter(pk__in=list(latest_bad), status="active").order_by("code"):
        day, finding = latest_bad[mark.pk]
        published = newest_publication.get(mark.pk)
        if published is not None and day < published:
            continue
        reason = REASON[finding].format(day=day.isoformat())
        Mark.objects.filter(pk=mark.pk).update(
            status="suspect", suspect_since=day, suspect_reason=reason, version=models.F("version") + 1
        )
        events.append(
            AuditEvent(
                actor=None,
                action="mark_make_suspect",
                object_type="mark",
                object_id=str(mark.pk),
                object_repr=mark.code,
                mark_id=mark.pk,
                before={"status": "active", "version": mark.version},
                after={
                    "status": "suspect",
                    "suspect_since": day.isoformat(),
                    "suspect_reason": reason,
                    "version": mark.version + 1,
                },
                note="set when the registry learned about suspect marks (migration 0006)",
            )
        )
    AuditEvent.objects.bulk_create(events)


def suspects_backward(apps, schema_editor):
    Mark = apps.get_model("registry", "Mark")
    Mark.objects.filter(status="suspect").update(status="active")


MARK_STATUS_CHOICES = [
    ("active", "active"),
    ("suspect", "suspect — awaiting re-observation"),
    ("retired", "retired"),
    ("destroyed", "destroyed"),
]
FINDING_CHOICES = [
    ("intact", "intact"),
    ("damaged", "damaged but usable"),
    ("disturbed", "disturbed"),
    ("destroyed", "destroyed"),
    ("searched_not_found", "searched, not found"),
]


class Migration(migrations.Migration):
    dependencies = [("registry", "0005_position_history_triggers")]

    operations = [
        # --- the mark description, in our own words
        migrations.RenameField("mark", "monument_type", "monument"),
        migrations.RenameField("mark", "setting", "monument_detail"),
        migrations.RenameField("mark", "stamping", "marking"),
        migrations.RenameField("mark", "to_reach", "access_directions"),
        migrations.RenameField("mark", "custodian", "keeper"),
        migrations.AlterField(
            model_name="mark",
            name="access_directions",
            field=models.TextField(blank=True, verbose_name="access directions"),
        ),
        migrations.AlterField(
            model_name="mark",
            name="monument_detail",
            field=models.CharField(blank=True, max_length=200, verbose_name="how it is set"),
        ),
        migrations.AlterField(
            model_name="mark",
            name="marking",
            field=models.CharField(blank=True, max_length=120, verbose_name="marking as inscribed"),
        ),
        migrations.AlterField(
            model_name="mark",
            name="stability",
            field=models.CharField(
                choices=[
                    ("high", "high (bedrock, deep rod, pillar)"),
                    ("moderate", "moderate (massive structure, deep post)"),
                    ("low", "low (shallow post, pavement)"),
                    ("unknown", "unknown"),
                ],
                default="unknown",
                max_length=10,
                verbose_name="expected stability",
            ),
        ),
        migrations.AlterField(
            model_name="mark",
            name="keeper",
            field=models.CharField(
                blank=True, help_text="Who looks after the mark or the land it is on.", max_length=120
            ),
        ),
        # --- suspect marks
        migrations.AlterField(
            model_name="mark",
            name="status",
            field=models.CharField(choices=MARK_STATUS_CHOICES, default="active", max_length=10),
        ),
        migrations.AddField(model_name="mark", name="suspect_since", field=models.DateField(blank=True, null=True)),
        migrations.AddField(
            model_name="mark", name="suspect_reason", field=models.CharField(blank=True, max_length=200)
        ),
        # --- visit findings
        migrations.RenameField("visit", "condition", "finding"),
        migrations.AlterField(
            model_name="visit",
            name="finding",
            field=models.CharField(choices=FINDING_CHOICES, max_length=20),
        ),
        migrations.RunPython(findings_forward, findings_backward),
        migrations.RunPython(suspects_forward, suspects_backward),
    ]
