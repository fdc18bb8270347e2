"""Edges of the RTK error budget that a mutation run found unpinned (README "Test strength").

Hand formulas, written out beside each value: σ(d) = a + b·d (a in mm, b in ppm = mm/km; receiver
specifications, common practice), read as 2D RMS the per-axis σ is drms/√2 (drms² = σ_E² + σ_N²),
horizontal 95 % = √(−2 ln 0.05)·σ_axis = 2.4477·σ_axis (circular normal, Greenwalt & Shultz 1968),
vertical 95 % = 1.959964·σ_v (normal 97.5 % quantile, SciPy ``norm.ppf(0.975)``).
"""

from __future__ import annotations

import math
from decimal import Decimal

import numpy as np
import pytest
from scipy import stats

from registry.geodesy import rtk

K_H = math.sqrt(-2.0 * math.log(0.05))  # 2.447747
K_V = float(stats.norm.ppf(0.975))  # 1.959964 (SciPy)


def _screen(site_e, site_n, cand_e, cand_n, *, model, tol_h=50.0, tol_v=80.0, max_baseline=10_000.0, base_mm=0.0):
    k = len(cand_e)
    return rtk.screen_candidates(
        np.asarray(site_e, float),
        np.asarray(site_n, float),
        np.ones(len(site_e), bool),
        np.asarray(cand_e, float),
        np.asarray(cand_n, float),
        base_h_mm=np.full(k, base_mm),
        base_v_mm=np.full(k, base_mm),
        drift_h_mm=np.zeros(k),
        drift_v_mm=np.zeros(k),
        usable=np.ones(k, bool),
        model=model,
        tol_h_mm=tol_h,
        tol_v_mm=tol_v,
        max_baseline_m=max_baseline,
    )


def test_the_constants_are_the_published_factors():
    assert rtk.K_H95 == pytest.approx(K_H, rel=1e-15)
    assert rtk.K_V95 == pytest.approx(K_V, rel=1e-12)


def test_drms_scales_the_fixed_term_too():
    # 8 mm + 1 ppm as drms at 5 km: per axis (8 + 5)/√2 = 9.1924 mm; base setup and rover pole 2 mm per axis
    # each (common practice defaults), added in quadrature.
    model = rtk.RtkErrorModel(h_meaning=rtk.DRMS)
    assert model.rtk_h_axis_mm(5000.0) == pytest.approx(13.0 / math.sqrt(2.0), rel=1e-12)
    core = _screen([3000.0], [4000.0], [0.0], [0.0], model=model)
    want_h = K_H * math.sqrt((13.0 / math.sqrt(2.0)) ** 2 + 2.0**2 + 2.0**2)
    # 15 mm + 1 ppm at 5 km, base setup 3 mm and rover pole 3 mm; drms applies to H only.
    want_v = K_V * math.sqrt(20.0**2 + 3.0**2 + 3.0**2)
    assert core.best_h95_mm[0] == pytest.approx(want_h, rel=1e-12)
    assert core.worst_h95_mm[0] == pytest.approx(want_h, rel=1e-12)
    assert core.best_v95_mm[0] == pytest.approx(want_v, rel=1e-12)
    # RSS as drms: √(8² + 5²)/√2 per axis (setup and rover pole set to zero to isolate the RTK term).
    rss = rtk.RtkErrorModel(
        h_meaning=rtk.DRMS, combination=rtk.RSS, setup_h_mm=0.0, setup_v_mm=0.0, rover_h_mm=0.0, rover_v_mm=0.0
    )
    core = _screen([3000.0], [4000.0], [0.0], [0.0], model=rss)
    assert core.best_h95_mm[0] == pytest.approx(K_H * math.sqrt(89.0 / 2.0), rel=1e-12)
    assert core.best_v95_mm[0] == pytest.approx(K_V * math.sqrt(15.0**2 + 5.0**2), rel=1e-12)


