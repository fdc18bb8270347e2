"""Edges of the accuracy module that a mutation run found unpinned (README "Test strength").

Bad input: every refusal is checked by its stable code, its parameters and the sentence a person
reads (the sentences are the project's own wording). Boundaries: the NSSDA ratio bound, the equal-RMSE
tolerance, the ASPRS blunder and bias thresholds and the "twice as accurate" rule at equality, with
dyadic numbers (exact in binary) so that "at the bound" really is at the bound.

Sources of the rules: NSSDA = FGDC-STD-007.3-1998 §3.2 and App. 3-A (the 0.6 bound is from memory,
unconfirmed, as in the module); ASPRS = Positional Accuracy Standards, Edition 2 (2023) §7 (secondary
transcription): blunder "beyond 3 × RMSE", bias "mean above 25 % of the RMSE", check points "at least
twice as accurate"; FGDC = FGDC-STD-007.2-1998 Part 2 (network accuracy).
Hand formulas are written out beside each value.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest

from registry.geodesy import accuracy as acc
from registry.geodesy.accuracy import ComputationInputError

NAN = float("nan")


def _refusal(func, *args, **kwargs) -> ComputationInputError:
    with pytest.raises(ComputationInputError) as info:
        func(*args, **kwargs)
    return info.value


REFUSALS = [
    # (call, code, params, the sentence shown)
    (lambda: acc.vertical_95_m(NAN), "not_finite", {"name": "sigma"}, "sigma must be finite."),
    (lambda: acc.vertical_95_m(-0.01), "negative_sigma", {}, "A standard deviation cannot be negative."),
    (lambda: acc.vertical_95_m("abc"), "not_a_number", {"name": "sigma"}, "sigma must be a number."),
    (
        lambda: acc.network_accuracy_95_m(np.eye(4)),
        "bad_covariance_shape",
        {"name": "covariance"},
        "covariance must be a 2×2 or 3×3 matrix (or a stack of them).",
    ),
    (
        lambda: acc.network_accuracy_95_m(np.full((2, 3), 1e-6)),
        "bad_covariance_shape",
        {"name": "covariance"},
        "covariance must be a 2×2 or 3×3 matrix (or a stack of them).",
    ),
    (
        lambda: acc.network_accuracy_95_m(np.full((3, 2), 1e-6)),
        "bad_covariance_shape",
        {"name": "covariance"},
        "covariance must be a 2×2 or 3×3 matrix (or a stack of them).",
    ),
    (
        lambda: acc.network_accuracy_95_m([1e-6, 1e-6, 1e-6]),
        "bad_covariance_shape",
        {"name": "covariance"},
        "covariance must be a 2×2 or 3×3 matrix (or a stack of them).",
    ),
    (
        lambda: acc.network_accuracy_95_m(np.eye(2) * 1e-6),
        "bad_covariance_shape",
        {},
        "Network accuracy needs the 3×3 east/north/up covariance.",
    ),
    (
        lambda: acc.network_accuracy_95_m(np.full((2, 2, 3, 3), NAN)),
        "not_finite",
        {"name": "covariance"},
        "covariance must be finite.",
    ),
    (
        lambda: acc.network_accuracy_95_m(np.diag([1e-6, 1e-6, -1e-6])),
        "negative_variance",
        {},
        "A variance cannot be negative.",
    ),
    (lambda: acc.rmse_m([]), "no_residuals", {}, "At least one residual is needed."),
    (lambda: acc.rmse_m(0.02), "no_residuals", {}, "At least one residual is needed."),
    (lambda: acc.rmse_m([0.01, NAN]), "not_finite", {"name": "residuals"}, "residuals must be finite."),
    (lambda: acc.quadrature_sum_m(0.01, NAN), "not_finite", {"name": "RMSE"}, "RMSE must be finite."),
    (lambda: acc.nssda_horizontal_95_m(-0.01, 0.02), "negative_rmse", {}, "An RMSE cannot be negative."),
    (lambda: acc.nssda_horizontal_95_m(0.02, -0.01), "negative_rmse", {}, "An RMSE cannot be negative."),
    (lambda: acc.nssda_horizontal_95_m(NAN, 0.02), "not_finite", {"name": "RMSE_x"}, "RMSE_x must be finite."),
    (lambda: acc.nssda_horizontal_95_m(0.02, NAN), "not_finite", {"name": "RMSE_y"}, "RMSE_y must be finite."),
    (
        lambda: acc.nssda_evaluate(de_m=[0.01]),
        "horizontal_axis_missing",
        {},
        "East and north residuals go together: give both or neither.",
    ),
    (lambda: acc.nssda_evaluate(), "no_residuals", {}, "No residuals given."),
    (
        lambda: acc.nssda_evaluate(de_m=[NAN], dn_m=[0.01]),
        "not_finite",
        {"name": "east residuals"},
        "east residuals must be finite.",
    ),
    (
        lambda: acc.nssda_evaluate(de_m=[0.01], dn_m=[NAN]),
        "not_finite",
        {"name": "north residuals"},
        "north residuals must be finite.",
    ),
    (lambda: acc.accuracy_class(NAN), "not_finite", {"name": "accuracy value"}, "accuracy value must be finite."),
    (
        lambda: acc.nssda_evaluate(du_m=[]),
        "no_residuals",
        {"name": "up residuals"},
        "up residuals must be a non-empty list.",
    ),
    (
        lambda: acc.nssda_evaluate(de_m=[0.01, 0.02], dn_m=[0.01]),
        "ragged_residuals",
        {},
        "Every axis needs one residual per check point.",
    ),
    (
        lambda: acc.asprs2023_evaluate(du_m=[0.01, 0.02], survey_sigma_u_m=[0.01]),
        "ragged_residuals",
        {},
        "survey sigma up needs one value per check point.",
    ),
    (
        lambda: acc.asprs2023_evaluate(du_m=[0.01, 0.02], survey_sigma_u_m=-0.01),
        "negative_sigma",
        {},
        "A survey sigma cannot be negative.",
    ),
    (
        lambda: acc.asprs2023_evaluate(du_m=[0.01], survey_sigma_u_m=NAN),
        "not_finite",
        {"name": "survey sigma up"},
        "survey sigma up must be finite.",
    ),
    (
        lambda: acc.asprs2023_evaluate(de_m=[0.01], dn_m=[0.01], survey_sigma_e_m=NAN, survey_sigma_n_m=0.01),
        "not_finite",
        {"name": "survey sigma east"},
        "survey sigma east must be finite.",
    ),
    (
        lambda: acc.asprs2023_evaluate(de_m=[0.01], dn_m=[0.01], survey_sigma_e_m=0.01, survey_sigma_n_m=NAN),
        "not_finite",
        {"name": "survey sigma north"},
        "survey sigma north must be finite.",
    ),
    (
        lambda: acc.asprs2023_evaluate(de_m=[0.01], dn_m=[0.01], survey_sigma_e_m=0.01),
        "horizontal_axis_missing",
        {},
        "Give the check points' survey sigma for both east and north.",
    ),
    (
        lambda: acc.asprs2023_evaluate(de_m=[0.01], dn_m=[0.01], survey_sigma_n_m=0.01),
        "horizontal_axis_missing",
        {},
        "Give the check points' survey sigma for both east and north.",
    ),
    (
        lambda: acc.asprs2023_evaluate(du_m=[0.01], target_rmse_z_m=0.0),
        "bad_target_rmse",
        {},
        "The target RMSE (up) must be one number > 0 (m).",
    ),
    (
        lambda: acc.asprs2023_evaluate(du_m=[0.01], target_rmse_xy_m=[0.01, 0.02]),
        "bad_target_rmse",
        {},
        "The target RMSE (east/north) must be one number > 0 (m).",
    ),
    (
        lambda: acc.asprs2023_evaluate(du_m=[0.01], target_rmse_z_m=NAN),
        "not_finite",
        {"name": "target RMSE (up)"},
        "target RMSE (up) must be finite.",
    ),
    (
        lambda: acc.asprs2023_evaluate(du_m=[0.01], target_rmse_xy_m=NAN),
        "not_finite",
        {"name": "target RMSE (east/north)"},
        "target RMSE (east/north) must be finite.",
    ),
]


@pytest.mark.parametrize(("call", "code", "params", "sentence"), REFUSALS)
def test_bad_input_is_refused_with_its_code_params_and_sentence(call, code, params, sentence):
    err = _refusal(call)
    assert (err.code, err.params, err.message, str(err)) == (code, params, sentence, sentence)


# --------------------------------------------------------------------------------------------------
# FGDC Part 2: network accuracy
# --------------------------------------------------------------------------------------------------


def test_network_accuracy_reads_the_east_north_covariance_not_east_up():
    # Hand formula: ee = nn = 1e-4, en = 0.6e-4 → eigenvalues 1.6e-4 and 0.4e-4, σmax = 0.012649,
    # C = √(0.4/1.6) = 0.5, K(0.5) = 1.960790 + 0.004071·0.5 + 0.114276·0.25 + 0.371625·0.125 (FGDC).
    cov = np.array([[1e-4, 0.6e-4, 0.0], [0.6e-4, 1e-4, 0.0], [0.0, 0.0, 4e-4]])
    k = 1.960790 + 0.004071 * 0.5 + 0.114276 * 0.25 + 0.371625 * 0.125
    h, v = acc.network_accuracy_95_m(cov)
    assert h == pytest.approx(k * math.sqrt(1.6e-4), rel=1e-12)
    assert v == pytest.approx(1.96 * 0.02, rel=1e-12)  # 1.9600·σu, σu = √4e-4


def test_network_accuracy_of_a_stack_of_stacks_keeps_its_shape():
    cov = np.broadcast_to(np.diag([1e-4, 1e-4, 1e-4]), (2, 2, 3, 3))
    h, v = acc.network_accuracy_95_m(cov)
    # K(1) = 1.960790 + 0.004071 + 0.114276 + 0.371625 = 2.450762 (FGDC), σ = 0.01 m.
    assert np.shape(h) == (2, 2) and np.allclose(h, 0.02450762, rtol=1e-12)
    assert np.allclose(v, 0.0196, rtol=1e-12)


# --------------------------------------------------------------------------------------------------
# NSSDA (FGDC-STD-007.3-1998)
# --------------------------------------------------------------------------------------------------


def test_rmse_of_one_residual_and_per_row():
    assert acc.rmse_m([-0.03]) == pytest.approx(0.03, rel=1e-15)  # √(d²/1)
    rows = acc.rmse_m([[0.03, -0.04], [0.06, 0.08]])  # √((9 + 16)/2)·1e-2 and √((36 + 64)/2)·1e-2
    assert np.allclose(rows, [math.sqrt(12.5e-4), math.sqrt(50e-4)], rtol=1e-15)
    assert np.allclose(acc.rmse_m([[0.03, 0.06], [-0.04, 0.08]], axis=0), rows, rtol=1e-15)


def test_nssda_ratio_bound_0_6_is_inclusive():
    # 0.375 / 0.625 = 0.6 exactly (dyadic numbers); NSSDA App. 3-A allows the approximation for
    # 0.6 ≤ RMSE_min/RMSE_max ≤ 1 (bound from memory, unconfirmed): 2.4477·0.5·(0.375 + 0.625) = 1.22385.
    value, method = acc.nssda_horizontal_95_m(0.375, 0.625)
    assert method == "approximate" and value == pytest.approx(1.22385, rel=1e-12)
    assert acc.NSSDA_RATIO_MIN == 0.6
    # Just below the bound: the circular-error method, K(C)·RMSE_max with the FGDC K polynomial.
    c = 0.37 / 0.625
    value, method = acc.nssda_horizontal_95_m(0.37, 0.625)
    k = 1.960790 + 0.004071 * c + 0.114276 * c**2 + 0.371625 * c**3
    assert method == "circular_error" and value == pytest.approx(k * 0.625, rel=1e-12)


def test_nssda_equal_tolerance_is_inclusive_and_zero_rmse_is_quiet():
    # |RMSE_x − RMSE_y| ≤ 1e-9 m counts as equal: 1.7308·√(x² + y²) (NSSDA §3.2.1).
    value, method = acc.nssda_horizontal_95_m(1e-9, 0.0)
    assert method == "equal" and value == pytest.approx(1.7308e-9, rel=1e-12)
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # no 0/0 warning for a perfect data set
        value, method = acc.nssda_horizontal_95_m(0.0, 0.0)
    assert (value, method) == (0.0, "equal")
    value, method = acc.nssda_horizontal_95_m(0.0, 0.03)  # a zero RMSE on one axis is allowed
    assert method == "circular_error" and value == pytest.approx(1.960790 * 0.03, rel=1e-12)  # K(0)


def test_nssda_result_fields_and_finding_order():
    # Residuals with RMSE_x = 0.01, RMSE_y = 0.05 (ratio 0.2 < 0.6) on 4 points: two findings, the
    # count first; mean_y = 0.05 > 25 % of RMSE_y is a bias on y.
    de = [0.01, -0.01, 0.01, -0.01]
    dn = [0.05, 0.05, 0.05, 0.05]
    r = acc.nssda_evaluate(de, dn)
    assert r.n == 4 and r.z is None and r.vertical_95_m is None
    assert r.x.rmse_m == pytest.approx(0.01) and r.y.rmse_m == pytest.approx(0.05)
    assert r.x.std_m == pytest.approx(math.sqrt(4e-4 / 3))  # s = √(Σ(d − mean)²/(n − 1))
    assert r.y.max_abs_m == pytest.approx(0.05) and r.x.max_abs_m == pytest.approx(0.01)
    codes = [f.code for f in r.findings]
    assert codes == ["too_few_checkpoints", "nssda_ratio_outside", "bias"]
    assert r.findings[0].params == {"n": 4, "minimum": 20, "standard": "nssda"}
    assert r.findings[1].params == {"ratio": pytest.approx(0.2), "limit": 0.6}
    assert r.findings[2].params["axis"] == "y" and r.findings[2].params["reference"] == "measured"
    v = acc.nssda_evaluate(du_m=[0.02, 0.02])
    assert (v.x, v.y, v.rmse_r_m, v.horizontal_95_m, v.horizontal_method) == (None, None, None, None, None)
    assert v.n == 2 and v.findings[-1].params["axis"] == "z"


def test_std_needs_two_points():
    one = acc.nssda_evaluate(du_m=[0.02])
    assert one.z.std_m is None
    two = acc.nssda_evaluate(du_m=[0.01, 0.03])
    assert two.z.std_m == pytest.approx(0.02 / math.sqrt(2), rel=1e-12)  # |a − b|/√2


# --------------------------------------------------------------------------------------------------
# ASPRS Edition 2 (2023)
# --------------------------------------------------------------------------------------------------


def test_asprs_blunder_threshold_is_strictly_beyond_three_rmse():
    # One residual 9b and nine of b: RMSE² = (81 + 9)·b²/10 = 9b², so 9b = 3 × RMSE exactly (b = 2⁻⁷).
    b = 2.0**-7
    at = acc.asprs2023_evaluate(du_m=[9 * b] + [b] * 9, survey_sigma_u_m=0.0)
    assert at.z.rmse_m == 3 * b and at.blunders == ()
    assert acc.ASPRS2023_BLUNDER_FACTOR == 3.0
    # Eleven points, one of 10b: RMSE² = (100 + 10)b²/11 = 10b², 3·RMSE = 9.49b < 10b: a blunder.
    over = acc.asprs2023_evaluate(du_m=[b] * 5 + [10 * b] + [b] * 5, survey_sigma_u_m=0.0)
    assert over.blunders == ((5, "z"),)
    assert [f for f in over.findings if f.code == "blunders"][0].params == {"count": 1, "factor": 3.0}


def test_asprs_bias_and_twice_as_accurate_at_equality_are_not_flagged():
    # |mean| = 0.25 = 25 % of a 1 m target; survey RMSE 0.125 = half the product RMSE 0.25.
    r = acc.asprs2023_evaluate(du_m=[0.25] * 30, survey_sigma_u_m=0.125, target_rmse_z_m=1.0)
    assert [f.code for f in r.findings] == []
    assert r.rmse_v1_m == 0.25 and r.rmse_v2_m == 0.125
    assert r.rmse_v_m == pytest.approx(math.hypot(0.25, 0.125), rel=1e-15)  # ASPRS Ed. 2 quadrature
    # A hair above each bound: both flagged, the bias against the target.
    r = acc.asprs2023_evaluate(du_m=[0.2501] * 30, survey_sigma_u_m=0.1251, target_rmse_z_m=1.0)
    assert [f.code for f in r.findings] == ["bias", "checkpoints_not_twice_as_accurate"]
    assert r.findings[0].params["reference"] == "target" and r.findings[0].params["target_rmse_m"] == 1.0
    assert r.findings[1].params == {"component": "vertical", "product_rmse_m": 0.2501, "survey_rmse_m": 0.1251}


def test_asprs_result_fields_horizontal_and_vertical():
    # 30 points, e = 0.03, n = 0.04 (RMSE_H1 = 0.05, a 3-4-5 triangle), u = 0.06; survey σ 0.012/0.016/0.03.
    r = acc.asprs2023_evaluate(
        [0.03, -0.03] * 15,
        [0.04, -0.04] * 15,
        [0.06, -0.06] * 15,
        survey_sigma_e_m=0.012,
        survey_sigma_n_m=0.016,
        survey_sigma_u_m=0.03,
    )
    assert r.n == 30 and r.x.rmse_m == pytest.approx(0.03) and r.y.rmse_m == pytest.approx(0.04)
    assert r.z.rmse_m == pytest.approx(0.06)
    assert r.rmse_h1_m == pytest.approx(0.05) and r.rmse_h2_m == pytest.approx(0.02)  # √(0.012² + 0.016²)
    assert r.rmse_h_m == pytest.approx(math.sqrt(0.05**2 + 0.02**2))
    assert r.rmse_v1_m == pytest.approx(0.06) and r.rmse_v2_m == pytest.approx(0.03)
    assert r.rmse_3d_m == pytest.approx(math.sqrt(0.05**2 + 0.02**2 + 0.06**2 + 0.03**2))
    assert r.findings == () and r.blunders == ()
    missing = acc.asprs2023_evaluate([0.03] * 30, [0.04] * 30, [0.06] * 30)
    assert [f.params for f in missing.findings if f.code == "survey_accuracy_not_given"] == [
        {"component": "horizontal"},
        {"component": "vertical"},
    ]
    few = acc.asprs2023_evaluate(du_m=[0.01] * 29, survey_sigma_u_m=0.0)
    assert few.findings[0].params == {"n": 29, "minimum": 30, "standard": "asprs2023"}
    assert (few.x, few.y, few.rmse_h_m, few.rmse_3d_m) == (None, None, None, None)


def test_a_stack_of_four_covariances_per_mark_is_accepted():
    s = np.broadcast_to(np.diag([1e-4, 1e-4, 1e-4]), (1, 4, 3, 3))
    h, _v = acc.network_accuracy_95_m(s)
    assert np.shape(h) == (1, 4) and np.allclose(h, 0.02450762, rtol=1e-12)  # K(1) × 10 mm (FGDC Part 2)


def test_asprs_horizontal_blunder_and_weak_horizontal_check_points():
    # East: one residual 9b among nine of b (9b = 3 × RMSE exactly, not a blunder) and one of 10b among ten
    # (beyond 3 × RMSE); the survey σ 0.75 × the product RMSE is not "at least twice as accurate" (ASPRS Ed. 2).
    b = 2.0**-7
    de = [b] * 5 + [10 * b] + [b] * 5
    dn = [b] * 11
    rmse_h1 = math.hypot(math.sqrt(10) * b, b)
    r = acc.asprs2023_evaluate(de, dn, survey_sigma_e_m=0.75 * rmse_h1, survey_sigma_n_m=0.0)
    assert r.blunders == ((5, "x"),)
    assert r.x.n == 11 and r.y.n == 11
    weak = [f for f in r.findings if f.code == "checkpoints_not_twice_as_accurate"]
    assert [f.params["component"] for f in weak] == ["horizontal"]
    assert weak[0].params["product_rmse_m"] == pytest.approx(rmse_h1, rel=1e-12)
