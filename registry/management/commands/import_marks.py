"""``python manage.py import_marks FILE --as USERNAME [--format csv|geojson] [--update [--overwrite]] [--dry-run]``."""

from __future__ import annotations

from pathlib import Path

from django.core.exceptions import ValidationError
from django.core.management.base import CommandError

from registry.errors import PermissionDeniedError
from registry.management.common import HelpAsWrittenCommand, actor_by_username, read_input_file
from registry.services.imports import FORMATS, ImportRejected, mark_import

HELP = """\
Import marks and their published positions from a CSV or GeoJSON file, as a manager:

  python manage.py import_marks marks.csv --as USERNAME
  python manage.py import_marks marks.csv --as USERNAME --update      (a file from export_marks)

--as names the user the audit trail records. Imports are for managers: every position in the file is
published on import, and only a manager may publish positions (technicians propose them on the
position pages).

All or nothing: a file with any bad row changes nothing, and every bad row is listed.

A file may hold several rows per mark code, one per frame (as export_marks writes it): the first row
creates or updates the mark, every row publishes its position. The same frame twice for one mark is
an error.

--update applies rows whose code exists, if the row's version (and, with a position, its
position_revision) still match the registry; a row exported before someone changed the mark or
published a position in that frame is refused (stale_row), with who changed it and when. Rows of
existing marks without those columns are refused unless --overwrite is also given (then they are
applied against what is stored now, and the audit trail says so).

An export carries marks and all their currently published positions; it does not carry history
(superseded positions, occupations, visits, attachments): that is in the database backup
(deploy/README.md).
"""


class Command(HelpAsWrittenCommand):
    help = HELP

    def add_arguments(self, parser):
        parser.add_argument("file", help="path of a .csv or .geojson file")
        parser.add_argument(
            "--as", dest="username", required=True, help="user to import as (manager role; recorded in the audit)"
        )
        parser.add_argument("--format", choices=FORMATS, help="override the format guessed from the extension")
        parser.add_argument(
            "--update",
            action="store_true",
            help="apply rows whose code already exists, if their version matches (default: such rows are errors)",
        )
        parser.add_argument(
            "--overwrite",
            action="store_true",
            help="with --update: also apply rows of existing marks that carry no version (audited as such)",
        )
        parser.add_argument("--dry-run", action="store_true", help="check and report, then change nothing")

    def handle(self, *args, **opts):
        if opts["overwrite"] and not opts["update"]:
            raise CommandError("--overwrite needs --update (it concerns rows of marks that already exist).")
        path = Path(opts["file"])
        content = read_input_file(path)
        actor = actor_by_username(opts["username"])
        try:
            summary = mark_import(
                actor=actor,
                content=content,
                filename=path.name,
                fmt=opts["format"],
                update=opts["update"],
                overwrite=opts["overwrite"],
                dry_run=opts["dry_run"],
            )
        except PermissionDeniedError as exc:
            raise CommandError(
                f"{opts['username']}: {exc.message} Imports need the manager role (an import publishes positions)."
            ) from None
        except ValidationError as exc:
            raise CommandError(" ".join(exc.messages)) from None
        except ImportRejected as exc:
            for error in exc.errors:
                self.stderr.write(f"{path.name}: {error}")
            raise CommandError(exc.message) from None
        verb = "would import" if summary.dry_run else "imported"
        self.stdout.write(
            f"{path.name} ({summary.format}, sha256 {summary.sha256[:12]}): {verb} {summary.rows} row(s): "
            f"{len(summary.created)} created, {len(summary.updated)} updated, {len(summary.unchanged)} unchanged, "
            f"{summary.positions_published} position(s) published."
            + (
                f" {len(summary.unversioned)} mark(s) applied without a version check (--overwrite)."
                if summary.unversioned
                else ""
            )
            + (" Dry run: nothing was changed." if summary.dry_run else "")
        )
