"""Compatibility test, weighted combination and velocity fit, against published and independent values.

Each check value names its outside source (most are recomputed with SciPy 1.17.1).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from pyproj import Geod
from scipy import stats as sst

from registry.geodesy import stats
from registry.geodesy.accuracy import ComputationInputError

# --------------------------------------------------------------------------------------------------
# χ² quantiles
# --------------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    "k,published",
    # Recomputed with SciPy 1.17.1 (scipy.stats.chi2.ppf); the three-decimal values 3.841, 5.991, 7.815 are the ones in any
    # printed χ² table (common practice, from memory).
    [(1, 3.841459), (2, 5.991465), (3, 7.814728)],
)
def test_chi2_critical_values(k, published):
    assert stats.chi2_critical(k) == pytest.approx(published, abs=5e-7)
    assert stats.chi2_critical(k) == sst.chi2.ppf(0.95, k)


def test_chi2_two_sided_bounds_df2():
    # 0.0506 and 7.3778 for df = 2, recomputed with SciPy 1.17.1 (chi2.ppf at 0.025 and 0.975).
    lo, hi = stats.chi2_two_sided_bounds(2)
    assert lo == pytest.approx(0.0506, abs=5e-5)
    assert hi == pytest.approx(7.3778, abs=5e-5)
    assert lo == pytest.approx(sst.chi2.ppf(0.025, 2), rel=1e-12)
    assert hi == pytest.approx(sst.chi2.ppf(0.975, 2), rel=1e-12)


# --------------------------------------------------------------------------------------------------
# Compatibility test T = dᵀ(Σ_pub + Σ_obs)⁻¹d against χ²₀.₉₅(k)
# --------------------------------------------------------------------------------------------------


def test_compatibility_2d_worked_example():
    # Invented worked example, recomputed with SciPy 1.17.1: d = (0.018, −0.021) m; σpub = (0.010, 0.012), σobs = (0.008, 0.010);
    # T = 3.7830, p = 0.1508, critical 5.991 → compatible.
    r = stats.compatibility_test([0.018, -0.021], np.diag([0.010**2, 0.012**2]), np.diag([0.008**2, 0.010**2]))
    assert r.statistic == pytest.approx(3.7830, abs=5e-5)
    assert r.p_value == pytest.approx(0.1508, abs=5e-5)
    assert r.dof == 2 and r.critical == pytest.approx(5.991465, abs=5e-7)
    assert r.compatible is True
    assert r.components == "horizontal"


def test_compatibility_1d_worked_example_and_boundary():
    # Invented worked example, recomputed with SciPy 1.17.1: Δh = 0.060, σ = 0.020 and 0.025 → z = 1.8741, T = 3.5122, compatible.
    r = stats.compatibility_test(0.060, 0.020**2, 0.025**2)
    assert r.statistic == pytest.approx(3.5122, abs=5e-5)
    assert math.sqrt(r.statistic) == pytest.approx(1.8741, abs=5e-5)
    assert r.compatible is True and r.dof == 1
    # boundary: critical Δh = 1.959964 × 0.0320156 = 0.062750 m → 0.0627 passes, 0.0628 fails
    assert stats.compatibility_test(0.0627, 0.020**2, 0.025**2).compatible is True
    assert stats.compatibility_test(0.0628, 0.020**2, 0.025**2).compatible is False
    assert stats.compatibility_test(-0.0628, 0.020**2, 0.025**2).compatible is False


def test_compatibility_selects_components_from_enu():
    d = [0.018, -0.021, 0.060]
    c_pub = np.diag([0.010**2, 0.012**2, 0.020**2])
    c_obs = np.diag([0.008**2, 0.010**2, 0.025**2])
    h = stats.compatibility_test(d, c_pub, c_obs, components="horizontal")
    v = stats.compatibility_test(d, c_pub, c_obs, components="vertical")
    full = stats.compatibility_test(d, c_pub, c_obs)
    assert h.statistic == pytest.approx(3.7830, abs=5e-5)  # same as the 2D example
    assert v.statistic == pytest.approx(3.5122, abs=5e-5)  # same as the 1D example
    assert full.dof == 3 and full.statistic == pytest.approx(h.statistic + v.statistic, rel=1e-12)  # diagonal Σ
    assert full.critical == pytest.approx(7.814728, abs=5e-7)


def test_compatibility_with_correlation_matches_numpy_solve():
    d = np.array([0.011, -0.006, 0.019])
    a = np.array([[4e-5, 1e-5, 0.0], [1e-5, 3e-5, 5e-6], [0.0, 5e-6, 9e-5]])
    b = np.array([[2e-5, -4e-6, 1e-6], [-4e-6, 2e-5, 0.0], [1e-6, 0.0, 6e-5]])
    c12 = np.array([[5e-6, 0.0, 0.0], [0.0, 5e-6, 0.0], [0.0, 0.0, 1e-5]])
    r = stats.compatibility_test(d, a, b, cov_cross_m2=c12)
    sigma = a + b - c12 - c12.T
    assert r.statistic == pytest.approx(float(d @ np.linalg.solve(sigma, d)), rel=1e-12)
    assert r.p_value == pytest.approx(float(sst.chi2.sf(r.statistic, 3)), rel=1e-12)


def test_compatibility_refuses_bad_input():
    with pytest.raises(ComputationInputError) as err:
        stats.compatibility_test([0.01, 0.02], np.diag([0.0, 0.0]), np.diag([0.0, 0.0]))
    assert err.value.code == "not_positive_definite"
    with pytest.raises(ComputationInputError) as err:
        stats.compatibility_test([0.01, 0.02], np.eye(3), np.eye(3))
    assert err.value.code == "bad_covariance_shape"
    with pytest.raises(ComputationInputError) as err:
        stats.compatibility_test([0.01, 0.02], np.eye(2), np.eye(2), components="vertical")
    assert err.value.code == "bad_components"


@settings(max_examples=40, deadline=None)
@given(
    st.lists(
        st.tuples(
            st.floats(-0.1, 0.1),
            st.floats(-0.1, 0.1),
            st.floats(-0.1, 0.1),
            st.floats(0.002, 0.05),
            st.floats(-0.9, 0.9),
        ),
        min_size=1,
        max_size=12,
    )
)
def test_compatibility_vectorised_equals_scalar(rows):
    d = np.array([[r[0], r[1], r[2]] for r in rows])
    covs = []
    for r in rows:
        s, rho = r[3], r[4]
        covs.append(np.array([[s * s, rho * s * s, 0.0], [rho * s * s, s * s, 0.0], [0.0, 0.0, 4 * s * s]]))
    covs = np.array(covs)
    batch = stats.compatibility_test(d, covs, covs)
    for i in range(len(rows)):
        one = stats.compatibility_test(d[i], covs[i], covs[i])
        assert batch.statistic[i] == pytest.approx(one.statistic, rel=1e-12, abs=1e-15)
        assert bool(batch.compatible[i]) == one.compatible


def test_enu_difference_against_geodesic_distance():
    # Invented positions near the demo district (45.2 N, 110.6 W), EPSG:7912 at 2010.0, on the ellipsoid (h = 0,
    # where the geodesic lives: at height h the ENU chord is longer by (N + h)/N). The horizontal part of d must
    # equal the geodesic distance (pyproj.Geod on GRS80, independent) to well under 0.1 mm at 0.16 m.
    kw = dict(published_frame_epsg=7912, published_epoch_yr=2010.0, observed_frame_epsg=7912, observed_epoch_yr=2010.0)
    d = stats.enu_difference_m(
        published_lat_deg=45.2,
        published_lon_deg=-110.6,
        published_h_m=0.0,
        observed_lat_deg=45.2 + 1.0e-6,
        observed_lon_deg=-110.6 + 1.5e-6,
        observed_h_m=0.015,
        **kw,
    )
    az, _, dist = Geod(ellps="GRS80").inv(-110.6, 45.2, -110.6 + 1.5e-6, 45.2 + 1.0e-6)
    assert math.hypot(d[0], d[1]) == pytest.approx(dist, abs=1e-5)
    assert math.degrees(math.atan2(d[0], d[1])) == pytest.approx(az, abs=1e-3)
    assert d[2] == pytest.approx(0.015, abs=1e-6)


def test_enu_difference_refuses_mixed_frames_or_epochs():
    with pytest.raises(ComputationInputError) as err:
        stats.enu_difference_m(
            published_lat_deg=45.2,
            published_lon_deg=-110.6,
            published_h_m=1500.0,
            observed_lat_deg=45.2,
            observed_lon_deg=-110.6,
            observed_h_m=1500.0,
            published_frame_epsg=7912,
            published_epoch_yr=2010.0,
            observed_frame_epsg=7912,
            observed_epoch_yr=2020.5,
        )
    assert err.value.code == "frame_or_epoch_mismatch"


# --------------------------------------------------------------------------------------------------
# Weighted combination (weights 1/σ²)
# --------------------------------------------------------------------------------------------------

EX_X = [1000.012, 1000.020, 1000.005]
EX_SIGMA = [0.010, 0.015, 0.010]


def test_combination_worked_example():
    # Invented worked example, recomputed with SciPy 1.17.1: weighted mean 1000.010591 m, σ_mean 0.006396 m, Σw·v² = 0.7259 (dof 2)
    # inside (0.0506, 7.3778), s0 = 0.6025.
    r = stats.weighted_combination(EX_X, [s**2 for s in EX_SIGMA])
    assert r.mean_m[0] == pytest.approx(1000.010591, abs=5e-7)
    assert r.sigma_mean_m[0] == pytest.approx(0.006396, abs=5e-7)
    assert r.omega == pytest.approx(0.7259, abs=5e-5)
    assert r.dof == 2
    assert r.s0 == pytest.approx(0.6025, abs=5e-5)
    assert r.spread == "consistent"


def test_combination_statement_uses_the_weighted_sigma_not_the_unweighted_one():
    # Recomputed with SciPy 1.17.1 (t(0.975, 2) = 4.30265): unweighted s/√n = 0.004333 m and the t-interval half-width 0.018645 m must not be
    # what the statement uses; the tool uses the weighted formal σ = 0.006396 m (module docstring).
    r = stats.weighted_combination(EX_X, [s**2 for s in EX_SIGMA])
    stated = math.sqrt(r.cov_statement_m2[0, 0])
    assert not r.scaled
    assert stated == pytest.approx(0.006396, abs=5e-7)
    assert abs(stated - 0.004333) > 1e-3 and abs(stated - 0.018645) > 1e-3


def test_combination_scales_up_when_the_spread_is_too_large():
    r = stats.weighted_combination([0.000, 0.100, 0.000], [0.01**2] * 3)
    assert r.spread == "too_large" and r.scaled
    assert r.cov_statement_m2[0, 0] == pytest.approx(r.cov_mean_m2[0, 0] * r.s0**2, rel=1e-12)


def test_combination_with_full_covariance_matches_an_independent_gls():
    x = np.array([[0.010, -0.004, 0.020], [0.013, -0.001, 0.011], [0.008, -0.006, 0.025], [0.011, -0.002, 0.016]])
    base = np.array([[9e-6, 2e-6, 1e-6], [2e-6, 8e-6, -1e-6], [1e-6, -1e-6, 4e-5]])
    covs = np.array([base * f for f in (1.0, 2.0, 1.5, 0.7)])
    r = stats.weighted_combination(x, covs)
    # independent: whitened least squares with numpy.linalg.lstsq on the stacked model x_i = μ + e_i
    rows, rhs = [], []
    for xi, ci in zip(x, covs, strict=True):
        li = np.linalg.inv(np.linalg.cholesky(ci))
        rows.append(li)
        rhs.append(li @ xi)
    a, b = np.vstack(rows), np.concatenate(rhs)
    mu, res, *_ = np.linalg.lstsq(a, b, rcond=None)
    np.testing.assert_allclose(r.mean_m, mu, rtol=0, atol=1e-12)
    np.testing.assert_allclose(r.cov_mean_m2, np.linalg.inv(a.T @ a), rtol=1e-9)
    assert r.omega == pytest.approx(float(res[0]), rel=1e-9)
    assert r.dof == 9


@settings(max_examples=30, deadline=None)
@given(
    st.lists(
        st.tuples(*[st.floats(-0.05, 0.05)] * 3, *[st.floats(0.002, 0.03)] * 3),
        min_size=2,
        max_size=8,
    )
)
def test_combination_diagonal_3d_equals_three_1d(rows):
    x = np.array([r[:3] for r in rows])
    sig = np.array([r[3:] for r in rows])
    covs = np.array([np.diag(s**2) for s in sig])
    full = stats.weighted_combination(x, covs)
    omega = 0.0
    for axis in range(3):
        one = stats.weighted_combination(x[:, axis], sig[:, axis] ** 2)
        assert full.mean_m[axis] == pytest.approx(one.mean_m[0], rel=1e-9, abs=1e-12)
        assert full.sigma_mean_m[axis] == pytest.approx(one.sigma_mean_m[0], rel=1e-9)
        omega += one.omega
    assert full.omega == pytest.approx(omega, rel=1e-7, abs=1e-12)


def test_combination_refuses_one_solution_and_bad_covariance():
    with pytest.raises(ComputationInputError) as err:
        stats.weighted_combination([1.0], [1e-4])
    assert err.value.code == "too_few_solutions"
    with pytest.raises(ComputationInputError) as err:
        stats.weighted_combination([1.0, 1.1], [1e-4, -1e-4])
    assert err.value.code == "not_positive_definite"


# --------------------------------------------------------------------------------------------------
# Velocity
# --------------------------------------------------------------------------------------------------


def test_velocity_matches_numpy_polyfit():
    # numpy.polyfit with weights 1/σ is the independent weighted straight-line fit.
    t = np.array([2012.40, 2014.10, 2016.75, 2019.30, 2022.05])
    y = np.array([0.0021, 0.0105, 0.0198, 0.0322, 0.0414])
    s = np.array([0.002, 0.003, 0.002, 0.004, 0.002])
    r = stats.velocity_fit(t, y, s**2, ref_epoch_yr=2015.0)
    coeffs, cov = np.polyfit(t - 2015.0, y, 1, w=1.0 / s, cov="unscaled")
    assert r.velocity_m_yr[0] == pytest.approx(coeffs[0], rel=1e-10)
    assert r.position_m[0] == pytest.approx(coeffs[1], abs=1e-12)
    assert r.sigma_velocity_m_yr[0] == pytest.approx(math.sqrt(cov[0, 0]), rel=1e-9)
    assert r.dof == 3 and r.span_yr == pytest.approx(9.65)


def test_velocity_textbook_sigma_for_equal_weights():
    # σ_v = σ / √Σ(t − t̄)² for a straight line with equal σ (any regression textbook).
    t = np.array([2015.0, 2016.0, 2017.0, 2018.0])
    r = stats.velocity_fit(t, [0.0, 0.003, 0.0065, 0.0092], [0.001**2] * 4)
    assert r.sigma_velocity_m_yr[0] == pytest.approx(0.001 / math.sqrt(np.sum((t - t.mean()) ** 2)), rel=1e-12)


def test_velocity_3d_with_full_covariance_recovers_an_exact_motion():
    t = np.array([2010.0, 2012.5, 2015.0, 2019.0])
    v_true = np.array([-0.0121, -0.0043, 0.0008])  # invented rates, m/yr
    x = (t[:, None] - 2010.0) * v_true
    cov = np.array([[[4e-6, 1e-6, 0.0], [1e-6, 4e-6, 0.0], [0.0, 0.0, 1.6e-5]]] * 4)
    r = stats.velocity_fit(t, x, cov, ref_epoch_yr=2010.0)
    np.testing.assert_allclose(r.velocity_m_yr, v_true, atol=1e-12)
    np.testing.assert_allclose(r.position_m, 0.0, atol=1e-12)
    assert r.omega == pytest.approx(0.0, abs=1e-15)


@pytest.mark.parametrize(
    "t,code",
    [([2015.0, 2018.0], "velocity_too_few_solutions"), ([2015.0, 2016.0, 2017.4], "velocity_span_too_short")],
)
def test_velocity_rule(t, code):
    # Our documented rule: ≥ 3 solutions spanning ≥ 2.5 years (module docstring).
    with pytest.raises(ComputationInputError) as err:
        stats.velocity_fit(t, [0.0] * len(t), [1e-6] * len(t))
    assert err.value.code == code
    assert stats.velocity_rule([2015.0, 2016.0, 2017.5]) == (True, None)
