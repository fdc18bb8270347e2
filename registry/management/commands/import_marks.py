"""``python manage.py import_marks FILE --as USERNAME [--format csv|geojson] [--update] [--dry-run]``."""

from __future__ import annotations

from pathlib import Path

from django.contrib.auth import get_user_model
from django.core.exceptions import ValidationError
from django.core.management.base import BaseCommand, CommandError

from registry.errors import PermissionDeniedError
from registry.services.imports import FORMATS, ImportRejected, mark_import


class Command(BaseCommand):
    help = (
        "Import marks (and one published position each, optionally) from a CSV or GeoJSON file. "
        "All or nothing: a file with any bad row changes nothing and every bad row is listed."
    )

    def add_arguments(self, parser):
        parser.add_argument("file", help="path of a .csv or .geojson file")
        parser.add_argument("--as", dest="username", required=True, help="user to import as (manager role)")
        parser.add_argument("--format", choices=FORMATS, help="override the format guessed from the extension")
        parser.add_argument(
            "--update",
            action="store_true",
            help="apply rows whose code already exists (default: such rows are errors)",
        )
        parser.add_argument("--dry-run", action="store_true", help="check and report, then change nothing")

    def handle(self, *args, **opts):
        path = Path(opts["file"])
        try:
            content = path.read_bytes()
        except OSError as exc:
            raise CommandError(f"cannot read {path}: {exc.strerror}") from None
        User = get_user_model()
        try:
            actor = User.objects.get(username=opts["username"])
        except User.DoesNotExist:
            raise CommandError(f"no user named {opts['username']!r}") from None
        try:
            summary = mark_import(
                actor=actor,
                content=content,
                filename=path.name,
                fmt=opts["format"],
                update=opts["update"],
                dry_run=opts["dry_run"],
            )
        except PermissionDeniedError as exc:
            raise CommandError(f"{opts['username']}: {exc.message} Imports need the manager role.") from None
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
            + (" Dry run: nothing was changed." if summary.dry_run else "")
        )
