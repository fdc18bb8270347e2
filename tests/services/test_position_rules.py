"""The position rules (``registry.services.position_rules``) checked one by one, at their edges.

The bounds are the project's decision, stated in the module docstring (σ ≤ 100 m per axis, variances
> 0, covariance positive definite, |v| ≤ 1 m/yr, velocity σ in 0 … 1 m/yr). Each is tested at equality
(accepted) and just beyond (refused), since an edge written as ``<`` instead of ``≤`` is invisible
elsewhere. Reference values from outside the project: the kind of each EPSG code from the EPSG
registry as PROJ reads it (pyproj), positive definiteness from the eigenvalues (numpy's ``eigvalsh``,
an independent route to the same definition: a symmetric matrix is positive definite when all its
eigenvalues are > 0; any linear-algebra text, e.g. Golub & Van Loan, "Matrix Computations", 4.2).
No database needed.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from registry.services import position_rules as rules

S = 0.004**2  # (4 mm)²: a usual RTK-class variance (common practice)


def codes(problems):
    return [(p.field, p.code) for p in problems]


def diag(ee=S, nn=S, uu=S, **off):
    return {"cov_ee_m2": ee, "cov_nn_m2": nn, "cov_uu_m2": uu, **off}


# --- frames ---------------------------------------------------------------------------------------


@pytest.mark.parametrize("code", [0, -4979])
def test_frame_codes_that_are_not_codes(code):
    assert rules.frame_problem(code) == f"EPSG:{code} is not a valid code."


def test_frame_unknown_to_proj():
    # 1 is no CRS in the EPSG registry
    assert rules.frame_problem(1) == "EPSG:1 is not a coordinate reference system known to PROJ."


@pytest.mark.parametrize(
    ("code", "kind"),
    [
        (4326, "2D CRS"),  # WGS 84 lat/lon: geographic 2D (EPSG registry)
        (4978, "Geocentric CRS"),  # WGS 84 ECEF: geocentric (EPSG registry)
        (32633, "Projected CRS"),  # WGS 84 / UTM 33N: projected (EPSG registry)
    ],
)
def test_frames_that_cannot_carry_a_position(code, kind):
    from pyproj import CRS

    crs = CRS.from_epsg(code)
    assert rules.frame_problem(code) == (
        f"EPSG:{code} ({crs.name}) is a {kind}; a position needs a geographic 3D CRS "
        "(latitude, longitude, ellipsoidal height), e.g. EPSG:7912 or EPSG:6319."
    )


@pytest.mark.parametrize("code", [4979, 7912, 6319, 9989])  # geographic 3D in the EPSG registry
def test_geographic_3d_frames_are_accepted(code):
    assert rules.frame_problem(code) is None


# --- covariance -----------------------------------------------------------------------------------


def test_covariance_matrix_layout_is_east_north_up_and_symmetric():
    cov = {
        "cov_ee_m2": 1.0,
        "cov_en_m2": 2.0,
        "cov_eu_m2": 3.0,
        "cov_nn_m2": 4.0,
        "cov_nu_m2": 5.0,
        "cov_uu_m2": 6.0,
    }
    expected = np.array([[1.0, 2.0, 3.0], [2.0, 4.0, 5.0], [3.0, 5.0, 6.0]])
    np.testing.assert_array_equal(rules.covariance_matrix_m2(cov), expected)


def test_covariance_matrix_missing_off_diagonals_are_zero():
    np.testing.assert_array_equal(
        rules.covariance_matrix_m2({"cov_ee_m2": 1.0, "cov_nn_m2": 2.0, "cov_uu_m2": 3.0, "cov_en_m2": None}),
        np.diag([1.0, 2.0, 3.0]),
    )


@pytest.mark.parametrize(
    "matrix",
    [
        np.diag([S, S, 4 * S]),
        np.array([[S, 0.999 * S, 0], [0.999 * S, S, 0], [0, 0, S]]),
        np.array([[S, 1.0 * S, 0], [1.0 * S, S, 0], [0, 0, S]]),  # ρ = 1: singular
        np.array([[S, 1.5 * S, 0], [1.5 * S, S, 0], [0, 0, S]]),  # |ρ| > 1: indefinite
        np.diag([S, -S, S]),
    ],
)
def test_positive_definite_agrees_with_the_eigenvalues(matrix):
    by_eigenvalues = bool(np.all(np.linalg.eigvalsh(matrix) > 1e-12 * S))
    assert rules.is_positive_definite(matrix) is by_eigenvalues


def test_positive_definite_uses_the_symmetric_part():
    # [[1, 3], [-1, 1]] has the symmetric part [[1, 1], [1, 1]] (singular): not positive definite,
    # although its own lower triangle alone would factor.
    assert rules.is_positive_definite(np.array([[1.0, -1.0], [3.0, 1.0]])) is False
    assert rules.is_positive_definite(np.array([[2.0, 1.0], [-1.0, 2.0]])) is True  # symmetric part 2·I


def test_good_covariance_has_no_problems():
    assert rules.covariance_problems(diag(uu=4 * S, cov_en_m2=0.3 * S)) == []


def test_all_zero_covariance_is_one_problem():
    problems = rules.covariance_problems({"cov_ee_m2": 0.0, "cov_nn_m2": None})
    assert codes(problems) == [("cov_ee_m2", "covariance_zero")]
    assert problems[0].message == (
        "Give the uncertainty of the coordinates; a position held fixed in an adjustment still has one."
    )


@pytest.mark.parametrize("axis", rules.COV_DIAGONAL)
def test_each_zero_variance_is_refused(axis):
    problems = rules.covariance_problems(diag(**{axis: 0.0}))
    assert codes(problems) == [(axis, "zero_variance")]
    assert problems[0].message == "A variance of zero claims a coordinate known exactly; give its real uncertainty."


@pytest.mark.parametrize("axis", rules.COV_DIAGONAL)
def test_each_negative_variance_is_refused(axis):
    assert codes(rules.covariance_problems(diag(**{axis: -S}))) == [(axis, "negative_variance")]


def test_variance_at_the_bound_is_accepted_and_just_above_refused():
    bound = 100.0**2  # σ = 100 m (module docstring)
    assert rules.VARIANCE_MAX_M2 == bound
    assert rules.covariance_problems(diag(ee=bound, nn=bound, uu=bound)) == []
    above = math.nextafter(bound, math.inf)
    problems = rules.covariance_problems(diag(uu=above))
    assert codes(problems) == [("cov_uu_m2", "variance_too_large")]
    assert problems[0].params == {"limit": bound}
    assert problems[0].message == "A variance above 10000 m² (σ = 100 m) is refused; covariances are in m²."


def test_all_diagonal_problems_are_reported_together():
    assert codes(rules.covariance_problems(diag(ee=-S, nn=0.0, uu=2e4))) == [
        ("cov_ee_m2", "negative_variance"),
        ("cov_nn_m2", "zero_variance"),
        ("cov_uu_m2", "variance_too_large"),
    ]


def test_correlation_of_one_is_not_positive_definite():
    problems = rules.covariance_problems(diag(cov_en_m2=S))  # ρ_en = 1
    assert codes(problems) == [("cov_ee_m2", "covariance_not_positive_definite")]
    assert problems[0].message == ("The east/north/up covariance is not positive definite (check the correlations).")


def test_correlation_just_below_one_is_accepted():
    assert rules.covariance_problems(diag(cov_nu_m2=0.999999 * S)) == []


# --- standard deviations --------------------------------------------------------------------------


def test_sigma_at_the_bound_is_accepted_and_just_above_refused():
    assert rules.SIGMA_MAX_M == 100.0
    assert rules.sigma_problems({"sigma_e": 100.0, "sigma_n": 1e-6, "sigma_u": None}) == []
    problems = rules.sigma_problems({"sigma_u": math.nextafter(100.0, math.inf)})
    assert codes(problems) == [("sigma_u", "variance_too_large")]
    assert problems[0].message == "A standard deviation above 100 m is refused."


def test_sigma_zero_and_negative():
    problems = rules.sigma_problems({"sigma_e": 0.0, "sigma_n": -0.001})
    assert codes(problems) == [("sigma_e", "zero_variance"), ("sigma_n", "negative_variance")]
    assert {p.message for p in problems} == {"A standard deviation must be greater than zero."}


# --- velocities -----------------------------------------------------------------------------------


V3 = {"vel_e_m_yr": 0.012, "vel_n_m_yr": -0.008, "vel_u_m_yr": 0.001}


def test_full_velocity_with_sigmas_is_accepted():
    sig = {"vel_sigma_e_m_yr": 0.0, "vel_sigma_n_m_yr": 0.001, "vel_sigma_u_m_yr": 1.0}  # 0 and 1 inclusive
    assert rules.velocity_problems(V3, sig) == []


def test_no_velocity_at_all_is_accepted():
    assert rules.velocity_problems({}, {}) == []


@pytest.mark.parametrize("missing", rules.VEL_FIELDS)
def test_velocity_needs_all_three_components(missing):
    given = {k: v for k, v in V3.items() if k != missing}
    assert codes(rules.velocity_problems(given, {})) == [("vel_e_m_yr", "velocity_incomplete")]


def test_velocity_sigma_without_velocity():
    assert codes(rules.velocity_problems({}, {"vel_sigma_u_m_yr": 0.001})) == [
        ("vel_sigma_e_m_yr", "velocity_sigma_without_velocity")
    ]


@pytest.mark.parametrize("axis", rules.VEL_FIELDS)
def test_velocity_at_the_bound_and_just_beyond(axis):
    assert rules.velocity_problems({**V3, axis: -1.0}, {}) == []
    beyond = math.nextafter(1.0, math.inf)
    problems = rules.velocity_problems({**V3, axis: -beyond}, {})
    assert codes(problems) == [(axis, "velocity_too_large")]
    assert problems[0].message == "A velocity component above 1 m/yr is refused (mm/yr typed as m/yr?)."


@pytest.mark.parametrize("axis", rules.VEL_SIGMA_FIELDS)
def test_velocity_sigma_bounds(axis):
    beyond = math.nextafter(1.0, math.inf)
    problems = rules.velocity_problems(V3, {axis: beyond})
    assert codes(problems) == [(axis, "velocity_too_large")]
    assert problems[0].message == "A velocity sigma above 1 m/yr is refused."
    negative = rules.velocity_problems(V3, {axis: -1e-9})
    assert codes(negative) == [(axis, "negative_sigma")]
    assert negative[0].message == "A sigma cannot be negative."
