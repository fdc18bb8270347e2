"""``python manage.py import_occupations FILE.csv --as USERNAME [--dry-run]``."""

from __future__ import annotations

from pathlib import Path

from django.core.exceptions import ValidationError
from django.core.management.base import CommandError

from registry.errors import PermissionDeniedError, RegistryError
from registry.management.common import HelpAsWrittenCommand, actor_by_username, read_input_file
from registry.services.imports import ImportRejected
from registry.services.occupation_batch import occupation_batch_import

HELP = """\
Record a batch of occupations, with their results, from a CSV file (columns in the README,
"Batch occupation results"):

  python manage.py import_occupations results.csv --as USERNAME [--dry-run]

Each row records one occupation of a mark; a row with a result (frame, epoch, latitude, longitude,
ellipsoidal height and the three sigmas) also records that result as a proposed position of the mark,
for the control manager to check and publish.

All or nothing: a file with any bad row changes nothing, and every bad row is listed with its line
and the reason. --dry-run checks every row and changes nothing.
"""


class Command(HelpAsWrittenCommand):
    help = HELP

    def add_arguments(self, parser):
        parser.add_argument("file", help="path of the .csv file")
        parser.add_argument("--as", dest="username", required=True, help="user recording them (technician or manager)")
        parser.add_argument("--dry-run", action="store_true", help="check every row, change nothing")

    def handle(self, *args, **opts):
        path = Path(opts["file"])
        content = read_input_file(path)
        actor = actor_by_username(opts["username"])
        try:
            summary = occupation_batch_import(actor=actor, content=content, filename=path.name, dry_run=opts["dry_run"])
        except PermissionDeniedError as exc:
            raise CommandError(f"{opts['username']}: {exc.message}") from None
        except ImportRejected as exc:
            for error in exc.errors:
                self.stderr.write(f"{path.name}: {error}")
            raise CommandError(exc.message) from None
        except ValidationError as exc:
            raise CommandError(f"{path.name}: " + " ".join(exc.messages)) from None
        except RegistryError as exc:
            raise CommandError(f"{path.name}: {exc.message}") from None
        for row in summary.rows:
            if row.check is not None:
                self.stdout.write(f"line {row.line}, {row.mark}: against the published position, {row.check['words']}")
        verb = "would record" if summary.dry_run else "recorded"
        marks = len({r.mark for r in summary.rows})
        self.stdout.write(
            f"{path.name} (sha256 {summary.sha256[:12]}): {verb} {summary.occupations} occupation(s) of "
            f"{marks} mark(s), {summary.positions_proposed} with a result proposed as a new position."
            + (" Dry run: nothing was changed." if summary.dry_run else "")
        )
