"""One presenter of a screening for every reader: the API and ``screen_bases --json`` (JSON document),
the job page (rows and figures), the command's text table and the field export.

Rounding for JSON: mm to 1 decimal, m to 3, degrees to 9 places, fractions to 4.
"""

from __future__ import annotations

import math
from typing import Any

from registry.geodesy import rtk
from registry.services.screening import rules
from registry.services.screening.result import Candidate, ScreeningResult
from registry.services.screening.statement import BUDGET_TERM_DESCRIPTIONS, error_model_words


def screening_document(result: ScreeningResult) -> dict[str, Any]:
    """The screening as plain JSON values; mm to 1 decimal, m to 3, degrees to 9, fractions to 4.

    The API, ``screen_bases --json`` and the control report print this document.
    """
    s = result.settings
    core = result.core
    return {
        "job": s.job_code,
        "as_of": result.as_of.isoformat(),
        "site": {
            "geojson": s.site_geojson,
            "kind": s.site.kind,
            "reference_lat_deg": round(s.site.ref_lat_deg, 9),
            "reference_lon_deg": round(s.site.ref_lon_deg, 9),
            "area_m2": round(result.grid.area_m2, 1),
            "grid_spacing_m": round(result.grid.spacing_m, 3),
            "grid_cells": result.grid.n_cells,
            "boundary_samples": int((~result.grid.is_cell).sum()),
            "heights_given": len(s.site.heights_m),
        },
        "frame": {"epsg": s.frame_epsg, "name": result.frame_label},
        "deliverable_grid": result.grid_label,
        "epoch_yr": s.epoch_yr,
        "tolerances": {"horizontal_95_mm": s.tol_h_mm, "vertical_95_mm": s.tol_v_mm},
        "settings": {
            "rtk_h_fixed_mm": s.model.h_fixed_mm,
            "rtk_h_ppm": s.model.h_ppm,
            "rtk_v_fixed_mm": s.model.v_fixed_mm,
            "rtk_v_ppm": s.model.v_ppm,
            "rtk_combination": s.model.combination,
            "rtk_h_meaning": s.model.h_meaning,
            "rtk_reading": error_model_words(s),
            "setup_h_mm": s.model.setup_h_mm,
            "setup_v_mm": s.model.setup_v_mm,
            "rover_h_mm": s.model.rover_h_mm,
            "rover_v_mm": s.model.rover_v_mm,
            "assumed_rate_mm_yr": s.assumed_rate_mm_yr,
            "assumed_rate_plate_fixed_mm_yr": s.assumed_rate_plate_fixed_mm_yr,
            "frame_kind": "dynamic" if s.frame_is_dynamic else "plate-fixed",
            # the rate of the job's kind of frame: the motion term to the field date (an epoch change takes the
            # rate of the frame the coordinates are held in: the two above)
            "assumed_rate_used_mm_yr": s.epoch_rate_mm_yr,
            "field_date": None if result.field_date is None else result.field_date.isoformat(),
            "field_date_given": s.field_date is not None,
            "vertical_deliverable": s.vertical_deliverable,
            "geoid_model": s.geoid_label if s.vertical_deliverable == "orthometric" else None,
            "geoid_sigma_mm": s.geoid_v_mm,
            "plate_model": s.plate or None,
            "max_baseline_m": s.max_baseline_m,
            "recovery_years": s.recovery_years,
        },
        "candidates": [_candidate_dict(c) for c in result.candidates],
        "best_pair": _best_pair_dict(result),
        "chosen_bases": [c.mark.code for c in result.chosen],
        "service_areas": service_shares(result),
        "check_marks": [
            {
                "code": cm.candidate.mark.code,
                "distance_m": _m(cm.candidate.distance_m),
                "lat_deg": _deg(cm.candidate.lat_deg),
                "lon_deg": _deg(cm.candidate.lon_deg),
                "h_m": _m(cm.candidate.h_m),
                "allowances": cm.allowances,
            }
            for cm in result.check_marks
        ],
        "achievable": None
        if core is None
        else {
            "horizontal_95_mm": _mm(core.achievable_h95_mm),
            "vertical_95_mm": _mm(core.achievable_v95_mm),
            "coverage_any_base": round(core.any_coverage, 4),
            "from_different_bases": core.achievable_split,
        },
        "statement": result.statement,
        "warnings": result.warnings,
        "cautions": list(result.cautions),
    }


