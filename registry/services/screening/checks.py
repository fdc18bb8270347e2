"""The check-mark policy: which trusted marks to occupy as check shots, and what discrepancy each may show.

Check marks: marks passing every rule, not one of the chosen bases, within ``CHECK_NEAR_M`` of the
site (preferring those within 250 m or 10 % of the site radius when there are enough) and within the
maximum baseline of a chosen base; the one nearest the site first, then farthest-point selection
away from the chosen ones and the bases. Each gets the largest check-shot discrepancy still
consistent at 95 % from each chosen base (rover centring on the check mark included; base and check
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
            h, v = rtk.check_shot_allowance_mm(
                d,
                model=s.model,
                base_h_mm=b.base_h_mm,
                base_v_mm=b.base_v_mm,
                base_drift_h_mm=b.drift_h_mm,
                base_drift_v_mm=b.drift_v_mm,
                check_h_mm=c.base_h_mm,
                check_v_mm=c.base_v_mm,
                check_drift_h_mm=c.drift_h_mm,
                check_drift_v_mm=c.drift_v_mm,
            )
            allowances.append(
                {
                    "base": b.mark.code,
                    "baseline_m": round(d, 3),
                    "horizontal_95_mm": round(float(h), 1),
                    "vertical_95_mm": round(float(v), 1),
                }
            )
        out.append(CheckMark(c, allowances))
    return out
