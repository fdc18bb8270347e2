"""The screening as a plain-text table for a terminal (``manage.py screen_bases`` without ``--json``)."""

from __future__ import annotations

import math

from registry.services.screening.result import ScreeningResult


def text_report(result: ScreeningResult) -> list[str]:
    """The lines of the text report: settings, one row per candidate, the choice, check marks, statement."""
    s = result.settings
    lines: list[str] = []
    w = lines.append
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
    return lines
