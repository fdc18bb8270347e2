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
import math
from pathlib import Path

from django.core.exceptions import ValidationError
from django.core.management.base import BaseCommand, CommandError

from registry.models import Job
from registry.services.screening import run_screening, settings_from_data, settings_from_job


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
        s = result.settings
        w = self.stdout.write
        w(f"Base screening {'for job ' + s.job_code if s.job_code else 'for an ad-hoc site'} (as of {result.as_of})")
        w(
            f"  frame {result.frame_label}, epoch {s.epoch_yr:.3f}; tolerances {s.tol_h_mm:.1f} mm H / "
            f"{s.tol_v_mm:.1f} mm V at 95 %; site: {s.site.kind}, {result.grid.n_cells} cells"
        )
        w("")
        w(
            f"{'#':>3} {'mark':<14} {'state':<13} {'dist m':>10} {'H95 mm':>7} {'V95 mm':>7} {'margin':>7} {'cover %':>7} "
            f"{'|Δh| m':>7}  budget H rtk/base/drift/setup | V ...   reasons"
        )
        for c in result.candidates:
            state = "excluded" if c.excluded else c.coverage_words
            dh = f"{c.max_dh_m:7.1f}" if math.isfinite(c.max_dh_m) else f"{'—':>7}"
            if c.budget:
                b = c.budget
                budget = (
                    f"{b['rtk']['h']:.1f}/{b['base']['h']:.1f}/{b['drift']['h']:.1f}/{b['setup']['h']:.1f} | "
                    f"{b['rtk']['v']:.1f}/{b['base']['v']:.1f}/{b['drift']['v']:.1f}/{b['setup']['v']:.1f}"
                )
                nums = f"{c.h95_mm:7.1f} {c.v95_mm:7.1f} {c.margin_mm:7.1f} {c.coverage * 100:7.1f}"
            else:
                budget, nums = "no usable position", f"{'—':>7} {'—':>7} {'—':>7} {'—':>7}"
            w(
                f"{c.rank:>3} {c.mark.code:<14} {state:<13} {c.distance_m:10.1f} {nums} {dh}  {budget}   "
                f"{', '.join(c.reasons)}"
            )
        w("")
        if s.site.heights_m:
            w(
                f"|Δh|: largest ellipsoidal height difference from the base to the site's {len(s.site.heights_m)} "
                "given height(s); not part of the budget."
            )
        else:
            w("|Δh|: not computed, the site has no heights (give ellipsoidal heights as GeoJSON third coordinates).")
        for c in result.chosen:
            w(f"Base term of {c.mark.code}: {c.base_description()}.")
        if result.pair:
            core = result.core
            w(
                f"Best pair: {result.pair[0].mark.code} + {result.pair[1].mark.code}: covers {core.pair_coverage * 100:.1f} % "
                f"(worst {core.pair_worst_h95_mm:.1f} mm H, {core.pair_worst_v95_mm:.1f} mm V)"
            )
        w("Chosen bases: " + (", ".join(c.mark.code for c in result.chosen) or "none"))
        for cm in result.check_marks:
            parts = "; ".join(
                f"from {a['base']} ({a['baseline_m']:.0f} m): {a['horizontal_95_mm']:.1f} mm H, "
                f"{a['vertical_95_mm']:.1f} mm V"
                for a in cm.allowances
            )
            w(f"Check mark {cm.candidate.mark.code}: largest discrepancy consistent at 95 % {parts}")
        w("")
        w(result.statement)
        for warning in result.warnings:
            w(f"Warning: {warning}")
        w("")
        for caution in result.cautions:
            w(f"Caution: {caution}")


def _words(exc: ValidationError) -> str:
    if hasattr(exc, "error_dict"):
        return "; ".join(
            f"{field}: {' '.join(str(m) for m in e.messages)}"
            for field, e in ((f, ValidationError(v)) for f, v in exc.error_dict.items())
        )
    return " ".join(exc.messages)