def test_a_site_point_exactly_at_the_maximum_baseline_is_within_it():
    # The maximum baseline holds per site point, equality included. 3-4-5 triangle: point 0 is 5000 m from
    # the base (Pythagoras), point 1 stands on it. Both are inside the default tolerances used here
    # (H95 = 2.4477·√(13² + 2² + 2²) = 32.6 mm < 50, V95 = 1.96·√(20² + 3² + 3²) = 40.1 mm < 80).
    model = rtk.RtkErrorModel()
    at = _screen([3000.0, 0.0], [4000.0, 0.0], [0.0], [0.0], model=model, max_baseline=5000.0)
    assert at.max_distance_m[0] == 5000.0
    assert bool(at.eligible[0]) and not bool(at.beyond_baseline[0]) and bool(at.reaches_site[0])
    assert at.best_h_index[0] == 0 and math.isfinite(at.best_h95_mm[0]) and math.isfinite(at.achievable_h95_mm)
    assert at.coverage[0] == 1.0
    # A millimetre short: point 0 is beyond this base, point 1 is still served, so the base stays eligible.
    over = _screen([3000.0, 0.0], [4000.0, 0.0], [0.0], [0.0], model=model, max_baseline=4999.999)
    assert bool(over.eligible[0]) and not bool(over.beyond_baseline[0]) and not bool(over.reaches_site[0])
    assert over.best_h_index[0] == -1 and over.best_h95_mm[0] == math.inf and over.achievable_h95_mm == math.inf
    assert over.best_h_index[1] == 0 and over.coverage[0] == 0.5
    # Equality holds too when another site point lies beyond the baseline (6000 m away, the per-point mask path).
    mixed = _screen([3000.0, 0.0, 0.0], [4000.0, 0.0, 6000.0], [0.0], [0.0], model=model, max_baseline=5000.0)
    assert mixed.best_h_index.tolist() == [0, 0, -1] and mixed.best_v_index.tolist() == [0, 0, -1]
    assert mixed.coverage[0] == pytest.approx(2.0 / 3.0) and not bool(mixed.reaches_site[0])
    # A site of that one point only: no site point within the baseline, the base is out.
    alone = _screen([3000.0], [4000.0], [0.0], [0.0], model=model, max_baseline=5000.0)
    assert bool(alone.eligible[0]) and alone.any_coverage == 1.0
    alone = _screen([3000.0], [4000.0], [0.0], [0.0], model=model, max_baseline=4999.999)
    assert bool(alone.beyond_baseline[0]) and not bool(alone.eligible[0])
    assert alone.achievable_h95_mm == math.inf and alone.any_coverage == 0.0


def test_margins_per_point_by_hand():
    # Candidate at the origin, a point at (3000, 4000) m: d = 5000 m. 8 + 5 = 13 mm H per axis,
    # 15 + 5 = 20 mm V; constant terms 9 mm² (H) and 16 mm² (V) added in quadrature.
    model = rtk.RtkErrorModel()
    args = (np.array([0]), np.array([3000.0]), np.array([4000.0]), np.array([0.0]), np.array([0.0]))
    h95 = K_H * math.sqrt(13.0**2 + 9.0)
    v95 = K_V * math.sqrt(20.0**2 + 16.0)
    const = (np.array([9.0]), np.array([16.0]))
    m = rtk.point_margins_mm(*args, *const, model=model, tol_h_mm=50.0, tol_v_mm=80.0, max_baseline_m=10_000.0)
    assert m.shape == (1, 1) and m[0, 0] == pytest.approx(50.0 - h95, rel=1e-12)  # H decides
    m = rtk.point_margins_mm(*args, *const, model=model, tol_h_mm=50.0, tol_v_mm=45.0, max_baseline_m=10_000.0)
    assert m[0, 0] == pytest.approx(45.0 - v95, rel=1e-12)  # V decides
    # The maximum baseline per point, equality included; beyond it the point has no margin at all.
    m = rtk.point_margins_mm(*args, *const, model=model, tol_h_mm=50.0, tol_v_mm=80.0, max_baseline_m=5000.0)
    assert m[0, 0] == pytest.approx(50.0 - h95, rel=1e-12)
    m = rtk.point_margins_mm(*args, *const, model=model, tol_h_mm=50.0, tol_v_mm=80.0, max_baseline_m=4999.999)
    assert m[0, 0] == -math.inf


def test_check_shot_counts_both_setups_in_quadrature():
    # Setups only at zero baseline with a zero a + b·d: base setup 3 mm per axis / 5 mm vertical and rover
    # pole 4 mm / 12 mm, each once and in quadrature: H = 2.4477·√(3² + 4²) = 2.4477·5,
    # V = 1.96·√(5² + 12²) = 1.96·13 (Pythagorean triples; distinct values so neither term can stand in).
    model = rtk.RtkErrorModel(
        h_fixed_mm=0, h_ppm=0, v_fixed_mm=0, v_ppm=0, setup_h_mm=3.0, setup_v_mm=5.0, rover_h_mm=4.0, rover_v_mm=12.0
    )
    zero = dict(base_h_mm=0, base_v_mm=0, base_drift_h_mm=0, base_drift_v_mm=0)
    zero.update(check_h_mm=0, check_v_mm=0, check_drift_h_mm=0, check_drift_v_mm=0)
    h, v = rtk.check_shot_allowance_mm(0.0, model=model, **zero)
    assert float(h) == pytest.approx(K_H * 5.0, rel=1e-12)
    assert float(v) == pytest.approx(K_V * 13.0, rel=1e-12)


