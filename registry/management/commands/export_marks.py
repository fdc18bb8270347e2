"""``python manage.py export_marks [--format csv|geojson] [--frame EPSG] [--output FILE]``."""

from __future__ import annotations

from pathlib import Path

from django.core.management.base import BaseCommand, CommandError

from registry.io.common import frame_problem
from registry.io.export import EXPORT_FORMATS, export_marks_text


class Command(BaseCommand):
    help = (
        "Write every mark and all its currently published positions as CSV or GeoJSON, in the format "
        "import_marks reads: one row (feature) per (mark, published position), ordered by code and frame; "
        "a mark without a published position takes one row without a position. Each row carries the mark's "
        "version and the position's position_revision, which import_marks --update checks. --frame keeps "
        "only positions in that frame. Not carried: history (superseded positions, occupations, visits, "
        "attachments, the audit trail); that is in the database backup (deploy/README.md)."
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
            fmt = "geojson" if output and Path(output).suffix.lower() in (".geojson", ".json") else "csv"
        frame = opts["frame"]
        if frame is not None:
            problem = frame_problem(frame) if frame > 0 else f"EPSG:{frame} is not a valid code"
            if problem:
                raise CommandError(problem)
        text = export_marks_text(fmt=fmt, frame_epsg=frame)
        if output:
            try:
                Path(output).write_bytes(text.encode("utf-8"))
            except OSError as exc:
                raise CommandError(f"cannot write {output}: {exc.strerror}") from None
            self.stderr.write(f"wrote {output} ({fmt})")
        else:
            self.stdout.write(text, ending="")
