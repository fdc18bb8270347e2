"""``python manage.py export_marks [--format csv|geojson|gpkg] [--frame EPSG] [--output FILE]``."""

from __future__ import annotations

from pathlib import Path

from django.core.management.base import BaseCommand, CommandError

from registry.io.common import frame_problem
from registry.io.export import EXPORT_FORMATS, export_marks_bytes


class Command(BaseCommand):
    help = (
        "Write every mark and all its currently published positions as CSV or GeoJSON, in the format "
        "import_marks reads: one row (feature) per (mark, published position), ordered by code and frame; "
        "a mark without a published position takes one row without a position. Each row carries the mark's "
        "version and the position's position_revision, which import_marks --update checks. --frame keeps "
        "only positions in that frame. Not carried: history (superseded positions, occupations, visits, "
        "attachments, the audit trail); that is in the database backup (deploy/README.md). GeoJSON holds one "
        "frame per file (--frame, default the office's export frame REGISTRY_EXPORT_FRAME); gpkg writes a "
        "GeoPackage with one layer per frame, each with its EPSG CRS (needs --output)."
    )

    def add_arguments(self, parser):
        parser.add_argument(
            "--format", choices=tuple(EXPORT_FORMATS), default=None, help="default: from --output, else csv"
        )
        parser.add_argument("--frame", type=int, default=None, help="EPSG code of the positions' frame, e.g. 7912")
        parser.add_argument("--output", "-o", default=None, help="file to write (default: standard output)")

    def handle(self, *args, **opts):
        fmt = opts["format"]
        output = opts["output"]
        if fmt is None:
            suffix = Path(output).suffix.lower() if output else ""
            fmt = {".geojson": "geojson", ".json": "geojson", ".gpkg": "gpkg"}.get(suffix, "csv")
        if fmt == "gpkg" and not output:
            raise CommandError("a GeoPackage is a binary file: give --output FILE.gpkg")
        frame = opts["frame"]
        if frame is not None:
            problem = frame_problem(frame) if frame > 0 else f"EPSG:{frame} is not a valid code"
            if problem:
                raise CommandError(problem)
        body = export_marks_bytes(fmt=fmt, frame_epsg=frame)
        if output:
            try:
                Path(output).write_bytes(body)
            except OSError as exc:
                raise CommandError(f"cannot write {output}: {exc.strerror}") from None
            self.stderr.write(f"wrote {output} ({fmt})")
        else:
            self.stdout.write(body.decode("utf-8"), ending="")