def test_frame_change_that_is_not_a_finite_positive_number_adds_nothing():
    assert rtk.frame_change_sigma_mm(float("nan")) == 0.0
    assert rtk.frame_change_sigma_mm(float("inf")) == 0.0
    assert rtk.frame_change_sigma_mm(-0.002) == 0.0
    assert rtk.frame_change_sigma_mm(0.0025) == 2.5


def test_decimal_inputs_give_float_results():
    """Numbers of any real type (Decimal, as a decimal column or a parser gives them) are read as floats."""
    d = Decimal
    h, v = rtk.base_sigma_from_covariance_mm(d("9e-6"), d("0"), d("4e-6"), d("2.5e-5"))
    assert (float(h), float(v)) == pytest.approx((3.0, 5.0))  # √9e-6 m, √2.5e-5 m (λmax of a diagonal)
    # Budget at 5 km, 8 mm + 1 ppm / 15 mm + 1 ppm (common practice): σ_h² = 13² + base 3² + setup 2² + rover 2²,
    # σ_v² = 20² + base 4² + setup 3² + rover 3² + geoid 6² (hand formula, terms in quadrature).
    b = rtk.error_budget_mm(
        d("5000"),
        model=rtk.RtkErrorModel(),
        base_h_mm=d("3"),
        base_v_mm=d("4"),
        drift_h_mm=d("0"),
        drift_v_mm=d("0"),
        motion_h_mm=d("0"),
        motion_v_mm=d("0"),
        geoid_v_mm=d("6"),
    )
    assert all(type(b[k]) is float for k in ("sigma_h", "sigma_v", "h95", "v95"))
    assert b["base"] == {"h": 3.0, "v": 4.0} and b["geoid"] == {"h": 0.0, "v": 6.0}
    assert b["h95"] == pytest.approx(K_H * math.sqrt(13.0**2 + 3.0**2 + 2.0**2 + 2.0**2), rel=1e-12)
    assert b["v95"] == pytest.approx(K_V * math.sqrt(20.0**2 + 4.0**2 + 3.0**2 + 3.0**2 + 6.0**2), rel=1e-12)
    got = rtk.max_abs_height_difference_m([d("100"), d("450")], [d("120"), d("90")])
    assert got.dtype == np.float64 and got.tolist() == [20.0, 360.0]
    assert rtk.drift_sigma_mm(d("-7.5")).item() == 15.0  # 2 mm/yr assumed (common practice) × 7.5 yr
    assert rtk.drift_sigma_mm([d("10")], [d("0.5")]).tolist() == [5.0]
    assert rtk.farthest_point_selection([d("0"), d("1"), d("10")], [d("0")] * 3, first=0, count=2) == [0, 2]


# --------------------------------------------------------------------------------------------------
# Farthest-point selection of check marks
# --------------------------------------------------------------------------------------------------


def test_farthest_point_selection_small_cases():
    fps = rtk.farthest_point_selection
    assert fps([], [], first=0, count=3) == []
    assert fps([5.0], [7.0], first=0, count=3) == [0]
    assert fps([0.0, 4.0], [0.0, 3.0], first=1, count=0) == []
    assert fps([0.0, 4.0], [0.0, 3.0], first=1, count=1) == [1]
    # Points half a metre apart are still distinct picks; a duplicate of a chosen point comes last.
    assert fps([0.0, 0.5, 0.3], [0.0, 0.0, 0.0], first=0, count=3) == [0, 1, 2]
    assert fps([0.0, 0.0, 5.0], [0.0, 0.0, 0.0], first=0, count=3) == [0, 2, 1]


def test_farthest_point_selection_away_from_the_origin_and_the_bases():
    # Coordinates far from the origin (a local plane centred elsewhere): distances, not sums, count.
    e = np.array([1000.0, 1010.0, 1000.0, 1003.0])
    n = np.array([2000.0, 2000.0, 2008.0, 2004.0])
    # From point 0, point 1 is 10 m away, point 2 8 m, point 3 5 m; then point 2 (8.0 from 0, 12.8 from 1).
    assert rtk.farthest_point_selection(e, n, first=0, count=3) == [0, 1, 2]
    # A base standing on point 1 makes it worthless: the picks keep away from it.
    got = rtk.farthest_point_selection(e, n, first=0, count=2, avoid_e_m=[1010.0], avoid_n_m=[2000.0])
    assert got == [0, 2]
    with pytest.raises(ValueError):
        rtk.farthest_point_selection(e, n, first=0, count=2, avoid_e_m=[1010.0], avoid_n_m=[])