# Machine output keeps its precision: JSON carries millimetres to 0.001 mm and metres to 1 µm (rounding
# for reading belongs to the page, the text report and the PDFs).
def _mm(x) -> float | None:
    return None if x is None or not math.isfinite(x) else round(float(x), 3)


def _m(x) -> float | None:
    return None if x is None or not math.isfinite(x) else round(float(x), 6)


def _deg(x) -> float | None:
    return None if x is None else round(float(x), 9)


def _candidate_dict(c: Candidate) -> dict[str, Any]:
    p = c.position
    return {
        "rank": c.rank,
        "code": c.mark.code,
        "name": c.mark.name,
        "distance_m": _m(c.distance_m),
        "max_distance_m": _m(c.max_distance_m),
        "azimuth_deg": None if c.azimuth_deg is None else round(c.azimuth_deg, 6),
        "lat_deg": _deg(c.lat_deg),
        "lon_deg": _deg(c.lon_deg),
        "h_m": _m(c.h_m),
        "position": None
        if p is None
        else {"id": p.pk, "frame_epsg": p.frame_epsg, "epoch_yr": p.epoch_yr, "source": p.source},
        "horizontal_95_mm": _mm(c.h95_mm),
        "vertical_95_mm": _mm(c.v95_mm),
        "margin_mm": _mm(c.margin_mm),
        "coverage": round(float(c.coverage), 4),
        "covers_site": c.covers_site,
        "reaches_whole_site": c.reaches_site,
        "coverage_words": c.coverage_words,
        "max_height_difference_m": _m(c.max_dh_m),
        "excluded": c.excluded,
        "reasons": [{"code": r, "words": rules.REASON_WORDS[r]} for r in c.reasons],
        "budget": None
        if c.budget is None
        else [
            {"term": t, "h_mm": _mm(c.budget[t]["h"]), "v_mm": _mm(c.budget[t]["v"]), "description": d}
            for t, d in ((t, term_description(c, t, d)) for t, d in BUDGET_TERM_DESCRIPTIONS)
        ],
        "velocity_mm_yr": None if c.velocity_mm_yr is None else [round(x, 3) for x in c.velocity_mm_yr],
        "motion_offset_mm": None if c.motion_offset_mm is None else [round(x, 3) for x in c.motion_offset_mm],
        "sigma_h_mm": None if c.budget is None else _mm(c.budget["sigma_h"]),
        "sigma_v_mm": None if c.budget is None else _mm(c.budget["sigma_v"]),
        "steps": c.steps,
        "warnings": c.warnings,
    }


def candidate_row(c: Candidate, role: str) -> dict[str, Any]:
    """One candidate for the job page: its figures, its role ("base", "check" or "") and reasons in words."""
    dh_known = math.isfinite(c.max_dh_m)
    return {
        "c": c,
        "role": role,
        "budget": c.budget,
        "coverage_pct": c.coverage * 100,
        "reasons": [(r, rules.REASON_WORDS[r]) for r in c.reasons],
        "dh_m": c.max_dh_m if dh_known else None,
        "dh_warn": dh_known and c.max_dh_m > rtk.HEIGHT_DIFFERENCE_WARN_M,
        "base_title": c.base_description() if c.budget else "",
        "motion_warn": any(c.mark.code in w and "moves relative to the site" in w for w in c.warnings),
    }


def _best_pair_dict(result: ScreeningResult) -> dict[str, Any] | None:
    """The best pair of bases and what it achieves; None when the screening found no pair."""
    core = result.core
    if result.pair is None or core is None:
        return None
    return {
        "bases": [result.pair[0].mark.code, result.pair[1].mark.code],
        "coverage": round(core.pair_coverage, 4),
        "covers_site": core.pair_worst_margin_mm >= 0,
        "worst_horizontal_95_mm": _mm(core.pair_worst_h95_mm),
        "worst_vertical_95_mm": _mm(core.pair_worst_v95_mm),
        "worst_margin_mm": _mm(core.pair_worst_margin_mm),
    }


