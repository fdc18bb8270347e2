"""The motion term of base screening (``registry.services.screening.motion``), from its stated rule.

The module docstring states the rule: offset = (v_site − v_base)·Δt per axis; the term per axis is
√(offset² + (σ_rel·|Δt|)²), horizontal from the length of the east/north offset; the site's motion is
the per-axis median of at least three published velocities in the base's frame within reach, else
zero (plate-fixed frame, ± the plate-fixed rate) or unknown (dynamic frame, ± the dynamic rate); a
term above a third of the tolerance gets a warning. The expected values below are worked by hand from
that rule (3-4-5 triangles, so they can be checked without a calculator); medians are numpy's.
No database: candidates and settings are plain objects with the attributes the module reads.
"""

from __future__ import annotations

import datetime as dt
import math
from types import SimpleNamespace

import numpy as np
import pytest

from registry.geodesy.frames import date_to_decimal_year
from registry.services.screening import motion
from registry.services.screening.result import Candidate

FIELD_DAY = dt.date(2026, 7, 2)


def settings(*, dynamic: bool, years: float = 2.0, tol_h=1000.0, tol_v=1000.0):
    field_yr = date_to_decimal_year(FIELD_DAY)
    rate, plate_rate = 2.0, 0.5
    return SimpleNamespace(
        field_date=FIELD_DAY,
        epoch_yr=field_yr - years,
        frame_is_dynamic=dynamic,
        assumed_rate_mm_yr=rate,
        assumed_rate_plate_fixed_mm_yr=plate_rate,
        epoch_rate_mm_yr=rate if dynamic else plate_rate,
        tol_h_mm=tol_h,
        tol_v_mm=tol_v,
    )


def cand(code="B1", *, vel=None, vel_sigma=(0.0, 0.0, 0.0), frame=6319, distance_m=100.0):
    return Candidate(
        mark=SimpleNamespace(code=code),
        reasons=[],
        position=SimpleNamespace(frame_epsg=frame),
        velocity_mm_yr=vel,
        velocity_sigma_mm_yr=None if vel is None else vel_sigma,
        distance_m=distance_m,
    )


def test_base_with_velocity_in_a_plate_fixed_frame_without_neighbours():
    c = cand(vel=(3.0, 4.0, -1.5))
    motion.apply_site_motion([c], settings(dynamic=False), dt.date(2030, 1, 1), near_m=5000.0)
    # v_site = 0 ± 0.5 mm/yr; Δt = 2 yr: offset (−6, −8, +3) mm, spread 0.5 × 2 = 1 mm per axis
    assert c.motion_offset_mm == pytest.approx((-6.0, -8.0, 3.0), abs=1e-9)
    assert c.motion_h_mm == pytest.approx(math.hypot(10.0, 1.0), abs=1e-9)
    assert c.motion_v_mm == pytest.approx(math.hypot(3.0, 1.0), abs=1e-9)
    assert c.motion_note == (
        f"from the deliverable epoch {date_to_decimal_year(FIELD_DAY) - 2.0:.3f} to the field date 2026-07-02 "
        "(+2.00 yr); own velocity (+3.0, +4.0, -1.5 mm/yr); site motion: none in the plate-fixed frame, "
        "± 0.5 mm/yr (assumed rate; too few published velocities nearby); "
        "predicted offset -6.0 / -8.0 / +3.0 mm east / north / up"
    )
    assert c.warnings == []


def test_base_velocity_sigma_and_site_sigma_add_in_quadrature():
    c = cand(vel=(0.0, 0.0, 0.0), vel_sigma=(1.2, 0.3, 0.5))
    motion.apply_site_motion([c], settings(dynamic=False, years=-2.0), dt.date(2030, 1, 1), near_m=5000.0)
    # σ_rel = √(σ_base² + 0.5²): east √(1.44 + 0.25) = 1.3, up √(0.25 + 0.25); |Δt| = 2 yr
    assert c.motion_h_mm == pytest.approx(1.3 * 2.0, abs=1e-9)
    assert c.motion_v_mm == pytest.approx(math.sqrt(0.5) * 2.0, abs=1e-9)
    assert "(-2.00 yr)" in c.motion_note


def test_base_without_velocity_in_a_dynamic_frame_without_neighbours():
    c = cand(vel=None)
    motion.apply_site_motion([c], settings(dynamic=True, years=-1.5), dt.date(2030, 1, 1), near_m=5000.0)
    # moves with the site: no offset; ± 2 mm/yr over |Δt| = 1.5 yr on every axis
    assert c.motion_offset_mm is None
    assert (c.motion_h_mm, c.motion_v_mm) == pytest.approx((3.0, 3.0), abs=1e-9)
    assert c.motion_note.endswith(
        "(-1.50 yr); no velocity: assumed to move with the site; "
        "site motion unknown (too few published velocities nearby), ± 2 mm/yr"
    )


