"""Positional accuracy standards: network accuracy, NSSDA and ASPRS Edition 2 check-point tests.

Sources
-------
* FGDC-STD-007.2-1998, *Geospatial Positioning Accuracy Standards, Part 2: Standards for Geodetic
  Networks*, Federal Geographic Data Committee, 1998. Network accuracy at 95 % confidence (the
  standard's local accuracy, between connected marks, needs cross-covariances the registry does not store);
  horizontal accuracy is the radius of the 95 % circle, r95 = K·σmax with the polynomial
  K = 1.960790 + 0.004071·C + 0.114276·C² + 0.371625·C³, C = σmin/σmax (coefficients: secondary
  transcription of FGDC-STD-007.2-1998, as coded in Geoscience Australia's open-source geodesy package,
  "circularised horizontal PU (95%)"; where Part 2 prints them is from memory, unconfirmed). Vertical
  accuracy = 1.9600·σ, ellipsoid and orthometric heights separately. Accuracy classes 1 mm … 10 m: the
  list of classes and the inclusive bounds are **from memory, unconfirmed** until checked against
  FGDC-STD-007.2-1998 Table 2.1 (only the 10 m maximum is confirmed, from the NSPS definitions quoting
  the standard); the standard says larger classes may be added as needed, we report "beyond 10-Meter"
  explicitly.
* FGDC-STD-007.3-1998, *Part 3: National Standard for Spatial Data Accuracy* (NSSDA), §3.2 and
  Appendix 3-A: RMSE per axis, Accuracy_r = 1.7308·RMSE_r when RMSE_x = RMSE_y, otherwise
  2.4477·0.5·(RMSE_x + RMSE_y) when RMSE_min/RMSE_max lies in [0.6, 1.0] (the 0.6 bound is from
  memory, unconfirmed). Below 0.6 the standard refers the reader to another method; which one is
  **from memory, unconfirmed**: probably the circular-error method of Greenwalt & Shultz (1968), the
  same K polynomial that FGDC Part 2 uses, which is what we apply (K(C)·RMSE_max, C = RMSE_min/RMSE_max).
  Accuracy_z = 1.9600·RMSE_z. At least 20 check points (§3.2.2). Constants after Greenwalt, C. R. and
  Shultz, M. E. (1968), *Principles of Error Theory and Cartographic Applications*, ACIC Technical
  Report 96 (the NSSDA text as transcribed spells the name "Schultz"; we use "Shultz" throughout).
* ASPRS *Positional Accuracy Standards for Digital Geospatial Data*, Edition 2, Version 1.0 (2023):
  accuracy stated as RMSE only (no 95 % figure); check-point survey accuracy added in quadrature,
  RMSE_H = √(RMSE_H1² + RMSE_H2²), RMSE_V likewise; at least 30 check points; bias when the mean error
  exceeds 25 % of the **target** (specified) RMSE of the accuracy class, which the caller may give as
  ``target_rmse_xy_m`` / ``target_rmse_z_m`` (without it we compare with the measured RMSE and say so;
  the target denominator is from memory, unconfirmed, and from a secondary transcription of Ed. 2);
  blunders beyond 3 × RMSE are investigated, never silently removed (we use the measured RMSE there);
  three-dimensional RMSE_3D = √(RMSE_H² + RMSE_V²) (the last formula from memory, unconfirmed).
  Formulas from a secondary transcription of Ed. 2 §7.2, §7.11 (Table 7.4), §7.12, §7.13 (section
  numbers indicative).

Axes: x = east, y = north, z = up (ellipsoid height unless the caller says otherwise). Residuals are
dataset − check point, in metres, as in NSSDA §3.2.1. All functions accept scalars or numpy arrays and
return the same shape. No Django import here; wording lives in :mod:`registry.geodesy.statements`.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray

from registry.geodesy.arraytypes import ArrayLike, FloatArray, FloatOrArray

__all__ = [
    "ACCURACY_CLASSES",
    "ASPRS2023_BIAS_FRACTION",
    "ASPRS2023_BLUNDER_FACTOR",
    "covariance_from_sigmas_m2",
    "ASPRS2023_MIN_CHECKPOINTS",
    "BEYOND_TABLE_CLASS",
    "ComputationInputError",
    "Finding",
    "K_POLY_COEFFS",
    "NSSDA_FACTOR_1D",
    "NSSDA_FACTOR_2D",
    "NSSDA_FACTOR_RADIAL",
    "NSSDA_MIN_CHECKPOINTS",
    "NSSDA_RATIO_MIN",
    "AsprsResult",
    "NssdaResult",
    "accuracy_class",
    "asprs2023_evaluate",
    "circular_k",
    "error_ellipse_sigmas_m",
    "fgdc_horizontal_95_m",
    "network_accuracy_95_m",
    "nssda_evaluate",
    "nssda_horizontal_95_m",
    "nssda_vertical_95_m",
    "quadrature_sum_m",
    "rmse_m",
    "sigma_from_variance_m",
    "vertical_95_m",
]


class ComputationInputError(ValueError):
    """Bad input to a pure computation. ``code`` is stable and machine-readable; ``params`` fill the message.

    Callers turn it into a Django ``ValidationError`` / ``registry.errors.InvalidInput`` (pages, API)
    or a ``CommandError`` (commands) without changing the code.
    """

    def __init__(self, message: str, *, code: str, params: dict[str, Any] | None = None):
        super().__init__(message)
        self.message = message
        self.code = code
        self.params = params or {}


@dataclass(frozen=True)
class Finding:
    """A warning or note attached to a result: a stable ``code`` and the numbers behind it.

    The sentence shown to people is produced by ``statements.finding_text``.
    """

    code: str
    params: dict[str, Any] = field(default_factory=dict)


# --------------------------------------------------------------------------------------------------
# FGDC-STD-007.2-1998 (Part 2): network accuracy
# --------------------------------------------------------------------------------------------------

#: Coefficients of K(C) = c0 + c1·C + c2·C² + c3·C³, FGDC-STD-007.2-1998 (secondary transcription:
#: Geoscience Australia geodesy package, "circularised horizontal PU (95%)").
#: Going back from a network accuracy to σ must use the factors that made it, K(1) = 2.450762 and 1.9600
#: (so σ → r95 → σ is exact); base screening takes σ from the covariance instead, and its own 95 % figures
#: use the exact circle factor √(−2 ln 0.05) = 2.447747.
K_POLY_COEFFS: tuple[float, float, float, float] = (1.960790, 0.004071, 0.114276, 0.371625)

#: One-dimensional 95 % factor as printed in the standards (z(0.975) = 1.959964 rounded).
NSSDA_FACTOR_1D = 1.9600

#: Relative tolerance for "is this covariance positive semi-definite": covariances computed by an
#: adjustment and rounded to print can have a determinant a hair below zero.
_PSD_RTOL = 1e-9


def _as_float_array(value: ArrayLike, name: str) -> FloatArray:
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError) as exc:
        raise ComputationInputError(f"{name} must be a number.", code="not_a_number", params={"name": name}) from exc
    if not np.all(np.isfinite(arr)):
        raise ComputationInputError(f"{name} must be finite.", code="not_finite", params={"name": name})
    return arr


def _scalar_or_array(arr: ArrayLike) -> FloatOrArray:
    a = np.asarray(arr, dtype=float)
    return float(a) if a.ndim == 0 else a


def circular_k(c: ArrayLike) -> FloatOrArray:
    """FGDC Part 2 factor K(C) that turns σmax into the radius of the 95 % circle.

    Parameters
    ----------
    c : float or array_like
        Ratio σmin/σmax of the standard error ellipse's semi-axes, 0 ≤ C ≤ 1.

    Returns
    -------
    float or ndarray
        K = 1.960790 + 0.004071·C + 0.114276·C² + 0.371625·C³ (same shape as ``c``).

    Examples
    --------
    >>> round(circular_k(1.0), 6)
    2.450762
    >>> round(circular_k(0.0), 6)
    1.96079
    """
    c_arr = _as_float_array(c, "C")
    if np.any((c_arr < 0.0) | (c_arr > 1.0)):
        raise ComputationInputError("C = σmin/σmax must lie between 0 and 1.", code="ratio_out_of_range")
    c0, c1, c2, c3 = K_POLY_COEFFS
    return _scalar_or_array(c0 + c_arr * (c1 + c_arr * (c2 + c_arr * c3)))


def error_ellipse_sigmas_m(
    cov_ee_m2: ArrayLike, cov_en_m2: ArrayLike, cov_nn_m2: ArrayLike
) -> tuple[FloatOrArray, FloatOrArray]:
    """Semi-axes (σmax, σmin) of the 1σ standard error ellipse from a 2×2 east/north covariance.

    Closed-form eigenvalues of the symmetric 2×2 matrix [[ee, en], [en, nn]].

    Parameters
    ----------
    cov_ee_m2, cov_en_m2, cov_nn_m2 : float or array_like
        Variance east, covariance east–north, variance north (m²), broadcastable.

    Returns
    -------
    sigma_max_m, sigma_min_m : float or ndarray
        Square roots of the larger and smaller eigenvalue (m).

    Raises
    ------
    ComputationInputError
        Negative variance (code ``negative_variance``) or a matrix that is not positive
        semi-definite, |cov_en| > √(ee·nn) (code ``not_positive_semidefinite``).

    Examples
    --------
    >>> error_ellipse_sigmas_m(0.0004, 0.0, 0.0001)
    (0.02, 0.01)
    """
    ee = _as_float_array(cov_ee_m2, "variance east")
    en = _as_float_array(cov_en_m2, "covariance east-north")
    nn = _as_float_array(cov_nn_m2, "variance north")
    ee, en, nn = np.broadcast_arrays(ee, en, nn)
    if np.any(ee < 0.0) or np.any(nn < 0.0):
        raise ComputationInputError("A variance cannot be negative.", code="negative_variance")
    if np.any(en * en > ee * nn * (1.0 + _PSD_RTOL) + 1e-30):
        raise ComputationInputError(
            "The east/north covariance is not positive semi-definite: |cov_en| must not exceed √(var_e·var_n).",
            code="not_positive_semidefinite",
        )
    half_sum = 0.5 * (ee + nn)
    radius = np.hypot(0.5 * (ee - nn), en)
    lam_max = half_sum + radius
    lam_min = np.clip(half_sum - radius, 0.0, None)  # rounding can leave −1e-20
    return _scalar_or_array(np.sqrt(lam_max)), _scalar_or_array(np.sqrt(lam_min))


def fgdc_horizontal_95_m(cov_ee_m2: ArrayLike, cov_en_m2: ArrayLike, cov_nn_m2: ArrayLike) -> FloatOrArray:
    """Horizontal accuracy at 95 %: radius of the 95 % circle, r95 = K(C)·σmax (FGDC-STD-007.2-1998).

    Parameters
    ----------
    cov_ee_m2, cov_en_m2, cov_nn_m2 : float or array_like
        East/north covariance in m² (local ENU at the point), broadcastable.

    Returns
    -------
    float or ndarray
        r95 in metres. A zero covariance gives 0 (a CORS-like point, "infinitesimal").

    Examples
    --------
    >>> round(fgdc_horizontal_95_m(0.01**2, 0.0, 0.01**2), 9)  # circular: K(1) = 2.450762
    0.02450762
    """
    sigma_max, sigma_min = error_ellipse_sigmas_m(cov_ee_m2, cov_en_m2, cov_nn_m2)
    sigma_max = np.asarray(sigma_max)
    sigma_min = np.asarray(sigma_min)
    safe = np.where(sigma_max > 0.0, sigma_max, 1.0)
    c = np.where(sigma_max > 0.0, np.clip(sigma_min / safe, 0.0, 1.0), 1.0)
    return _scalar_or_array(np.asarray(circular_k(c)) * sigma_max)


def sigma_from_variance_m(variance_m2: ArrayLike) -> FloatOrArray:
    """The standard deviation (m) from a variance (m²): σ = √variance, the one place it is taken.

    Examples
    --------
    >>> sigma_from_variance_m(2.5e-05)
    0.005
    >>> sigma_from_variance_m([1e-4, 0.0]).tolist()
    [0.01, 0.0]
    """
    variance = _as_float_array(variance_m2, "variance")
    if np.any(variance < 0.0):
        raise ComputationInputError("A variance cannot be negative.", code="negative_variance")
    return _scalar_or_array(np.sqrt(variance))


def vertical_95_m(sigma_m: ArrayLike) -> FloatOrArray:
    """Vertical accuracy at 95 %: 1.9600·σ (FGDC Part 2 for ellipsoid and orthometric heights; NSSDA).

    Use it once for the ellipsoid height and once for the orthometric height; they are classified
    separately.

    Examples
    --------
    >>> round(vertical_95_m(0.02), 9)
    0.0392
    """
    sigma = _as_float_array(sigma_m, "sigma")
    if np.any(sigma < 0.0):
        raise ComputationInputError("A standard deviation cannot be negative.", code="negative_sigma")
    return _scalar_or_array(NSSDA_FACTOR_1D * sigma)


#: FGDC-STD-007.2-1998 accuracy classes: (label, upper bound in metres, inclusive). From memory,
#: unconfirmed until checked against FGDC-STD-007.2-1998 Table 2.1; the 10 m maximum is confirmed
#: (NSPS definitions quoting the standard).
ACCURACY_CLASSES: tuple[tuple[str, float], ...] = (
    ("1-Millimeter", 0.001),
    ("2-Millimeter", 0.002),
    ("5-Millimeter", 0.005),
    ("1-Centimeter", 0.010),
    ("2-Centimeter", 0.020),
    ("5-Centimeter", 0.050),
    ("1-Decimeter", 0.100),
    ("2-Decimeter", 0.200),
    ("5-Decimeter", 0.500),
    ("1-Meter", 1.000),
    ("2-Meter", 2.000),
    ("5-Meter", 5.000),
    ("10-Meter", 10.000),
)

#: Label for a 95 % value larger than the table's last class. We do not invent 20 m / 50 m classes.
BEYOND_TABLE_CLASS = "beyond 10-Meter"

#: Values within 1 nm above a bound still belong to it: 1.96·σ and similar products land a few ulp
#: above a round bound (0.0100000000000002) and would otherwise fall one class lower.
_CLASS_TOL_M = 1e-9

_CLASS_BOUNDS_M = np.array([b for _, b in ACCURACY_CLASSES])
_CLASS_LABELS = np.array([label for label, _ in ACCURACY_CLASSES] + [BEYOND_TABLE_CLASS], dtype=object)


def accuracy_class(value_m: ArrayLike) -> str | NDArray[np.object_]:
    """Smallest FGDC Part 2 class whose bound is ≥ the 95 % value (bounds inclusive).

    Parameters
    ----------
    value_m : float or array_like
        A 95 % accuracy (horizontal radius, or vertical) in metres, ≥ 0.

    Returns
    -------
    str or ndarray of str
        e.g. ``"2-Centimeter"``; ``BEYOND_TABLE_CLASS`` above 10 m.

    Examples
    --------
    >>> accuracy_class(0.0100), accuracy_class(0.0101), accuracy_class(12.0)
    ('1-Centimeter', '2-Centimeter', 'beyond 10-Meter')
    """
    value = _as_float_array(value_m, "accuracy value")
    if np.any(value < 0.0):
        raise ComputationInputError("An accuracy value cannot be negative.", code="negative_accuracy")
    index = np.searchsorted(_CLASS_BOUNDS_M, value - _CLASS_TOL_M, side="left")
    labels = _CLASS_LABELS[index]
    return str(labels) if value.ndim == 0 else labels


def _as_cov_stack(cov: ArrayLike, name: str) -> np.ndarray:
    arr = _as_float_array(cov, name)
    if arr.ndim < 2 or arr.shape[-1] != arr.shape[-2] or arr.shape[-1] not in (2, 3):
        raise ComputationInputError(
            f"{name} must be a 2×2 or 3×3 matrix (or a stack of them).",
            code="bad_covariance_shape",
            params={"name": name},
        )
    return arr


def network_accuracy_95_m(cov_enu_m2: ArrayLike) -> tuple[FloatOrArray, FloatOrArray]:
    """Horizontal (K·σmax) and vertical (1.9600·σu) 95 % network accuracy from a 3×3 ENU covariance.

    Parameters
    ----------
    cov_enu_m2 : array_like, shape (..., 3, 3)
        Covariance of the point with respect to the datum, local east/north/up, m².

    Returns
    -------
    horizontal_95_m, vertical_95_m : float or ndarray
        The vertical figure is for the ellipsoid height (the "up" axis).
    """
    cov = _as_cov_stack(cov_enu_m2, "covariance")
    if cov.shape[-1] != 3:
        raise ComputationInputError(
            "Network accuracy needs the 3×3 east/north/up covariance.", code="bad_covariance_shape"
        )
    horizontal = fgdc_horizontal_95_m(cov[..., 0, 0], cov[..., 0, 1], cov[..., 1, 1])
    if np.any(cov[..., 2, 2] < 0.0):
        raise ComputationInputError("A variance cannot be negative.", code="negative_variance")
    vertical = vertical_95_m(np.sqrt(cov[..., 2, 2]))
    return horizontal, vertical


# --------------------------------------------------------------------------------------------------
# FGDC-STD-007.3-1998 (Part 3, NSSDA) and ASPRS Edition 2 (2023): check-point tests
# --------------------------------------------------------------------------------------------------

#: Factors printed in NSSDA §3.2.1 (Greenwalt and Shultz 1968): √(−2 ln 0.05) = 2.4477468 and
#: 2.4477/√2 = 1.7308. We use the printed four-decimal values so results match the standard's examples.
NSSDA_FACTOR_2D = 2.4477
NSSDA_FACTOR_RADIAL = 1.7308
#: RMSE_min/RMSE_max range in which 2.4477·0.5·(RMSE_x+RMSE_y) is allowed (NSSDA App. 3-A; from memory,
#: unconfirmed).
NSSDA_RATIO_MIN = 0.6
NSSDA_MIN_CHECKPOINTS = 20
ASPRS2023_MIN_CHECKPOINTS = 30
#: ASPRS Edition 2: mean error above 25 % of the target RMSE suggests a bias; an error above 3 × RMSE is
#: a blunder to investigate (secondary transcription of ASPRS Ed. 2 (2023) §7.2; the target-RMSE
#: denominator of the bias rule is from memory, unconfirmed).
ASPRS2023_BIAS_FRACTION = 0.25
ASPRS2023_BLUNDER_FACTOR = 3.0
#: Two RMSE values closer than this (m) count as equal for the choice of the NSSDA formula. The two
#: formulas then agree to 5e-5 relative (1.7308·√2 = 2.44773), so the choice is cosmetic there.
_EQUAL_RMSE_TOL_M = 1e-9


def rmse_m(residuals_m: ArrayLike, axis: int = -1) -> FloatOrArray:
    """Root-mean-square of residuals, √(Σd²/n) with n (not n−1): RMSE includes any bias.

    RMSE² = mean² + s²·(n−1)/n with s the sample standard deviation (n−1).

    Examples
    --------
    >>> round(rmse_m([0.03, -0.04]), 9)
    0.035355339
    """
    d = _as_float_array(residuals_m, "residuals")
    if d.ndim == 0 or d.shape[axis] == 0:
        raise ComputationInputError("At least one residual is needed.", code="no_residuals")
    return _scalar_or_array(np.sqrt(np.mean(d * d, axis=axis)))


def quadrature_sum_m(*values_m: ArrayLike) -> FloatOrArray:
    """√(a² + b² + …): ASPRS Edition 2 combination of product and check-point survey RMSE, and RMSE_3D.

    Examples
    --------
    >>> round(quadrature_sum_m(0.01, 0.02), 6)  # ASPRS Ed. 2 Table 7.4 first row: 2.24 cm
    0.022361
    """
    arrays = [_as_float_array(v, "RMSE") for v in values_m]
    return _scalar_or_array(np.sqrt(sum(a * a for a in arrays)))


def nssda_horizontal_95_m(rmse_x_m: ArrayLike, rmse_y_m: ArrayLike) -> tuple[FloatOrArray, str | NDArray[np.object_]]:
    """NSSDA horizontal accuracy at 95 % from RMSE_x (east) and RMSE_y (north).

    * RMSE_x = RMSE_y: Accuracy_r = 1.7308·RMSE_r (method ``"equal"``).
    * 0.6 ≤ RMSE_min/RMSE_max < 1: Accuracy_r ≈ 2.4477·0.5·(RMSE_x + RMSE_y) (``"approximate"``).
    * ratio < 0.6: the approximation is not valid; the circular-error method of Greenwalt & Shultz
      (1968) is used, the same K polynomial as FGDC Part 2: K(C)·RMSE_max with C = RMSE_min/RMSE_max
      (``"circular_error"``). That this is the method NSSDA App. 3-A refers to is from memory,
      unconfirmed.

    Returns
    -------
    accuracy_m : float or ndarray
    method : str or ndarray of str

    Examples
    --------
    >>> acc, method = nssda_horizontal_95_m(0.03, 0.03)
    >>> round(acc, 6), method
    (0.073432, 'equal')
    """
    x = _as_float_array(rmse_x_m, "RMSE_x")
    y = _as_float_array(rmse_y_m, "RMSE_y")
    x, y = np.broadcast_arrays(x, y)
    if np.any(x < 0.0) or np.any(y < 0.0):
        raise ComputationInputError("An RMSE cannot be negative.", code="negative_rmse")
    hi = np.maximum(x, y)
    lo = np.minimum(x, y)
    ratio = np.where(hi > 0.0, lo / np.where(hi > 0.0, hi, 1.0), 1.0)
    equal = np.abs(x - y) <= _EQUAL_RMSE_TOL_M
    approx_ok = ratio >= NSSDA_RATIO_MIN
    acc_equal = NSSDA_FACTOR_RADIAL * np.hypot(x, y)
    acc_approx = NSSDA_FACTOR_2D * 0.5 * (x + y)
    acc_circ = np.asarray(circular_k(ratio)) * hi
    accuracy = np.where(equal, acc_equal, np.where(approx_ok, acc_approx, acc_circ))
    method = np.where(equal, "equal", np.where(approx_ok, "approximate", "circular_error")).astype(object)
    if accuracy.ndim == 0:
        return accuracy.item(), str(method)
    return accuracy, method


def nssda_vertical_95_m(rmse_z_m: ArrayLike) -> FloatOrArray:
    """NSSDA vertical accuracy at 95 %: Accuracy_z = 1.9600·RMSE_z.

    Examples
    --------
    >>> round(nssda_vertical_95_m(0.0574002119585), 9)  # USGS LA_Barataria_2013 report: 0.112504415
    0.112504415
    """
    return vertical_95_m(rmse_z_m)


@dataclass(frozen=True)
class AxisSummary:
    """Statistics of one axis of check-point residuals (metres)."""

    n: int
    mean_m: float
    std_m: float | None  # sample standard deviation (n−1); None when n = 1
    rmse_m: float
    max_abs_m: float


def _axis_summary(d: FloatArray) -> AxisSummary:
    n = int(d.size)
    return AxisSummary(
        n=n,
        mean_m=float(np.mean(d)),
        std_m=float(np.std(d, ddof=1)) if n > 1 else None,
        rmse_m=float(np.sqrt(np.mean(d * d))),
        max_abs_m=float(np.max(np.abs(d))),
    )


def _check_residuals(
    de_m: ArrayLike | None, dn_m: ArrayLike | None, du_m: ArrayLike | None
) -> tuple[tuple[FloatArray, FloatArray] | None, FloatArray | None, int]:
    """Checked residual arrays: ((east, north) or None, up or None, number of check points)."""
    if (de_m is None) != (dn_m is None):
        raise ComputationInputError(
            "East and north residuals go together: give both or neither.", code="horizontal_axis_missing"
        )
    if de_m is None and du_m is None:
        raise ComputationInputError("No residuals given.", code="no_residuals")
    arrays: list[FloatArray | None] = []
    for value, name in ((de_m, "east residuals"), (dn_m, "north residuals"), (du_m, "up residuals")):
        if value is None:
            arrays.append(None)
            continue
        arr = _as_float_array(value, name)
        if arr.ndim != 1 or arr.size == 0:
            raise ComputationInputError(f"{name} must be a non-empty list.", code="no_residuals", params={"name": name})
        arrays.append(arr)
    sizes = {a.size for a in arrays if a is not None}
    if len(sizes) != 1:
        raise ComputationInputError("Every axis needs one residual per check point.", code="ragged_residuals")
    de, dn, du = arrays
    return (None if de is None or dn is None else (de, dn)), du, sizes.pop()


def _target_rmse(value: ArrayLike | None, name: str) -> float | None:
    if value is None:
        return None
    t = _as_float_array(value, name)
    if t.ndim != 0 or not np.isfinite(t) or t <= 0.0:
        raise ComputationInputError(f"The {name} must be one number > 0 (m).", code="bad_target_rmse")
    return float(t)


def _bias_findings(
    summaries: dict[str, AxisSummary],
    fraction: float,
    target_rmse_xy_m: float | None = None,
    target_rmse_z_m: float | None = None,
) -> list[Finding]:
    """Bias findings: |mean| > fraction × reference, per axis.

    The reference is the target (specified) RMSE of the axis when the caller gives one
    (``"reference": "target"``), otherwise the measured RMSE of the axis (``"reference": "measured"``).
    ``ratio`` is |mean| / reference in both cases.
    """
    findings = []
    for axis, s in summaries.items():
        target = target_rmse_z_m if axis == "z" else target_rmse_xy_m
        reference = target if target is not None else s.rmse_m
        if reference > 0.0 and abs(s.mean_m) > fraction * reference:
            findings.append(
                Finding(
                    "bias",
                    {
                        "axis": axis,
                        "mean_m": s.mean_m,
                        "rmse_m": s.rmse_m,
                        "ratio": abs(s.mean_m) / reference,
                        "limit": fraction,
                        "reference": "target" if target is not None else "measured",
                        "target_rmse_m": target,
                    },
                )
            )
    return findings


@dataclass(frozen=True)
class NssdaResult:
    """NSSDA check-point test (FGDC-STD-007.3-1998). Horizontal or vertical parts are None when absent."""

    n: int
    x: AxisSummary | None
    y: AxisSummary | None
    z: AxisSummary | None
    rmse_r_m: float | None
    horizontal_95_m: float | None
    horizontal_method: str | None
    vertical_95_m: float | None
    findings: tuple[Finding, ...]
    blunders: tuple[tuple[int, str], ...] = ()  # (index of check point, axis), as for ASPRS


def covariance_from_sigmas_m2(sigma_e_m: Any, sigma_n_m: Any, correlation_en: Any = 0.0):
    """East/north variances and covariance (m²) from standard deviations (m) and their correlation.

    var_e = σe², cov_en = ρ·σe·σn, var_n = σn² (the definition of the correlation coefficient).
    Vectorised; ``ComputationInputError`` for a negative σ or |ρ| > 1.

    >>> [round(v, 12) for v in covariance_from_sigmas_m2(0.004, 0.003, 0.5)]
    [1.6e-05, 6e-06, 9e-06]
    """
    se = np.asarray(sigma_e_m, dtype=float)
    sn = np.asarray(sigma_n_m, dtype=float)
    rho = np.asarray(correlation_en, dtype=float)
    if not (np.all(np.isfinite(se)) and np.all(np.isfinite(sn)) and np.all(np.isfinite(rho))):
        raise ComputationInputError("Sigmas and the correlation must be finite numbers.", code="not_finite")
    if np.any(se < 0.0) or np.any(sn < 0.0):
        raise ComputationInputError("A standard deviation cannot be negative.", code="negative_sigma")
    if np.any(np.abs(rho) > 1.0):
        raise ComputationInputError("A correlation lies between −1 and 1.", code="bad_correlation")
    var_e, cov_en, var_n = se * se, rho * se * sn, sn * sn
    if var_e.ndim == 0:
        return float(var_e), float(cov_en), float(var_n)
    return var_e, cov_en, var_n


def _blunders(axes: tuple[tuple[str, Any], ...], summaries: dict) -> list[tuple[int, str]]:
    """Residuals beyond ``ASPRS2023_BLUNDER_FACTOR`` × the measured RMSE of their axis, vectorised per axis.

    The same rule for the NSSDA and ASPRS styles: a blunder is investigated, never silently removed
    (ASPRS Positional Accuracy Standards, Edition 2 (2023); the NSSDA, FGDC-STD-007.3-1998, assumes
    blunders were removed before testing, so flagging them is the conservative reading).
    """
    found: list[tuple[int, str]] = []
    for axis, arr in axes:
        if arr is None:
            continue
        rms = summaries[axis].rmse_m
        found.extend((int(i), axis) for i in np.flatnonzero(np.abs(arr) > ASPRS2023_BLUNDER_FACTOR * rms))
    return found


def nssda_evaluate(
    de_m: ArrayLike | None = None, dn_m: ArrayLike | None = None, du_m: ArrayLike | None = None
) -> NssdaResult:
    """Evaluate check-point residuals (dataset − check, m) by the NSSDA.

    Flags fewer than 20 check points, a ratio RMSE_min/RMSE_max below 0.6, residuals beyond 3 × the
    measured axis RMSE (blunders, as the ASPRS style does; listed, never removed), and a mean error above
    25 % of an axis' measured RMSE (NSSDA assumes systematic errors have been removed; the 25 %
    guideline is borrowed from ASPRS Edition 2, which compares with the target RMSE (from memory,
    unconfirmed); the NSSDA has no target, so the finding is worded against the measured RMSE).

    Examples
    --------
    >>> r = nssda_evaluate(du_m=[0.05, -0.05, 0.05, -0.05])
    >>> round(r.vertical_95_m, 3), [f.code for f in r.findings]
    (0.098, ['too_few_checkpoints'])
    """
    en, du, n = _check_residuals(de_m, dn_m, du_m)
    summaries: dict[str, AxisSummary] = {}
    x = y = z = None
    rmse_r = horizontal = vertical = None
    method: str | None = None
    findings: list[Finding] = []
    if en is not None:
        x, y = _axis_summary(en[0]), _axis_summary(en[1])
        summaries.update({"x": x, "y": y})
        rmse_r = float(np.hypot(x.rmse_m, y.rmse_m))
        h95, h_method = nssda_horizontal_95_m(x.rmse_m, y.rmse_m)
        horizontal, method = float(h95), str(h_method)
        hi, lo = max(x.rmse_m, y.rmse_m), min(x.rmse_m, y.rmse_m)
        if method == "circular_error":
            findings.append(Finding("nssda_ratio_outside", {"ratio": lo / hi, "limit": NSSDA_RATIO_MIN}))
    if du is not None:
        z = _axis_summary(du)
        summaries["z"] = z
        vertical = float(nssda_vertical_95_m(z.rmse_m))
    if n < NSSDA_MIN_CHECKPOINTS:
        findings.insert(
            0, Finding("too_few_checkpoints", {"n": n, "minimum": NSSDA_MIN_CHECKPOINTS, "standard": "nssda"})
        )
    findings.extend(_bias_findings(summaries, ASPRS2023_BIAS_FRACTION))
    de, dn = en if en is not None else (None, None)
    blunders = _blunders((("x", de), ("y", dn), ("z", du)), summaries)
    if blunders:
        findings.append(Finding("blunders", {"count": len(blunders), "factor": ASPRS2023_BLUNDER_FACTOR}))
    return NssdaResult(n, x, y, z, rmse_r, horizontal, method, vertical, tuple(findings), tuple(blunders))


@dataclass(frozen=True)
class AsprsResult:
    """ASPRS Edition 2 (2023) check-point test: RMSE only, check-point survey accuracy included."""

    n: int
    x: AxisSummary | None
    y: AxisSummary | None
    z: AxisSummary | None
    rmse_h1_m: float | None  # product vs check points, √(RMSE_x² + RMSE_y²)
    rmse_h2_m: float | None  # the check points' own survey accuracy
    rmse_h_m: float | None
    rmse_v1_m: float | None
    rmse_v2_m: float | None
    rmse_v_m: float | None
    rmse_3d_m: float | None
    blunders: tuple[tuple[int, str], ...]  # (index of check point, axis)
    findings: tuple[Finding, ...]


def _survey_rmse(sigmas: ArrayLike, name: str, n: int) -> float:
    s = _as_float_array(sigmas, name)
    if s.ndim == 0:
        s = np.full(n, float(s))
    if s.shape != (n,):
        raise ComputationInputError(f"{name} needs one value per check point.", code="ragged_residuals")
    if np.any(s < 0.0):
        raise ComputationInputError("A survey sigma cannot be negative.", code="negative_sigma")
    return float(np.sqrt(np.mean(s * s)))


def asprs2023_evaluate(
    de_m: ArrayLike | None = None,
    dn_m: ArrayLike | None = None,
    du_m: ArrayLike | None = None,
    *,
    survey_sigma_e_m: ArrayLike | None = None,
    survey_sigma_n_m: ArrayLike | None = None,
    survey_sigma_u_m: ArrayLike | None = None,
    target_rmse_xy_m: ArrayLike | None = None,
    target_rmse_z_m: ArrayLike | None = None,
) -> AsprsResult:
    """Evaluate check-point residuals by ASPRS Positional Accuracy Standards, Edition 2 (2023).

    RMSE_H1 = √(RMSE_x² + RMSE_y²) from the residuals; RMSE_H2 = √(RMSE_x,s² + RMSE_y,s²) from the check
    points' own survey sigmas (RMS over points, per axis); RMSE_H = √(RMSE_H1² + RMSE_H2²). Vertical
    likewise. RMSE_3D = √(RMSE_H² + RMSE_V²) when both are present. Survey sigmas that are not given
    count as zero and a finding says so.

    Flags: fewer than 30 check points; bias (|mean| > 25 % of the target RMSE of the axis when
    ``target_rmse_xy_m`` (east and north, per axis) or ``target_rmse_z_m`` (up) is given, else of the
    measured axis RMSE, and the finding says which); blunders (|residual| > 3 × the measured axis
    RMSE), listed by index and never removed; check points less than twice as accurate as the product.
    The standard compares the mean with the target RMSE (from memory, unconfirmed; secondary
    transcription of Ed. 2).

    Examples
    --------
    >>> r = asprs2023_evaluate(du_m=[0.01] * 30, survey_sigma_u_m=0.02)  # Table 7.4 first row
    >>> round(r.rmse_v_m * 100, 2)
    2.24
    """
    en, du, n = _check_residuals(de_m, dn_m, du_m)
    target_xy = _target_rmse(target_rmse_xy_m, "target RMSE (east/north)")
    target_z = _target_rmse(target_rmse_z_m, "target RMSE (up)")
    findings: list[Finding] = []
    if n < ASPRS2023_MIN_CHECKPOINTS:
        findings.append(
            Finding("too_few_checkpoints", {"n": n, "minimum": ASPRS2023_MIN_CHECKPOINTS, "standard": "asprs2023"})
        )
    summaries: dict[str, AxisSummary] = {}
    x = y = z = None
    h1 = h2 = h = v1 = v2 = v = d3 = None
    blunders: list[tuple[int, str]] = []
    if en is not None:
        x, y = _axis_summary(en[0]), _axis_summary(en[1])
        summaries.update({"x": x, "y": y})
        h1 = float(np.hypot(x.rmse_m, y.rmse_m))
        if survey_sigma_e_m is None and survey_sigma_n_m is None:
            h2 = 0.0
            findings.append(Finding("survey_accuracy_not_given", {"component": "horizontal"}))
        else:
            if survey_sigma_e_m is None or survey_sigma_n_m is None:
                raise ComputationInputError(
                    "Give the check points' survey sigma for both east and north.", code="horizontal_axis_missing"
                )
            h2 = float(
                np.hypot(
                    _survey_rmse(survey_sigma_e_m, "survey sigma east", n),
                    _survey_rmse(survey_sigma_n_m, "survey sigma north", n),
                )
            )
        h = float(quadrature_sum_m(h1, h2))
    if du is not None:
        z = _axis_summary(du)
        summaries["z"] = z
        v1 = z.rmse_m
        if survey_sigma_u_m is None:
            v2 = 0.0
            findings.append(Finding("survey_accuracy_not_given", {"component": "vertical"}))
        else:
            v2 = _survey_rmse(survey_sigma_u_m, "survey sigma up", n)
        v = float(quadrature_sum_m(v1, v2))
    if h is not None and v is not None:
        d3 = float(quadrature_sum_m(h, v))
    findings.extend(_bias_findings(summaries, ASPRS2023_BIAS_FRACTION, target_xy, target_z))
    de, dn = en if en is not None else (None, None)
    blunders.extend(_blunders((("x", de), ("y", dn), ("z", du)), summaries))
    if blunders:
        findings.append(Finding("blunders", {"count": len(blunders), "factor": ASPRS2023_BLUNDER_FACTOR}))
    for component, product, survey in (("horizontal", h1, h2), ("vertical", v1, v2)):
        if product is not None and survey and survey > 0.5 * product:
            findings.append(
                Finding(
                    "checkpoints_not_twice_as_accurate",
                    {"component": component, "product_rmse_m": product, "survey_rmse_m": survey},
                )
            )
    return AsprsResult(n, x, y, z, h1, h2, h, v1, v2, v, d3, tuple(blunders), tuple(findings))
