"""``python manage.py clear_suspect CODE --as USER --note TEXT [--expected-version N]``.

A control manager's clearance of a suspect mark, through ``services.suspect.mark_clear_suspect``: the
acting user needs the manager role, the note (why the mark can be used again) is required, and the
change is one transaction leaving one ``mark_clear_suspect`` audit row. Without ``--expected-version`` the
mark's version as the command reads it is used; give ``--expected-version`` to refuse the clearance if anyone
changed the mark since you looked at it.
"""

from __future__ import annotations

from django.core.exceptions import ValidationError
from django.core.management.base import BaseCommand, CommandError

from registry.errors import RegistryError
from registry.management.commands.set_roles import actor_by_username
from registry.services.access import access_mark_by_code
from registry.services.suspect import mark_clear_suspect


class Command(BaseCommand):
    help = "Clear a suspect mark so that it is active again (control managers; audited; a note is required)."

    def add_arguments(self, parser):
        parser.add_argument("code", help="the mark's code")
        parser.add_argument("--as", dest="actor", required=True, help="control manager clearing it (recorded)")
        parser.add_argument("--note", required=True, help="why the mark can be used again (stored in its history)")
        parser.add_argument(
            "--expected-version", type=int, help="the mark's version you checked; refused if it has changed since"
        )

    def handle(self, *args, **opts):
        actor = actor_by_username(opts["actor"])
        try:
            version = opts["expected_version"]
            if version is None:
                version = access_mark_by_code(actor, opts["code"]).version
            mark = mark_clear_suspect(actor=actor, code=opts["code"], note=opts["note"], expected_version=version)
        except ValidationError as exc:
            raise CommandError(" ".join(exc.messages) + " Nothing was changed.") from None
        except RegistryError as exc:
            raise CommandError(exc.message + " Nothing was changed.") from None
        self.stdout.write(
            f"{mark.code} is no longer suspect; it is active (version {mark.version}, recorded in its history)."
        )
