"""The screening as a plain-text table for a terminal (``manage.py screen_bases`` without ``--json``)."""

from __future__ import annotations

import math

from registry.services.screening.present import service_shares
from registry.services.screening.result import ScreeningResult
from registry.services.screening.statement import error_model_words


def text_report(result: ScreeningResult) -> list[str]:
    """The lines of the text report: settings, one row per candidate, the choice, check marks, statement."""
    s = result.settings
    lines: list[str] = []
    w = lines.append
    w(f"Base screening {'for job ' + s.job_code if s.job_code else 'for an ad-hoc site'} (as of {result.as_of})")
    w(
        f"  frame {result.frame_label} ({'dynamic' if s.frame_is_dynamic else 'plate-fixed'}), epoch "
        f"{s.epoch_yr:.3f}; tolerances {s.tol_h_mm:.1f} mm H / {s.tol_v_mm:.1f} mm V at 95 %; "
        f"site: {s.site.kind}, {result.grid.n_cells} cells"
    )
    if result.grid_label:
        w(f"  deliverable grid {result.grid_label}")
    w(f"  RTK error model: {error_model_words(s)}")
    w(
        f"  base setup {s.model.setup_h_mm:g} / {s.model.setup_v_mm:g} mm, rover pole {s.model.rover_h_mm:g} / "
        f"{s.model.rover_v_mm:g} mm (1σ, per axis / height); assumed rate for marks without a velocity "
        f"{s.assumed_rate_mm_yr:g} mm/yr per axis in a dynamic frame, {s.assumed_rate_plate_fixed_mm_yr:g} in a "
        f"plate-fixed one (the frame the coordinates are held in); field date {result.field_date}"
        + ("" if s.field_date else " (the screening date: the job gives none)")
    )
    if s.vertical_deliverable == "orthometric":
        w(f"  vertical deliverable: orthometric heights with {s.geoid_label} (σ {s.geoid_v_mm:g} mm in the budget)")
    else:
        w("  vertical deliverable: ellipsoidal heights")
    w("")
    w(
        f"{'#':>3} {'mark':<14} {'state':<13} {'dist m':>10} {'far m':>10} {'H95 mm':>7} {'V95 mm':>7} {'margin':>7} "
        f"{'cover %':>7} {'|Δh| m':>7}  budget H rtk/base/drift/motion/setup/rover | V ... /geoid   reasons"
    )
    for c in result.candidates:
        state = "excluded" if c.excluded else c.coverage_words
        dh = f"{c.max_dh_m:7.1f}" if math.isfinite(c.max_dh_m) else f"{'—':>7}"
        if c.budget:
            b = c.budget
            hv = ("rtk", "base", "drift", "motion", "setup", "rover")
            budget = (
                "/".join(f"{b[t]['h']:.1f}" for t in hv) + " | " + "/".join(f"{b[t]['v']:.1f}" for t in (*hv, "geoid"))
            )
            nums = f"{c.h95_mm:7.1f} {c.v95_mm:7.1f} {c.margin_mm:7.1f} {c.coverage * 100:7.1f}"
        else:
            budget, nums = "no usable position", f"{'—':>7} {'—':>7} {'—':>7} {'—':>7}"
        w(
            f"{c.rank:>3} {c.mark.code:<14} {state:<13} {c.distance_m:10.1f} {c.max_distance_m:10.1f} {nums} {dh}  "
            f"{budget}   {', '.join(c.reasons)}"
        )
    w("")
    w(
        "dist m: to the nearest site point; far m: to the farthest site point, the distance the RTK term and the "
        "95 % figures use."
    )
    if s.site.heights_m:
        w(
            f"|Δh|: largest ellipsoidal height difference from the base to the site's {len(s.site.heights_m)} "
            "given height(s); not part of the budget."
        )
    else:
        w("|Δh|: not computed, the site has no heights (give ellipsoidal heights as GeoJSON third coordinates).")
    for c in result.chosen:
        w(f"Base term of {c.mark.code}: {c.base_description()}.")
        if c.motion_note:
            w(f"Motion term of {c.mark.code}: {c.motion_note}.")
    core = result.core
    if result.pair and core is not None:
        w(
            f"Best pair: {result.pair[0].mark.code} + {result.pair[1].mark.code}: covers {core.pair_coverage * 100:.1f} % "
            f"(worst {core.pair_worst_h95_mm:.1f} mm H, {core.pair_worst_v95_mm:.1f} mm V)"
        )
    w("Chosen bases: " + (", ".join(c.mark.code for c in result.chosen) or "none"))
    for share in service_shares(result):
        if len(result.chosen) > 1:
            w(
                f"  {share['base']} serves {share['share'] * 100:.1f} % of the site (within tolerance, outlined on the map)"
            )
    core = result.core
    if core is not None:
        if math.isfinite(core.achievable_h95_mm) and math.isfinite(core.achievable_v95_mm):
            w(
                f"Achievable with the best base at every point: {core.achievable_h95_mm:.1f} mm H, "
                f"{core.achievable_v95_mm:.1f} mm V"
                + (" (H and V from different bases at some points)" if core.achievable_split else "")
            )
        else:
            w("Achievable: part of the site is beyond the maximum baseline from every usable mark.")
    for cm in result.check_marks:
        parts = "; ".join(
            f"from {a['base']} ({a['baseline_m']:.0f} m): {a['horizontal_95_mm']:.1f} mm H, "
            f"{a['vertical_95_mm']:.1f} mm V (tolerance {a['tolerance_horizontal_95_mm']:.1f} / "
            f"{a['tolerance_vertical_95_mm']:.1f} mm; 1σ terms H/V: "
            + ", ".join(f"{t['term']} {t['h_mm']:.1f}/{t['v_mm']:.1f}" for t in a["terms"])
            + ")"
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