def test_farthest_point_selection_updates_from_each_pick():
    fps = rtk.farthest_point_selection
    # A(1000, 2000), B(1010, 2000), C(1000, 2010), D(1012, 2002): from A the farthest is D (12.17 m); then
    # B is 2.83 m from D and C 14.4 m, so C (10 m from A) beats B (10 m from A).
    e = [1000.0, 1010.0, 1000.0, 1012.0]
    n = [2000.0, 2000.0, 2010.0, 2002.0]
    assert fps(e, n, first=0, count=3) == [0, 3, 2]
    # From B: A 10 m, C √200 = 14.14 m, D √8 = 2.83 m.
    assert fps(e, n, first=1, count=2) == [1, 2]


def test_coverage_obeys_the_vertical_tolerance():
    # One cell 5000 m from the base, base setup and rover pole at the common-practice defaults:
    # H95 = 2.4477·√(13² + 2² + 2²) = 32.57 mm, V95 = 1.96·√(20² + 3² + 3²) = 40.07 mm.
    model = rtk.RtkErrorModel()
    v95 = K_V * math.sqrt(20.0**2 + 3.0**2 + 3.0**2)
    assert 40.0 < v95 < 40.1
    inside = _screen([3000.0], [4000.0], [0.0], [0.0], model=model, tol_h=50.0, tol_v=40.1)
    outside = _screen([3000.0], [4000.0], [0.0], [0.0], model=model, tol_h=50.0, tol_v=40.0)
    assert inside.coverage[0] == 1.0 and inside.any_coverage == 1.0 and inside.margin_mm[0] > 0
    assert outside.coverage[0] == 0.0 and outside.any_coverage == 0.0
    assert outside.margin_mm[0] == pytest.approx(40.0 - v95, rel=1e-12)


def test_screening_in_small_blocks_gives_the_same_answer():
    # Blocks are a speed device: one candidate per block must change nothing.
    rng = np.random.default_rng(7)
    site_e, site_n = rng.uniform(0, 3000, 40), rng.uniform(0, 3000, 40)
    cand_e, cand_n = rng.uniform(-2000, 5000, 9), rng.uniform(-2000, 5000, 9)
    model = rtk.RtkErrorModel()
    args = (site_e, site_n, np.ones(40, bool), cand_e, cand_n)
    kw = dict(
        base_h_mm=np.full(9, 3.0),
        base_v_mm=np.full(9, 5.0),
        drift_h_mm=np.zeros(9),
        drift_v_mm=np.zeros(9),
        usable=np.ones(9, bool),
        model=model,
        tol_h_mm=40.0,
        tol_v_mm=60.0,
        max_baseline_m=6000.0,
    )
    whole = rtk.screen_candidates(*args, **kw)
    for block_elements in (1, 80):  # one candidate per block; two per block with a last block of one
        small = rtk.screen_candidates(*args, **kw, block_elements=block_elements)
        for name in ("min_distance_m", "max_distance_m", "coverage", "eligible", "order", "best_h95_mm", "best_v95_mm"):
            assert np.array_equal(getattr(whole, name), getattr(small, name)), name
    # Distances by hand (Pythagoras on the plane) for every candidate.
    d = np.hypot(cand_e[:, None] - site_e[None, :], cand_n[:, None] - site_n[None, :])
    assert np.allclose(small.min_distance_m, d.min(axis=1), rtol=1e-12)
    assert np.allclose(small.max_distance_m, d.max(axis=1), rtol=1e-12)


def test_a_site_of_one_cell():
    core = _screen([300.0], [400.0], [0.0], [0.0], model=rtk.RtkErrorModel())
    assert core.coverage[0] == 1.0 and core.any_coverage == 1.0  # 1 of 1 cell, not 1 of 2


def test_model_refusals_say_what_was_wrong():
    with pytest.raises(ValueError, match=r"^combination must be 'additive' or 'rss', not 'sum'$"):
        rtk.RtkErrorModel(combination="sum")
    with pytest.raises(ValueError, match=r"^h_meaning must be 'per_axis' or 'drms', not 'cep'$"):
        rtk.RtkErrorModel(h_meaning="cep")
    with pytest.raises(ValueError, match=r"^v_ppm must be a non-negative number, not -1.0$"):
        rtk.RtkErrorModel(v_ppm=-1.0)
    with pytest.raises(ValueError, match=r"^combination must be 'additive' or 'rss', not 'sum'$"):
        rtk.rtk_sigma_mm(1000.0, 8.0, 1.0, "sum")


def test_rss_model_vertical_and_decimal_distance():
    # RSS: √(a² + (b·d)²) = √(15² + 5²) mm at 5 km for 15 mm + 1 ppm (common practice figures).
    model = rtk.RtkErrorModel(combination=rtk.RSS)
    assert float(model.rtk_v_mm(5000.0)) == pytest.approx(math.sqrt(250.0), rel=1e-12)
    assert float(rtk.rtk_sigma_mm(Decimal("5000"), 8.0, 1.0)) == 13.0  # 8 mm + 1 ppm × 5 km