def page_figures(result: ScreeningResult) -> dict[str, Any]:
    """The job page's rows (usable and excluded, with roles), the exclusions counted by reason, and coverage."""
    core = result.core
    chosen_ids = {id(c) for c in result.chosen}
    check_ids = {id(cm.candidate) for cm in result.check_marks}
    usable_rows: list[dict[str, Any]] = []
    excluded_rows: list[dict[str, Any]] = []
    for c in result.candidates:
        role = "base" if id(c) in chosen_ids else ("check" if id(c) in check_ids else "")
        (excluded_rows if c.excluded else usable_rows).append(candidate_row(c, role))
    # Each excluded mark is counted once, under the first reason the rules give it, so the counts add up to
    # the number excluded; how many of them have further reasons is said beside it.
    reason_counts: dict[str, int] = {}
    further: dict[str, int] = {}
    for row in excluded_rows:
        if not row["reasons"]:
            continue
        first = row["reasons"][0][0]
        reason_counts[first] = reason_counts.get(first, 0) + 1
        if len(row["reasons"]) > 1:
            further[first] = further.get(first, 0) + 1
    by_reason = [
        {"code": code, "words": rules.REASON_WORDS[code], "count": n, "with_further": further.get(code, 0)}
        for code, n in sorted(reason_counts.items(), key=lambda kv: (-kv[1], kv[0]))
    ]
    return {
        "usable_rows": usable_rows,
        "excluded_rows": excluded_rows,
        "excluded_by_reason": by_reason,
        "pair_coverage_pct": None if core is None or result.pair is None else core.pair_coverage * 100,
        "any_coverage_pct": None if core is None else core.any_coverage * 100,
        "budget_terms": dict(BUDGET_TERM_DESCRIPTIONS),
        "error_model_text": error_model_words(result.settings),
        "service_shares": {d["base"]: d["share"] * 100 for d in service_shares(result)},
    }


def term_description(c: Candidate, term: str, default: str) -> str:
    """A budget term's description for one candidate (the base and motion terms say where theirs came from)."""
    if term == "base":
        return c.base_description()
    if term == "motion" and c.motion_note:
        return f"{default}: {c.motion_note}"
    return default


def service_shares(result: ScreeningResult) -> list[dict[str, Any]]:
    """Per chosen base, the share of the site's cells it serves (within tolerance, best margin there)."""
    if result.assignment is None:
        return []
    cells = result.grid.is_cell
    n = max(int(cells.sum()), 1)
    return [
        {"base": c.mark.code, "share": round(float(((result.assignment == i) & cells).sum()) / n, 4)}
        for i, c in enumerate(result.chosen)
    ]


def job_answer(result: ScreeningResult) -> dict[str, Any]:
    """The screening's answer in one line for the jobs list and the head of the job page.

    ``kind``: ``"one"`` (one base covers the whole site), ``"several"`` (the chosen bases together cover it,
    each part from the base that serves it), ``"none"`` (the site cannot be covered from the marks available).
    ``worst_h95_mm`` / ``worst_v95_mm``: the worst rover figure over the site — from the one base, from the
    covering pair (each point from the better base), or, for a wider cover or no cover, the worst over the
    site of the best base at each point (what switching bases could reach). The figures are the screening's
    own; nothing is decided here that the screening has not decided.
    """
    core = result.core
    usable = result.usable_candidates
    if core is None or not usable:
        return {
            "kind": "none",
            "bases": 0,
            "words": "cannot be covered: no usable base near the site",
            "worst_h95_mm": None,
            "worst_v95_mm": None,
        }
    best = usable[0]
    if best.covers_site:
        return {
            "kind": "one",
            "bases": 1,
            "words": f"covered by one base ({best.mark.code})",
            "worst_h95_mm": _mm(best.h95_mm),
            "worst_v95_mm": _mm(best.v95_mm),
        }
    n = len(result.chosen)
    if n == 2 and result.pair is not None and core.pair_worst_margin_mm >= 0:
        return {
            "kind": "several",
            "bases": 2,
            "words": "needs 2 bases",
            "worst_h95_mm": _mm(core.pair_worst_h95_mm),
            "worst_v95_mm": _mm(core.pair_worst_v95_mm),
        }
    worst_h, worst_v = _mm(core.achievable_h95_mm), _mm(core.achievable_v95_mm)
    if n > 2 and core.cover_coverage >= 1.0:
        return {
            "kind": "several",
            "bases": n,
            "words": f"needs {n} bases",
            "worst_h95_mm": worst_h,
            "worst_v95_mm": worst_v,
        }
    reach = f"{core.any_coverage * 100:.0f} % of the site within tolerance"
    return {
        "kind": "none",
        "bases": 0,
        "words": f"cannot be covered ({reach})",
        "worst_h95_mm": worst_h,
        "worst_v95_mm": worst_v,
    }