def test_base_with_velocity_in_a_dynamic_frame_without_neighbours_predicts_no_offset():
    c = cand(vel=(30.0, 40.0, 0.0))
    motion.apply_site_motion([c], settings(dynamic=True), dt.date(2030, 1, 1), near_m=5000.0)
    # the site's motion is unknown: no offset is predicted, the dynamic rate is the uncertainty
    assert c.motion_offset_mm is None
    assert (c.motion_h_mm, c.motion_v_mm) == pytest.approx((4.0, 4.0), abs=1e-9)
    assert "; own velocity; site motion unknown" in c.motion_note


def test_site_motion_is_the_median_of_three_velocities_in_the_frame_within_reach():
    near = 5000.0
    neighbours = [
        cand("N1", vel=(10.0, 20.0, 1.0), distance_m=10.0),
        cand("N2", vel=(12.0, 18.0, 3.0), distance_m=near),  # at the edge: counts
        cand("N3", vel=(11.0, 25.0, 2.0), distance_m=300.0),
        cand("FAR", vel=(90.0, 90.0, 90.0), distance_m=math.nextafter(near, math.inf)),
        cand("OTHER", vel=(-90.0, -90.0, -90.0), frame=7912, distance_m=10.0),
    ]
    base = cand("BASE", vel=(8.0, 17.0, 2.0), distance_m=50.0)
    motion.apply_site_motion([*neighbours, base], settings(dynamic=True), dt.date(2030, 1, 1), near_m=near)
    v_site = np.median([[10.0, 20.0, 1.0], [12.0, 18.0, 3.0], [11.0, 25.0, 2.0], [8.0, 17.0, 2.0]], axis=0)
    expected = (v_site - np.array([8.0, 17.0, 2.0])) * 2.0
    assert base.motion_offset_mm == pytest.approx(tuple(expected), abs=1e-9)
    assert "site motion: median of 4 published velocities within the maximum baseline" in base.motion_note


def test_two_velocities_are_too_few_for_a_site_motion():
    a = cand("A", vel=(10.0, 0.0, 0.0))
    b = cand("B", vel=(10.0, 0.0, 0.0))
    assert motion.SITE_VELOCITY_MIN_MARKS == 3
    motion.apply_site_motion([a, b], settings(dynamic=False), dt.date(2030, 1, 1), near_m=5000.0)
    # fewer than three: the plate-fixed fallback (v_site = 0), so each base's own velocity shows
    assert a.motion_offset_mm == pytest.approx((-20.0, 0.0, 0.0), abs=1e-9)


@pytest.mark.parametrize("axis", ["h", "v"])
def test_a_motion_term_above_a_third_of_the_tolerance_warns(axis):
    # horizontal term √(10² + 1²), vertical √(3² + 1²), as in the first test
    h, v = math.hypot(10.0, 1.0), math.hypot(3.0, 1.0)
    term = h if axis == "h" else v
    for factor, warns in ((1 + 1e-9, False), (1 - 1e-9, True)):
        tol = 3 * term * factor
        s = settings(dynamic=False, **({"tol_h": tol} if axis == "h" else {"tol_v": tol}))
        c = cand(vel=(3.0, 4.0, -1.5))
        motion.apply_site_motion([c], s, dt.date(2030, 1, 1), near_m=5000.0)
        assert bool(c.warnings) is warns
    limit_h = s.tol_h_mm / 3
    limit_v = s.tol_v_mm / 3
    assert c.warnings == [
        f"B1 moves relative to the site by about {h:.1f} mm horizontally and {v:.1f} mm vertically between the "
        f"deliverable epoch and the field date, more than a third of the tolerance ({limit_h:.1f} / {limit_v:.1f} "
        "mm): prefer another base, or publish a position of it at an epoch near the field date."
    ]


def test_the_field_date_defaults_to_the_screening_date():
    s = settings(dynamic=False)
    s.field_date = None
    assert motion.field_epoch_yr(s, dt.date(2027, 1, 1)) == (
        dt.date(2027, 1, 1),
        date_to_decimal_year(dt.date(2027, 1, 1)),
    )
    c_unplaced = cand("UNPLACED", vel=None)
    c_unplaced.position = None
    c_placed = cand("PLACED", vel=None)
    motion.apply_site_motion([c_unplaced, c_placed], s, dt.date(2027, 1, 1), near_m=5000.0)
    # an unplaced candidate gets no motion term, and the ones after it still do
    assert c_unplaced.motion_note == ""
    assert c_placed.motion_note.startswith("from the deliverable epoch")
