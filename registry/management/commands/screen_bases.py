"""Screen the registry's marks as RTK bases for a stored job or an ad-hoc site.

    python manage.py screen_bases J-2025-014 [--json] [--as-of 2025-07-01]
    python manage.py screen_bases --site-geojson site.geojson --frame 6319 --epoch 2025.5 \\
        --tol-h-mm 20 --tol-v-mm 30 [--max-baseline-m 10000] [--rtk-combination rss] [--json]

Like any ``manage.py`` command it runs with the server's own authority (no user). The
screening is the same call the job page and the API make (``registry.services.screening``).
``--json`` prints the same document as ``GET /api/jobs/<code>/screening/``: candidates (each
with code, distance_m, horizontal_95_mm, vertical_95_mm, coverage, coverage_words ("covers site",
"covers N %", "covers none"), max_height_difference_m, excluded, reasons and the budget with one
entry per term and its description), best_pair, check_marks, the statement and the cautions.
"""

from __future__ import annotations

import datetime as dt
import json
from pathlib import Path

from django.core.exceptions import ValidationError
from django.core.management.base import BaseCommand, CommandError

from registry.models import Job
from registry.services.screening import run_screening, settings_from_data, settings_from_job, text_report


class Command(BaseCommand):
    help = "Rank the registry's marks as RTK bases for a job (or an ad-hoc site), with error budgets and check marks."

    def add_arguments(self, parser):
        parser.add_argument("job_code", nargs="?", help="Code of a stored job.")
        parser.add_argument("--json", action="store_true", help="Print the result as JSON.")
        parser.add_argument("--as-of", help="Screen as of this date (YYYY-MM-DD; default today, UTC).")
        adhoc = parser.add_argument_group("ad-hoc site (instead of a job code)")
        adhoc.add_argument("--site-geojson", help="File holding a GeoJSON Point or Polygon ('-' for standard input).")
        adhoc.add_argument("--frame", type=int, help="Deliverable frame, EPSG code of a geographic 3D CRS.")
        adhoc.add_argument("--epoch", type=float, help="Deliverable epoch, decimal year.")
        adhoc.add_argument("--tol-h-mm", type=float, help="Horizontal tolerance, 95 %% circle, mm.")
        adhoc.add_argument("--tol-v-mm", type=float, help="Vertical tolerance, 95 %%, mm.")
        adhoc.add_argument("--max-baseline-m", type=float)
        adhoc.add_argument("--grid-spacing-m", type=float)
        adhoc.add_argument("--rtk-combination", choices=["additive", "rss"])
        adhoc.add_argument("--rtk-h-meaning", choices=["per_axis", "drms"])

    def handle(self, *args, **opts):
        as_of = None
        if opts["as_of"]:
            try:
                as_of = dt.date.fromisoformat(opts["as_of"])
            except ValueError:
                raise CommandError("--as-of must be a date as YYYY-MM-DD.") from None
        try:
            settings = self._settings(opts)
            result = run_screening(settings, as_of=as_of)
        except ValidationError as exc:
            raise CommandError(_words(exc)) from None
        if opts["json"]:
            self.stdout.write(json.dumps(result.as_dict(), indent=1, ensure_ascii=False))
        else:
            self._print(result)

    def _settings(self, opts):
        if opts["job_code"]:
            if opts["site_geojson"]:
                raise CommandError("Give either a job code or --site-geojson, not both.")
            try:
                return settings_from_job(Job.objects.get(code=opts["job_code"]))
            except Job.DoesNotExist:
                raise CommandError(f"No job with code {opts['job_code']!r}.") from None
        if not opts["site_geojson"]:
            raise CommandError(
                "Give a job code, or an ad-hoc site with --site-geojson FILE --frame --epoch --tol-h-mm --tol-v-mm."
            )
        src = opts["site_geojson"]
        try:
            text = self.stdin.read() if src == "-" and hasattr(self, "stdin") else Path(src).read_text(encoding="utf-8")
        except OSError as exc:
            raise CommandError(f"Cannot read {src}: {exc.strerror}.") from None
        data = {
            "site_geojson": text,
            "frame_epsg": opts["frame"],
            "epoch_yr": opts["epoch"],
            "tol_h_mm": opts["tol_h_mm"],
            "tol_v_mm": opts["tol_v_mm"],
        }
        for opt, field in (
            ("max_baseline_m", "max_baseline_m"),
            ("grid_spacing_m", "grid_spacing_m"),
            ("rtk_combination", "rtk_combination"),
            ("rtk_h_meaning", "rtk_h_meaning"),
        ):
            if opts[opt] is not None:
                data[field] = opts[opt]
        return settings_from_data({k: v for k, v in data.items() if v is not None})

    def _print(self, result):
        for line in text_report(result):
            self.stdout.write(line)


def _words(exc: ValidationError) -> str:
    if hasattr(exc, "error_dict"):
        return "; ".join(
            f"{field}: {' '.join(str(m) for m in e.messages)}"
            for field, e in ((f, ValidationError(v)) for f, v in exc.error_dict.items())
        )
    return " ".join(exc.messages)
