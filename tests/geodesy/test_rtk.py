"""The RTK base-screening core (registry.geodesy.rtk) against outside values.

Sources named beside each check value:
- [RTK-CP] common practice (receiver-specification reading a + b·d, as quoted on vendor and RTK
  accuracy calculator pages, unnamed; secondary transcription): 8 mm + 1 ppm H, 15 mm + 1 ppm V,
  additive; values at each distance recomputed by hand (a + b·d) and the RSS column √(a² + (b·d)²)
  recomputed with NumPy.
- [NSSDA] FGDC-STD-007.3-1998 §3.2.1: 2.4477 (2D, 95 %) and 1.9600 (1D, 95 %).
- [scipy] scipy.stats quantiles, numpy.linalg eigenvalues, pyproj Geod (Karney 2013):
  independent reference libraries.
- [hand] hand computation written out beside the value.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from pyproj import Geod
from scipy import integrate, stats

from registry.geodesy import rtk
from registry.geodesy.rtk import RtkErrorModel, screen_candidates
from registry.geodesy.site import LocalPlane, build_site_grid, parse_site_geojson, site_plane

# ---------------------------------------------------------------- the RTK error model


@pytest.mark.parametrize(
    "d_km, h_add, v_add, h_rss, v_rss",
    [
        # [RTK-CP] 8 mm + 1 ppm H / 15 mm + 1 ppm V: common practice (receiver-specification reading a + b·d, as on vendor and RTK calculator pages, unnamed), recomputed
        (0.5, 8.5, 15.5, 8.02, 15.01),
        (1, 9, 16, 8.06, 15.03),
        (2, 10, 17, 8.25, 15.13),
        (5, 13, 20, 9.43, 15.81),  # calculator page: "At 5 km baseline: horizontal ≈ ±13 mm, vertical ≈ ±20 mm"
        (10, 18, 25, 12.81, 18.03),  # calculator page: "At 10 km: horizontal ≈ ±18 mm, vertical ≈ ±25 mm"
        (20, 28, 35, 21.54, 25.00),
    ],
)
def test_rtk_table_common_practice(d_km, h_add, v_add, h_rss, v_rss):
    d_m = d_km * 1000.0
    assert rtk.rtk_sigma_mm(d_m, 8.0, 1.0, "additive") == pytest.approx(h_add, abs=1e-9)
    assert rtk.rtk_sigma_mm(d_m, 15.0, 1.0, "additive") == pytest.approx(v_add, abs=1e-9)
    assert rtk.rtk_sigma_mm(d_m, 8.0, 1.0, "rss") == pytest.approx(h_rss, abs=0.005)
    assert rtk.rtk_sigma_mm(d_m, 15.0, 1.0, "rss") == pytest.approx(v_rss, abs=0.005)
    model = RtkErrorModel()  # defaults are the common-practice values, additive, per axis
    assert model.rtk_h_axis_mm(d_m) == pytest.approx(h_add)
    assert model.rtk_v_mm(d_m) == pytest.approx(v_add)


def test_rtk_95_conversions_from_reference_table():
    # [RTK-CP] read as 2D drms: r95 = 1.7308·drms (FGDC-STD-007.3-1998 §3.2.1 factor); 18 mm → 31.2 mm at 10 km,
    # recomputed by hand.
    drms_model = RtkErrorModel(h_meaning="drms")
    assert rtk.K_H95 * drms_model.rtk_h_axis_mm(10_000.0) == pytest.approx(31.2, abs=0.05)
    # [RTK-CP] vertical 95 % = 1.96·σ_V (normal quantile, recomputed with SciPy): 25 mm → 49.0 mm.
    assert rtk.K_V95 * RtkErrorModel().rtk_v_mm(10_000.0) == pytest.approx(49.0, abs=0.01)


def test_sigma_at_zero_is_fixed_part_and_monotonic():
    # [RTK-CP] properties of the a + b·d model: σ(0) = a and σ(d) is monotonic non-decreasing in d.
    d = np.linspace(0.0, 30_000.0, 3001)
    for comb in ("additive", "rss"):
        for a, b in ((8.0, 1.0), (15.0, 1.0), (10.0, 0.0), (0.0, 2.0)):
            s = rtk.rtk_sigma_mm(d, a, b, comb)
            assert s[0] == pytest.approx(a)
            assert np.all(np.diff(s) >= 0)
    with pytest.raises(ValueError):
        rtk.rtk_sigma_mm(1.0, 8, 1, "max")


def test_95_factors_against_scipy_and_nssda():
    # [scipy] √χ²₀.₉₅(2) and the normal 97.5 % quantile; [NSSDA] 2.4477 and 1.9600.
    assert rtk.K_H95 == pytest.approx(math.sqrt(stats.chi2.ppf(0.95, 2)), rel=1e-12)
    assert rtk.K_V95 == pytest.approx(stats.norm.ppf(0.975), rel=1e-12)
    assert round(rtk.K_H95, 4) == 2.4477
    assert round(rtk.K_V95, 4) == 1.9600


def test_model_rejects_bad_settings():
    with pytest.raises(ValueError):
        RtkErrorModel(combination="max")
    with pytest.raises(ValueError):
        RtkErrorModel(h_meaning="cep")
    with pytest.raises(ValueError):
        RtkErrorModel(h_ppm=-1)


# ---------------------------------------------------------------- the other terms


def test_base_sigma_from_covariance_is_largest_eigenvalue():
    # [scipy] numpy.linalg.eigvalsh of the 2×2 E/N block is the reference.
    rng = np.random.default_rng(7)
    for _ in range(50):
        a = rng.normal(size=(2, 2)) * 0.01
        cov = a @ a.T
        uu = rng.uniform(1e-6, 1e-3)
        h, v = rtk.base_sigma_from_covariance_mm(cov[0, 0], cov[0, 1], cov[1, 1], uu)
        assert h == pytest.approx(math.sqrt(np.linalg.eigvalsh(cov).max()) * 1e3, rel=1e-10)
        assert v == pytest.approx(math.sqrt(uu) * 1e3, rel=1e-12)


def test_network_accuracy_round_trip():
    # FGDC network accuracy (registry.geodesy.accuracy) of a circular covariance, and the budget's covariance route. [hand] σe = σn = 7 mm, σu = 11 mm: r95 = 2.450762 × 7 = 17.155334 mm,
    # v95 = 1.96 × 11 = 21.56 mm.
    from registry.geodesy import accuracy as acc

    cov = np.diag([49e-6, 49e-6, 121e-6])
    r95_m, v95_m = acc.network_accuracy_95_m(cov)
    assert r95_m * 1e3 == pytest.approx(17.155334, abs=1e-6)
    assert v95_m * 1e3 == pytest.approx(21.56, abs=1e-9)
    ch, cv = rtk.base_sigma_from_covariance_mm(cov[0, 0], cov[0, 1], cov[1, 1], cov[2, 2])
    assert ch == pytest.approx(7.0, rel=1e-12) and cv == pytest.approx(11.0, rel=1e-12)


def test_frame_change_sigma_reading():
    # Our documented reading: PROJ's stated accuracy (m) taken as 1σ per axis; 0 m and "not stated" add nothing.
    # [hand] 0.001 m → 1.0 mm; 2 m (a WGS 84 ensemble route, PROJ) → 2000 mm.
    assert rtk.frame_change_sigma_mm(0.001) == pytest.approx(1.0)
    assert rtk.frame_change_sigma_mm(2.0) == pytest.approx(2000.0)
    assert rtk.frame_change_sigma_mm(0.0) == 0.0 and rtk.frame_change_sigma_mm(None) == 0.0


def test_max_abs_height_difference():
    # [hand] bases at 100 m and 450 m, site heights 120 and 90 m: max |Δh| = 20 and 360 m; unknown base → NaN;
    # a site with no heights → NaN for every base.
    got = rtk.max_abs_height_difference_m(np.array([100.0, 450.0, np.nan]), np.array([120.0, 90.0]))
    assert got[:2].tolist() == [20.0, 360.0] and math.isnan(got[2])
    assert np.isnan(rtk.max_abs_height_difference_m(np.array([100.0]), np.array([]))).all()


def test_drift_terms():
    # [hand] assumed rate 2 mm/yr (common practice) × |2015.0 − 2025.5| = 21 mm.
    assert rtk.drift_sigma_mm(2015.0 - 2025.5) == pytest.approx(21.0)
    # [hand] with a velocity σ of 0.4 mm/yr over 10.5 yr: 4.2 mm; a missing one falls back to the rate.
    got = rtk.drift_sigma_mm(np.array([10.5, 10.5]), np.array([0.4, np.nan]), assumed_rate_mm_yr=3.0)
    assert got.tolist() == pytest.approx([4.2, 31.5])
    assert rtk.drift_sigma_mm(0.0) == 0.0


def test_error_budget_every_term_by_hand():
    # [hand] d = 5 km, 8 mm + 1 ppm / 15 mm + 1 ppm additive per axis → rtk 13 / 20 mm ([RTK-CP]);
    # base covariance ee = 16e-6, nn = 9e-6, en = 0 m² → √λmax = 4 mm; uu = 36e-6 m² → 6 mm;
    # drift 2 mm/yr × 2.5 yr = 5 mm both; base setup 2 / 3 mm and rover pole 2 / 3 mm (common practice).
    # σ_h = √(13² + 4² + 5² + 2² + 2²) = √218 = 14.764823 mm → H95 = 2.4477468 × 14.764823 = 36.1405 mm
    # σ_v = √(20² + 6² + 5² + 3² + 3²) = √479 = 21.886069 mm → V95 = 1.959964 × 21.886069 = 42.8959 mm
    base_h, base_v = rtk.base_sigma_from_covariance_mm(16e-6, 0.0, 9e-6, 36e-6)
    drift = rtk.drift_sigma_mm(2.5)
    b = rtk.error_budget_mm(
        5000.0, model=RtkErrorModel(), base_h_mm=base_h, base_v_mm=base_v, drift_h_mm=drift, drift_v_mm=drift
    )
    assert b["rtk"] == {"h": pytest.approx(13.0), "v": pytest.approx(20.0)}
    assert b["base"] == {"h": pytest.approx(4.0), "v": pytest.approx(6.0)}
    assert b["drift"] == {"h": pytest.approx(5.0), "v": pytest.approx(5.0)}
    assert b["setup"] == {"h": pytest.approx(2.0), "v": pytest.approx(3.0)}
    assert b["rover"] == {"h": pytest.approx(2.0), "v": pytest.approx(3.0)}
    assert b["sigma_h"] == pytest.approx(math.sqrt(218))
    assert b["h95"] == pytest.approx(36.1405, abs=1e-4)
    assert b["sigma_v"] == pytest.approx(math.sqrt(479))
    assert b["v95"] == pytest.approx(42.8959, abs=1e-4)


def test_error_budget_drms_and_rss_options():
    # [hand] drms: 18 mm 2D RMS at 10 km → 18/√2 = 12.7279 mm per axis; RSS: √(8² + 10²) = 12.8062 mm.
    m = RtkErrorModel(h_meaning="drms", setup_h_mm=0, setup_v_mm=0, rover_h_mm=0, rover_v_mm=0)
    b = rtk.error_budget_mm(10_000.0, model=m, base_h_mm=0, base_v_mm=0, drift_h_mm=0, drift_v_mm=0)
    assert b["rtk"]["h"] == pytest.approx(18 / math.sqrt(2))
    m2 = RtkErrorModel(combination="rss")
    assert m2.rtk_h_axis_mm(10_000.0) == pytest.approx(math.sqrt(164))


def _zero_terms(k):
    z = np.zeros(k)
    return dict(base_h_mm=z, base_v_mm=z, drift_h_mm=z, drift_v_mm=z, usable=np.ones(k, bool))


def test_max_baseline_applies_per_site_point():
    # Site points at 0 and 9 km east; candidates at 0.5 km west and at 1.5 km west:
    # farthest baselines 9.5 km (inside 10 km) and 10.5 km (beyond). The second still serves the point
    # at 0 (1.5 km away), so it stays eligible, with half the site covered and no claim to the whole.
    pe = np.array([0.0, 9000.0])
    pn = np.zeros(2)
    core = screen_candidates(
        pe,
        pn,
        np.ones(2, bool),
        np.array([-500.0, -1500.0]),
        np.zeros(2),
        model=RtkErrorModel(),
        tol_h_mm=100,
        tol_v_mm=100,
        max_baseline_m=10_000,
        **_zero_terms(2),
    )
    assert core.max_distance_m.tolist() == pytest.approx([9500.0, 10500.0])
    assert core.beyond_baseline.tolist() == [False, False]
    assert core.reaches_site.tolist() == [True, False]
    assert core.eligible.tolist() == [True, True]
    assert core.coverage.tolist() == pytest.approx([1.0, 0.5])
    assert core.order.tolist() == [0, 1]


def test_a_base_with_no_site_point_within_the_baseline_is_excluded():
    # Site point at 0; candidate at 10 000 m (equality: within) and at 10 000.5 m (beyond).
    core = screen_candidates(
        np.zeros(1),
        np.zeros(1),
        np.ones(1, bool),
        np.array([10_000.0, 10_000.5]),
        np.zeros(2),
        model=RtkErrorModel(),
        tol_h_mm=1000,
        tol_v_mm=1000,
        max_baseline_m=10_000,
        **_zero_terms(2),
    )
    assert core.beyond_baseline.tolist() == [False, True]
    assert core.eligible.tolist() == [True, False]
    assert core.coverage.tolist() == [1.0, 0.0]


# ---------------------------------------------------------------- coverage with a known answer


def _quarter_disc_in_square(r, L):
    """Area of {0 ≤ x, y ≤ L, x² + y² ≤ r²} (analytic; [hand], see below)."""
    if r <= L:
        return math.pi * r * r / 4
    if r >= L * math.sqrt(2):
        return L * L
    s = math.sqrt(r * r - L * L)
    return L * s + r * r / 2 * (math.asin(L / r) - math.asin(s / r))


@pytest.mark.parametrize("radius_m", [1500.0, 2500.0])
def test_square_site_corner_base_analytic_coverage(radius_m):
    """A 2 km square site, one base at a corner: the covered fraction is the quarter disc
    of the coverage radius clipped to the square.

    Model: a = 5 mm, b = 5 ppm additive per axis, no other terms. Tolerance chosen so that the
    coverage radius is ``radius_m``: tol_h = 2.4477·(5 + 5·r_km). Vertical tolerance generous.
    The analytic area is checked against scipy's numerical integration first.
    """
    L = 2000.0
    analytic = _quarter_disc_in_square(radius_m, L) / (L * L)
    numeric, _ = integrate.quad(
        lambda x: min(L, math.sqrt(max(radius_m**2 - x * x, 0.0))),
        0.0,
        L,
        points=[min(radius_m, L), math.sqrt(max(radius_m**2 - L * L, 0.0))],
        limit=200,
    )
    assert analytic == pytest.approx(numeric / (L * L), rel=1e-7)  # [scipy] closed form vs numerical integration
    n = 400  # fine planar grid of cell centres: 5 m cells
    xs = (np.arange(n) + 0.5) * L / n
    gx, gy = np.meshgrid(xs, xs)
    model = RtkErrorModel(
        h_fixed_mm=5, h_ppm=5, v_fixed_mm=5, v_ppm=0, setup_h_mm=0, setup_v_mm=0, rover_h_mm=0, rover_v_mm=0
    )
    tol_h = rtk.K_H95 * (5 + 5 * radius_m / 1000)
    core = screen_candidates(
        gx.ravel(),
        gy.ravel(),
        np.ones(n * n, bool),
        np.array([0.0]),
        np.array([0.0]),
        model=model,
        tol_h_mm=tol_h,
        tol_v_mm=1000,
        max_baseline_m=10_000,
        **_zero_terms(1),
    )
    assert core.coverage[0] == pytest.approx(analytic, abs=0.004)  # grid discretisation, 5 m cells
    # Worst figure at the farthest cell centre, (1997.5, 1997.5) m → 2824.894 m:
    # 2.4477468·(5 + 5·2.824894) = 46.8118 mm [hand].
    assert core.worst_h95_mm[0] == pytest.approx(46.8118, abs=1e-4)


def test_square_site_from_geojson_end_to_end():
    """The same square given as GeoJSON near 45.2° N (built on a local plane, sent in lon/lat):
    parse, auto grid (400–2,500 cells), candidate at the south-west corner."""
    plane = LocalPlane(45.2, -110.6)
    L = 2000.0
    corners = np.array([[0, 0], [L, 0], [L, L], [0, L], [0, 0]])
    lat, lon = plane.to_geodetic_deg(corners[:, 0], corners[:, 1])
    site = parse_site_geojson(
        {"type": "Polygon", "coordinates": [[[float(a), float(b)] for a, b in zip(lon, lat, strict=True)]]}
    )
    sp = site_plane(site)
    grid = build_site_grid(site, sp)
    assert 400 <= grid.n_cells <= 2500
    ce, cn = sp.to_local_m(lat[0], lon[0])
    model = RtkErrorModel(
        h_fixed_mm=5, h_ppm=5, v_fixed_mm=5, v_ppm=0, setup_h_mm=0, setup_v_mm=0, rover_h_mm=0, rover_v_mm=0
    )
    r = 1500.0
    core = screen_candidates(
        grid.e_m,
        grid.n_m,
        grid.is_cell,
        np.atleast_1d(ce),
        np.atleast_1d(cn),
        model=model,
        tol_h_mm=rtk.K_H95 * (5 + 5 * r / 1000),
        tol_v_mm=1000,
        max_baseline_m=10_000,
        **_zero_terms(1),
    )
    # About 1,000 cells: the quarter-circle edge crosses ~40 of them → allow 2.5 %.
    assert core.coverage[0] == pytest.approx(math.pi * r * r / 4 / (L * L), abs=0.025)
    # Worst point is the far corner, a boundary sample: 2828.43 m on the plane.
    assert core.max_distance_m[0] == pytest.approx(L * math.sqrt(2), rel=1e-5)


def test_planar_screening_matches_geodesic_brute_force():
    """[scipy] Worst figures and coverage from planar distances agree with a brute-force loop
    over pyproj Geod (GRS80) geodesic distances on a real polygon near 45.2° N."""
    site = parse_site_geojson(
        {
            "type": "Polygon",
            "coordinates": [
                [[-110.64, 45.18], [-110.58, 45.18], [-110.57, 45.22], [-110.63, 45.225], [-110.64, 45.18]]
            ],
        }
    )
    plane = site_plane(site)
    grid = build_site_grid(site, plane)
    rng = np.random.default_rng(3)
    c_lat = 45.2 + rng.uniform(-0.08, 0.08, 12)
    c_lon = -110.6 + rng.uniform(-0.11, 0.11, 12)
    ce, cn = plane.to_local_m(c_lat, c_lon)
    model = RtkErrorModel()
    terms = dict(
        base_h_mm=np.full(12, 3.0),
        base_v_mm=np.full(12, 5.0),
        drift_h_mm=np.full(12, 4.0),
        drift_v_mm=np.full(12, 4.0),
        usable=np.ones(12, bool),
    )
    core = screen_candidates(
        grid.e_m, grid.n_m, grid.is_cell, ce, cn, model=model, tol_h_mm=40, tol_v_mm=55, max_baseline_m=12_000, **terms
    )
    g_lat, g_lon = plane.to_geodetic_deg(grid.e_m, grid.n_m)
    geod = Geod(ellps="GRS80")
    for i in range(12):
        _, _, d = geod.inv(np.full(g_lat.size, c_lon[i]), np.full(g_lat.size, c_lat[i]), g_lon, g_lat)
        assert core.max_distance_m[i] == pytest.approx(d.max(), rel=1e-5)
        assert core.min_distance_m[i] == pytest.approx(d.min(), rel=1e-5, abs=0.05)
        h95 = rtk.K_H95 * np.sqrt(model.rtk_h_axis_mm(d) ** 2 + 3**2 + 4**2 + 2**2 + 2**2)  # + base setup, rover pole
        v95 = rtk.K_V95 * np.sqrt(model.rtk_v_mm(d) ** 2 + 5**2 + 4**2 + 3**2 + 3**2)
        assert core.worst_h95_mm[i] == pytest.approx(h95.max(), abs=1e-4)
        ok = (h95 <= 40) & (v95 <= 55)
        assert core.coverage[i] == pytest.approx(ok[grid.is_cell].mean(), abs=2 / grid.n_cells)


# ---------------------------------------------------------------- ranking, pair, check marks


def test_ranking_full_coverage_first_then_margin():
    # Point site at the origin. Candidate 0 far (worse margin), 1 near, 2 unusable, 3 beyond baseline.
    core = screen_candidates(
        np.zeros(1),
        np.zeros(1),
        np.ones(1, bool),
        np.array([6000.0, 1000.0, 10.0, 11000.0]),
        np.zeros(4),
        model=RtkErrorModel(),
        tol_h_mm=50,
        tol_v_mm=60,
        max_baseline_m=10_000,
        base_h_mm=np.zeros(4),
        base_v_mm=np.zeros(4),
        drift_h_mm=np.zeros(4),
        drift_v_mm=np.zeros(4),
        usable=np.array([True, True, False, True]),
    )
    assert core.order.tolist()[:2] == [1, 0]
    assert set(core.order.tolist()[2:]) == {2, 3}
    # [hand] at 1 km: H95 = 2.4477·√(9² + 2² + 2²) = 23.092 mm; V95 = 1.96·√(16² + 3² + 3²) = 32.443 mm
    # (base setup and rover pole).
    assert core.worst_h95_mm[1] == pytest.approx(rtk.K_H95 * math.sqrt(89), rel=1e-9)
    assert core.worst_v95_mm[1] == pytest.approx(rtk.K_V95 * math.sqrt(274), rel=1e-9)
    assert core.margin_mm[1] == pytest.approx(min(50 - 23.0920, 60 - 32.4434), abs=1e-3)
    assert core.achievable_h95_mm == pytest.approx(core.worst_h95_mm[1])


def test_best_pair_covers_a_long_site_no_single_base_does():
    # A 6 km × 0.5 km strip; A and B at its two ends, C in the middle but with a poor position (30 mm σ),
    # D 300 m beyond A (outside the strip). Coverage radius of A, B, D (no other terms): 2.4477·(8 + d_km) ≤ 35 → d ≤ 6.299 km... use
    # tolerance 27 mm → d ≤ 3.031 km [hand: 27/2.4477468 − 8 = 3.0306]: each end base covers just over
    # half the strip, D reaches only 2.73 km into it, so {A, B} is the one pair that covers it all.
    xs = (np.arange(240) + 0.5) * 25.0
    ys = (np.arange(20) + 0.5) * 25.0
    gx, gy = np.meshgrid(xs, ys)
    pe, pn = gx.ravel(), gy.ravel()
    ce = np.array([0.0, 6000.0, 3000.0, -300.0])
    cn = np.array([250.0, 250.0, 250.0, 250.0])
    model = RtkErrorModel(setup_h_mm=0, setup_v_mm=0, rover_h_mm=0, rover_v_mm=0)
    core = screen_candidates(
        pe,
        pn,
        np.ones(pe.size, bool),
        ce,
        cn,
        model=model,
        tol_h_mm=27.0,
        tol_v_mm=1000,
        max_baseline_m=10_000,
        base_h_mm=np.array([0, 0, 30.0, 0]),
        base_v_mm=np.zeros(4),
        drift_h_mm=np.zeros(4),
        drift_v_mm=np.zeros(4),
        usable=np.ones(4, bool),
    )
    assert core.coverage.max() < 1.0
    assert sorted(core.pair) == [0, 1]
    assert core.pair_coverage == 1.0
    assert core.pair_worst_margin_mm >= 0
    assert core.pair_worst_h95_mm <= 27.0


def test_no_pair_when_a_second_base_adds_no_coverage():
    # Regression: a far-off second base covering none of the site used to be proposed as "the best
    # pair". Strip 0-6 km, A at its west end covers [0, 3.03 km] (hand: 27/2.4477468 - 8 = 3.0306 km);
    # B sits 9.5 km east of A's end, beyond reach of every strip point within tolerance, so no pair
    # covers more than A alone.
    xs = (np.arange(240) + 0.5) * 25.0
    pe = xs.copy()
    pn = np.full(xs.size, 250.0)
    core = screen_candidates(
        pe,
        pn,
        np.ones(pe.size, bool),
        np.array([0.0, 15500.0]),
        np.array([250.0, 250.0]),
        model=RtkErrorModel(setup_h_mm=0, setup_v_mm=0, rover_h_mm=0, rover_v_mm=0),
        tol_h_mm=27.0,
        tol_v_mm=1000,
        max_baseline_m=20_000,
        base_h_mm=np.zeros(2),
        base_v_mm=np.zeros(2),
        drift_h_mm=np.zeros(2),
        drift_v_mm=np.zeros(2),
        usable=np.ones(2, bool),
    )
    assert 0.45 < core.coverage[0] < 0.55
    assert core.coverage[1] == 0.0
    assert core.pair is None
    assert "no second base" in core.info["pair_note"]


def test_farthest_point_selection_spreads():
    e = np.array([0.0, 100.0, 2000.0, 1000.0, 1900.0])
    n = np.array([0.0, 0.0, 0.0, 1000.0, 100.0])
    assert rtk.farthest_point_selection(e, n, first=0, count=3) == [0, 2, 3]
    # With a base at (2000, 0) to avoid, the second pick moves away from it.
    assert rtk.farthest_point_selection(e, n, first=0, count=2, avoid_e_m=[2000.0], avoid_n_m=[0.0]) == [0, 3]


def test_check_shot_allowance_by_hand():
    # [hand] base at 2 km: rtk 10 / 17 mm; base 3 / 5; base drift 2 / 2; base setup 2 / 3; rover centring and rod
    # height on the check mark 2 / 3 (the job's rover figures, common practice); check mark 4 / 6, drift 1 / 1;
    # base and check independent (no cross-covariance stored).
    # H = 2.4477468·√(100 + 9 + 4 + 4 + 4 + 16 + 1) = 2.4477468·√138 = 28.7545 mm
    # V = 1.959964·√(289 + 25 + 4 + 9 + 9 + 36 + 1) = 1.959964·√373 = 37.8532 mm
    h, v = rtk.check_shot_allowance_mm(
        2000.0,
        model=RtkErrorModel(),
        base_h_mm=3,
        base_v_mm=5,
        base_drift_h_mm=2,
        base_drift_v_mm=2,
        check_h_mm=4,
        check_v_mm=6,
        check_drift_h_mm=1,
        check_drift_v_mm=1,
    )
    assert h == pytest.approx(28.7545, abs=1e-4)
    assert v == pytest.approx(37.8532, abs=1e-4)
    # Without base setup and rover pole errors: [hand] H = 2.4477468·√130 = 27.9086 mm.
    h0, _ = rtk.check_shot_allowance_mm(
        2000.0,
        model=RtkErrorModel(setup_h_mm=0, setup_v_mm=0, rover_h_mm=0, rover_v_mm=0),
        base_h_mm=3,
        base_v_mm=5,
        base_drift_h_mm=2,
        base_drift_v_mm=2,
        check_h_mm=4,
        check_v_mm=6,
        check_drift_h_mm=1,
        check_drift_v_mm=1,
    )
    assert h0 == pytest.approx(27.9086, abs=1e-4)
