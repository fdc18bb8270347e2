"""The check-mark policy: which trusted marks to occupy as check shots, and what discrepancy each may show.

Check marks: marks passing every rule, not one of the chosen bases, within ``CHECK_NEAR_M`` of the
site (preferring stable, well-positioned marks — :func:`is_preferred_check` — and among them those within 250 m or 10 % of the site radius when there are enough) and within the
maximum baseline of a chosen base; the one nearest the site first, then farthest-point selection
away from the chosen ones and the bases. Each gets the largest check-shot discrepancy still
consistent at 95 % from each chosen base, with its terms (rover centring on the check mark included; base and check
positions taken as independent, which makes the allowance lenient when they come from one
adjustment: :func:`registry.geodesy.rtk.check_shot_allowance_mm`).
"""

from __future__ import annotations

import math

import numpy as np

from registry.geodesy import rtk
from registry.services.screening import rules
from registry.services.screening.params import ScreeningSettings
from registry.services.screening.result import Candidate, CheckMark

#: Check marks are looked for within this distance of the site (m).
CHECK_NEAR_M = 2_000.0
#: Marks this close to the site (the larger of 250 m and 10 % of the site radius) are preferred as
#: check marks when there are enough of them; otherwise any within ``CHECK_NEAR_M``.
CHECK_CLOSE_MIN_M = 250.0
CHECK_CLOSE_FRACTION = 0.10
#: How many check marks to suggest.
CHECK_MARK_COUNT = 2
#: Expected stability of a preferred check mark (our own scale, registry.models.Stability).
CHECK_STABLE = ("high", "moderate")
#: A preferred check mark's own 95 % figure (2.4477 × its horizontal σ, 1.96 × its vertical σ, with drift
#: and motion) is at most this fraction of the tolerance, so that a check shot tests the base, not the mark.
CHECK_WELL_POSITIONED_FRACTION = 0.5


def is_preferred_check(c: Candidate, s: ScreeningSettings) -> bool:
    """Stable (high or moderate expected stability) and well positioned (module constants)."""
    own_h = rtk.K_H95 * math.sqrt(c.base_h_mm**2 + c.drift_h_mm**2 + c.motion_h_mm**2)
    own_v = rtk.K_V95 * math.sqrt(c.base_v_mm**2 + c.drift_v_mm**2 + c.motion_v_mm**2)
    return (
        c.mark.stability in CHECK_STABLE
        and own_h <= CHECK_WELL_POSITIONED_FRACTION * s.tol_h_mm
        and own_v <= CHECK_WELL_POSITIONED_FRACTION * s.tol_v_mm
    )


def choose_check_marks(s: ScreeningSettings, ordered: list[Candidate], chosen: list[Candidate]) -> list[CheckMark]:
    """Check marks for the ``chosen`` bases, from the ranked candidates (module docstring)."""
    if not chosen:
        return []
    rule_ok = [
        c
        for c in ordered
        if c.position is not None
        and c not in chosen
        and all(r == rules.REASON_BEYOND_MAX_BASELINE for r in c.reasons)
        and c.distance_m <= CHECK_NEAR_M
        and any(math.hypot(c.e_m - b.e_m, c.n_m - b.n_m) <= s.max_baseline_m for b in chosen)
    ]
    if not rule_ok:
        return []
    # Prefer stable, well-positioned marks when there are enough of them.
    preferred = [c for c in rule_ok if is_preferred_check(c, s)]
    if len(preferred) >= CHECK_MARK_COUNT:
        rule_ok = preferred
    # Prefer marks on or close to the site when there are enough of them ("spread over the site").
    close_m = max(CHECK_CLOSE_MIN_M, CHECK_CLOSE_FRACTION * s.site_radius_m)
    close = [c for c in rule_ok if c.distance_m <= close_m]
    if len(close) >= CHECK_MARK_COUNT:
        rule_ok = close
    e = np.array([c.e_m for c in rule_ok])
    n = np.array([c.n_m for c in rule_ok])
    first = int(np.argmin([c.distance_m for c in rule_ok]))
    picks = rtk.farthest_point_selection(
        e, n, first=first, count=CHECK_MARK_COUNT, avoid_e_m=[b.e_m for b in chosen], avoid_n_m=[b.n_m for b in chosen]
    )
    out = []
    for i in picks:
        c = rule_ok[i]
        allowances = []
        for b in chosen:
            d = math.hypot(c.e_m - b.e_m, c.n_m - b.n_m)
            if d > s.max_baseline_m:
                continue
            terms = rtk.check_shot_terms_mm(
                d,
                model=s.model,
                base_h_mm=b.base_h_mm,
                base_v_mm=b.base_v_mm,
                base_drift_h_mm=b.drift_h_mm,
                base_drift_v_mm=b.drift_v_mm,
                base_motion_h_mm=b.motion_h_mm,
                base_motion_v_mm=b.motion_v_mm,
                check_h_mm=c.base_h_mm,
                check_v_mm=c.base_v_mm,
                check_drift_h_mm=c.drift_h_mm,
                check_drift_v_mm=c.drift_v_mm,
                check_motion_h_mm=c.motion_h_mm,
                check_motion_v_mm=c.motion_v_mm,
            )
            h = rtk.K_H95 * math.sqrt(sum(th * th for th, _ in terms.values()))
            v = rtk.K_V95 * math.sqrt(sum(tv * tv for _, tv in terms.values()))
            allowances.append(
                {
                    "base": b.mark.code,
                    "baseline_m": round(d, 6),
                    "horizontal_95_mm": round(float(h), 3),
                    "vertical_95_mm": round(float(v), 3),
                    "tolerance_horizontal_95_mm": s.tol_h_mm,
                    "tolerance_vertical_95_mm": s.tol_v_mm,
                    "terms": [
                        {"term": name, "h_mm": round(th, 3), "v_mm": round(tv, 3)} for name, (th, tv) in terms.items()
                    ],
                }
            )
        out.append(CheckMark(c, allowances))
    return out
