"""Statistics for re-observed marks: compatibility test, weighted combination, velocity by least squares.

Sources
-------
* Compatibility of two solutions of one mark (the "global" or congruence test of deformation
  analysis): d = observed − published in local east/north/up, Σ = Σpub + Σobs (− Σ12 − Σ21 when the
  two share observations), T = dᵀΣ⁻¹d ~ χ²(k) under "no movement". Compare with χ²(0.95, k), k = 2
  horizontal, 1 vertical, 3 for 3D (5.991, 3.841, 7.815). K.-R. Koch, *Parameter Estimation and
  Hypothesis Testing in Linear Models*, 2nd ed., Springer 1999, §4.2 (test of a general linear
  hypothesis with known variance factor); W. Caspary, *Concepts of Network and Deformation
  Analysis*, UNSW Monograph 11, 1987, ch. 6.
* Weighted combination of repeat solutions with full covariance (generalised weighted mean):
  x̄ = (Σ Wᵢ)⁻¹ Σ Wᵢxᵢ, Wᵢ = Σᵢ⁻¹, Σx̄ = (Σ Wᵢ)⁻¹, Ω = Σ vᵢᵀWᵢvᵢ with dof = d(n − 1), variance of unit
  weight s0² = Ω/dof and its two-sided χ² test Ω ∈ [χ²(α/2, dof), χ²(1 − α/2, dof)]. Koch (1999)
  §3.2 and §4.3; the tests' worked example is invented and recomputed with SciPy 1.17.1.
* Velocity: x(t) = x₀ + v·(t − t_ref) fitted by generalised least squares with each solution's full
  covariance (same source). Rule: at least 3 solutions spanning at least 2.5 years. Three solutions
  leave one redundancy per axis, so the fit can check itself (s0); 2.5 years because an annual
  signal biases a velocity from a shorter span badly and the bias falls quickly beyond about 2.5
  years: G. Blewitt and D. Lavallée, "Effect of annual signals on geodetic velocity", *J. Geophys.
  Res.* 107(B7), 2145, 2002, doi:10.1029/2001JB000570 (the 2.5-year figure is from memory).

Accuracy statement of a combination (fixed here so that every caller does the same): the
*weighted* combination's formal covariance (Σ Wᵢ)⁻¹, scaled up by s0² only when the variance-of-
unit-weight test says the spread is larger than the stated sigmas allow (never scaled down). The
unweighted mean and its Student-t interval are not used.

Coordinates enter in local ENU metres about a stated point; frame (EPSG) and epoch are the caller's,
and must be the same for every solution that is compared or combined (``enu_difference_m`` checks).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray
from scipy import stats as _sst

from registry.geodesy.accuracy import ComputationInputError
from registry.geodesy.arraytypes import ArrayLike, FloatArray, FloatOrArray

__all__ = [
    "CombinationResult",
    "CompatibilityResult",
    "VelocityResult",
    "VELOCITY_MIN_SOLUTIONS",
    "VELOCITY_MIN_SPAN_YR",
    "chi2_critical",
    "chi2_two_sided_bounds",
    "compatibility_test",
    "enu_difference_m",
    "velocity_fit",
    "velocity_rule",
    "weighted_combination",
]

#: Component names → indices into an east/north/up vector.
COMPONENTS: dict[str, tuple[int, ...]] = {"horizontal": (0, 1), "vertical": (2,), "3d": (0, 1, 2)}

VELOCITY_MIN_SOLUTIONS = 3
VELOCITY_MIN_SPAN_YR = 2.5


def chi2_critical(dof: ArrayLike, confidence: float = 0.95) -> FloatOrArray:
    """Upper χ² quantile χ²(confidence, dof).

    Examples
    --------
    >>> [round(chi2_critical(k), 6) for k in (1, 2, 3)]
    [3.841459, 5.991465, 7.814728]
    """
    _check_confidence(confidence)
    value = np.asarray(_sst.chi2.ppf(confidence, np.asarray(dof, dtype=float)), dtype=float)
    return value.item() if value.ndim == 0 else value


def chi2_two_sided_bounds(dof: int, confidence: float = 0.95) -> tuple[float, float]:
    """Lower and upper bounds for Ω = vᵀWv ~ χ²(dof): χ²((1−c)/2, dof) and χ²((1+c)/2, dof).

    Examples
    --------
    >>> [round(b, 4) for b in chi2_two_sided_bounds(2)]
    [0.0506, 7.3778]
    """
    _check_confidence(confidence)
    alpha = 1.0 - confidence
    return float(_sst.chi2.ppf(alpha / 2.0, dof)), float(_sst.chi2.ppf(1.0 - alpha / 2.0, dof))


def _check_confidence(confidence: float) -> None:
    if not 0.0 < float(confidence) < 1.0:
        raise ComputationInputError("The confidence level must lie strictly between 0 and 1.", code="bad_confidence")


def _finite(value: ArrayLike, name: str) -> FloatArray:
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError) as exc:
        raise ComputationInputError(f"{name} must be numeric.", code="not_a_number", params={"name": name}) from exc
    if not np.all(np.isfinite(arr)):
        raise ComputationInputError(f"{name} must be finite.", code="not_finite", params={"name": name})
    return arr


def _spd_inverse(cov: np.ndarray, name: str) -> np.ndarray:
    """Inverse of a stack of symmetric positive-definite matrices, via Cholesky (which checks SPD)."""
    sym = 0.5 * (cov + np.swapaxes(cov, -1, -2))
    try:
        chol = np.linalg.cholesky(sym)
    except np.linalg.LinAlgError as exc:
        raise ComputationInputError(
            f"{name} is not positive definite (a zero or negative variance, or impossible correlations).",
            code="not_positive_definite",
            params={"name": name},
        ) from exc
    eye = np.broadcast_to(np.eye(sym.shape[-1]), sym.shape)
    inv_l = np.linalg.solve(chol, eye)
    return np.swapaxes(inv_l, -1, -2) @ inv_l


def enu_difference_m(
    *,
    published_lat_deg: ArrayLike,
    published_lon_deg: ArrayLike,
    published_h_m: ArrayLike,
    observed_lat_deg: ArrayLike,
    observed_lon_deg: ArrayLike,
    observed_h_m: ArrayLike,
    published_frame_epsg: int,
    published_epoch_yr: float,
    observed_frame_epsg: int,
    observed_epoch_yr: float,
    epoch_tolerance_yr: float = 1e-3,
) -> np.ndarray:
    """d = observed − published in local east/north/up at the published point, metres, shape (..., 3).

    Both positions must already be in the same frame and coordinate epoch (transform first with
    ``registry.geodesy.frames``); otherwise the difference would contain plate motion or a frame
    offset and the test would be meaningless, so this raises ``frame_or_epoch_mismatch``.
    """
    if (
        int(published_frame_epsg) != int(observed_frame_epsg)
        or abs(float(published_epoch_yr) - float(observed_epoch_yr)) > epoch_tolerance_yr
    ):
        raise ComputationInputError(
            "Both positions must be in the same frame and epoch before they are compared "
            f"(published EPSG:{published_frame_epsg} @ {published_epoch_yr:.3f}, "
            f"observed EPSG:{observed_frame_epsg} @ {observed_epoch_yr:.3f}).",
            code="frame_or_epoch_mismatch",
        )
    from registry.geodesy.conversions import ellipsoid_of_epsg, geodetic_to_enu

    ell = ellipsoid_of_epsg(int(published_frame_epsg))
    e, n, u = geodetic_to_enu(
        _finite(observed_lat_deg, "observed latitude"),
        _finite(observed_lon_deg, "observed longitude"),
        _finite(observed_h_m, "observed height"),
        lat0_deg=_finite(published_lat_deg, "published latitude"),
        lon0_deg=_finite(published_lon_deg, "published longitude"),
        h0_m=_finite(published_h_m, "published height"),
        ellipsoid=ell,
    )
    return np.stack(np.broadcast_arrays(e, n, u), axis=-1)


@dataclass(frozen=True)
class CompatibilityResult:
    """Outcome of T = dᵀΣ⁻¹d against χ²(confidence, k). Arrays for batched input, floats otherwise."""

    components: str
    statistic: FloatOrArray  # T
    dof: int  # k
    critical: float  # χ²(confidence, k)
    p_value: FloatOrArray  # P(χ²(k) ≥ T)
    compatible: bool | NDArray[np.bool_]  # T ≤ critical
    confidence: float
    d_m: FloatArray  # the difference vector used, shape (..., k)
    cov_m2: FloatArray  # Σ used, shape (..., k, k)


def compatibility_test(
    d_enu_m: ArrayLike,
    cov_published_m2: ArrayLike,
    cov_observed_m2: ArrayLike,
    *,
    components: str | None = None,
    cov_cross_m2: ArrayLike | None = None,
    confidence: float = 0.95,
) -> CompatibilityResult:
    """Test whether an observed and a published solution of a mark agree: T = dᵀ(Σpub + Σobs)⁻¹d.

    Parameters
    ----------
    d_enu_m : array_like, shape (..., m) or scalar
        observed − published, local ENU (m); m = 3 (e, n, u), 2 (e, n) or 1 (u). A scalar is 1D.
    cov_published_m2, cov_observed_m2 : array_like, shape (..., m, m) (scalar variance for 1D)
        Covariances of the two solutions in the same ENU frame, m².
    components : {"horizontal", "vertical", "3d"}, optional
        With m = 3, pick the components to test (k = 2, 1, 3). Default: all m components.
    cov_cross_m2 : array_like, optional
        Cross-covariance Σ12 when the solutions share observations; Σ −= Σ12 + Σ12ᵀ.
    confidence : float
        Default 0.95.

    Returns
    -------
    CompatibilityResult

    Examples
    --------
    >>> r = compatibility_test([0.018, -0.021], np.diag([0.010**2, 0.012**2]), np.diag([0.008**2, 0.010**2]))
    >>> round(r.statistic, 4), r.dof, round(r.critical, 3), bool(r.compatible)
    (3.783, 2, 5.991, True)
    """
    _check_confidence(confidence)
    d = _finite(d_enu_m, "coordinate difference")
    c_pub = _finite(cov_published_m2, "published covariance")
    c_obs = _finite(cov_observed_m2, "observed covariance")
    if d.ndim == 0:
        d = d[None]
        c_pub = c_pub[..., None, None] if c_pub.ndim == 0 else c_pub
        c_obs = c_obs[..., None, None] if c_obs.ndim == 0 else c_obs
    m = d.shape[-1]
    if m not in (1, 2, 3):
        raise ComputationInputError("The difference must have 1, 2 or 3 components.", code="bad_vector_shape")
    for cov, name in ((c_pub, "published covariance"), (c_obs, "observed covariance")):
        if cov.ndim < 2 or cov.shape[-2:] != (m, m):
            raise ComputationInputError(
                f"The {name} must be {m}×{m}.", code="bad_covariance_shape", params={"name": name}
            )
    cov = c_pub + c_obs
    if cov_cross_m2 is not None:
        c12 = _finite(cov_cross_m2, "cross-covariance")
        if c12.ndim < 2 or c12.shape[-2:] != (m, m):
            raise ComputationInputError(f"The cross-covariance must be {m}×{m}.", code="bad_covariance_shape")
        cov = cov - c12 - np.swapaxes(c12, -1, -2)
    if components is None:
        components = {1: "vertical", 2: "horizontal", 3: "3d"}[m]
    if components not in COMPONENTS:
        raise ComputationInputError(
            "Components must be 'horizontal', 'vertical' or '3d'.",
            code="bad_components",
            params={"components": components},
        )
    idx = COMPONENTS[components]
    if m == 3:
        d = d[..., idx]
        cov = cov[..., np.ix_(idx, idx)[0], np.ix_(idx, idx)[1]]
    elif len(idx) != m:
        raise ComputationInputError(
            f"A {m}-component difference cannot be tested as '{components}'.", code="bad_components"
        )
    d, cov = np.broadcast_arrays(d[..., :, None], cov)
    d = d[..., 0]
    w = _spd_inverse(cov, "Σpub + Σobs")
    t = np.einsum("...i,...ij,...j->...", d, w, d)
    k = len(idx)
    critical = float(chi2_critical(k, confidence))
    p = _sst.chi2.sf(t, k)
    ok = t <= critical
    if np.ndim(t) == 0:
        t, p, ok = float(t), float(p), bool(ok)
    return CompatibilityResult(components, t, k, critical, p, ok, float(confidence), d, cov)


def _stack_solutions(x_m: ArrayLike, cov_m2: ArrayLike) -> tuple[np.ndarray, np.ndarray]:
    x = _finite(x_m, "solutions")
    cov = _finite(cov_m2, "covariances")
    if x.ndim == 1:  # n scalar solutions
        x = x[:, None]
        if cov.ndim == 1:
            cov = cov[:, None, None]
    if x.ndim != 2:
        raise ComputationInputError("Solutions must be a list of values or of vectors.", code="bad_vector_shape")
    n, dim = x.shape
    if cov.ndim == 2 and dim == 1 and cov.shape == (n, 1):
        cov = cov[:, :, None]
    if cov.shape != (n, dim, dim):
        raise ComputationInputError(
            f"Give one {dim}×{dim} covariance per solution.", code="bad_covariance_shape", params={"n": n, "dim": dim}
        )
    return x, cov


def _spread_verdict(omega: float, dof: int, confidence: float) -> tuple[float, float, str]:
    lower, upper = chi2_two_sided_bounds(dof, confidence)
    if omega > upper:
        return lower, upper, "too_large"
    if omega < lower:
        return lower, upper, "too_small"
    return lower, upper, "consistent"


@dataclass(frozen=True)
class CombinationResult:
    """Weighted combination of n solutions of dimension d (d = 1 for heights, 3 for ENU)."""

    n: int
    mean_m: np.ndarray  # (d,)
    cov_mean_m2: np.ndarray  # (d, d) formal, (Σ Wᵢ)⁻¹
    sigma_mean_m: np.ndarray  # (d,) from the formal covariance
    residuals_m: np.ndarray  # (n, d), vᵢ = xᵢ − x̄
    omega: float  # Σ vᵢᵀWᵢvᵢ
    dof: int  # d(n − 1)
    s0: float  # √(Ω/dof)
    chi2_lower: float
    chi2_upper: float
    spread: str  # "consistent", "too_large" (s0 > 1 significantly) or "too_small"
    confidence: float
    cov_statement_m2: np.ndarray  # what the accuracy statement uses (see module docstring)
    scaled: bool  # True when cov_statement = s0²·cov_mean


def weighted_combination(x_m: ArrayLike, cov_m2: ArrayLike, *, confidence: float = 0.95) -> CombinationResult:
    """Generalised weighted mean of repeat solutions with full covariance, and its spread test.

    Parameters
    ----------
    x_m : array_like, shape (n,) or (n, d)
        The solutions (e.g. ENU offsets in m from a common origin, same frame and epoch; or heights).
    cov_m2 : array_like, shape (n,) of variances, or (n, d, d)
        Their covariances, m².
    confidence : float
        For the two-sided test of the variance of unit weight (default 0.95).

    Examples
    --------
    >>> r = weighted_combination([1000.012, 1000.020, 1000.005], [0.010**2, 0.015**2, 0.010**2])
    >>> round(float(r.mean_m[0]), 6), round(float(r.sigma_mean_m[0]), 6), round(r.omega, 4), r.spread
    (1000.010591, 0.006396, 0.7259, 'consistent')
    """
    _check_confidence(confidence)
    x, cov = _stack_solutions(x_m, cov_m2)
    n, dim = x.shape
    if n < 2:
        raise ComputationInputError(
            "Combining needs at least two solutions.", code="too_few_solutions", params={"n": n}
        )
    w = _spd_inverse(cov, "a solution's covariance")
    w_sum = w.sum(axis=0)
    cov_mean = _spd_inverse(w_sum, "the summed weights")
    mean = cov_mean @ np.einsum("nij,nj->i", w, x)
    v = x - mean
    omega = float(np.einsum("ni,nij,nj->", v, w, v))
    dof = dim * (n - 1)
    lower, upper, spread = _spread_verdict(omega, dof, confidence)
    s0 = float(np.sqrt(omega / dof))
    scaled = spread == "too_large"
    cov_statement = cov_mean * (s0 * s0) if scaled else cov_mean
    return CombinationResult(
        n=n,
        mean_m=mean,
        cov_mean_m2=cov_mean,
        sigma_mean_m=np.sqrt(np.diag(cov_mean)),
        residuals_m=v,
        omega=omega,
        dof=dof,
        s0=s0,
        chi2_lower=lower,
        chi2_upper=upper,
        spread=spread,
        confidence=float(confidence),
        cov_statement_m2=cov_statement,
        scaled=scaled,
    )


def velocity_rule(
    t_yr: ArrayLike, *, min_solutions: int = VELOCITY_MIN_SOLUTIONS, min_span_yr: float = VELOCITY_MIN_SPAN_YR
) -> tuple[bool, str | None]:
    """Whether a history of epochs supports a velocity: (ok, reason code or None).

    Examples
    --------
    >>> velocity_rule([2015.0, 2017.0, 2018.0])
    (True, None)
    >>> velocity_rule([2015.0, 2016.0, 2017.0])
    (False, 'velocity_span_too_short')
    """
    t = _finite(t_yr, "epochs")
    if t.ndim != 1 or t.size < min_solutions:
        return False, "velocity_too_few_solutions"
    if float(t.max() - t.min()) < min_span_yr:
        return False, "velocity_span_too_short"
    return True, None


@dataclass(frozen=True)
class VelocityResult:
    """x(t) = x₀ + v·(t − ref_epoch_yr), fitted by generalised least squares."""

    n: int
    ref_epoch_yr: float
    span_yr: float
    position_m: np.ndarray  # (d,) x₀ at ref_epoch_yr
    velocity_m_yr: np.ndarray  # (d,)
    cov_velocity_m2_yr2: np.ndarray  # (d, d) formal
    sigma_velocity_m_yr: np.ndarray  # (d,) formal
    sigma_velocity_stated_m_yr: np.ndarray  # (d,) formal × s0 when the spread is too large (as for combinations)
    omega: float
    dof: int  # d(n − 2)
    s0: float
    spread: str
    residuals_m: np.ndarray  # (n, d)


def velocity_fit(
    t_yr: ArrayLike,
    x_m: ArrayLike,
    cov_m2: ArrayLike,
    *,
    ref_epoch_yr: float | None = None,
    min_solutions: int = VELOCITY_MIN_SOLUTIONS,
    min_span_yr: float = VELOCITY_MIN_SPAN_YR,
    confidence: float = 0.95,
) -> VelocityResult:
    """Velocity of a mark by weighted least squares of its solutions against time.

    Parameters
    ----------
    t_yr : array_like, shape (n,)
        Coordinate epochs of the solutions, decimal years.
    x_m : array_like, shape (n,) or (n, d)
        The solutions in one frame, as ENU offsets (m) from a fixed origin (or heights).
    cov_m2 : array_like, shape (n,) or (n, d, d)
        Their covariances (m²).
    ref_epoch_yr : float, optional
        Epoch of the fitted position x₀; default: the weighted mean epoch rounded to 0.001 yr.

    Raises
    ------
    ComputationInputError
        ``velocity_too_few_solutions`` (< 3) or ``velocity_span_too_short`` (< 2.5 years), see the
        module docstring for why.

    Examples
    --------
    >>> r = velocity_fit([2015.0, 2017.5, 2020.0], [0.000, 0.010, 0.020], [1e-6, 1e-6, 1e-6], ref_epoch_yr=2015.0)
    >>> round(float(r.velocity_m_yr[0]), 6), round(float(r.position_m[0]), 6)
    (0.004, 0.0)
    """
    _check_confidence(confidence)
    t = _finite(t_yr, "epochs")
    ok, reason = velocity_rule(t, min_solutions=min_solutions, min_span_yr=min_span_yr)
    if not ok:
        assert reason is not None  # velocity_rule gives a reason whenever it refuses
        raise ComputationInputError(
            f"A velocity needs at least {min_solutions} solutions spanning at least {min_span_yr:g} years "
            f"(have {t.size} spanning {float(np.ptp(t)) if t.size else 0.0:.2f} years).",
            code=reason,
            params={"n": int(t.size), "min_solutions": min_solutions, "min_span_yr": min_span_yr},
        )
    x, cov = _stack_solutions(x_m, cov_m2)
    n, dim = x.shape
    if t.shape != (n,):
        raise ComputationInputError("Give one epoch per solution.", code="ragged_input")
    w = _spd_inverse(cov, "a solution's covariance")
    if ref_epoch_yr is None:
        tw = np.array([np.trace(wi) for wi in w])
        ref_epoch_yr = round(float(np.sum(tw * t) / np.sum(tw)), 3)
    dt = t - float(ref_epoch_yr)
    # Normal equations for [x0, v]: Aᵢ = [I, dtᵢ·I], N = Σ AᵢᵀWᵢAᵢ, b = Σ AᵢᵀWᵢxᵢ.
    n00 = w.sum(axis=0)
    n01 = np.einsum("n,nij->ij", dt, w)
    n11 = np.einsum("n,nij->ij", dt * dt, w)
    normal = np.block([[n00, n01], [n01, n11]])
    wx = np.einsum("nij,nj->ni", w, x)
    rhs = np.concatenate([wx.sum(axis=0), np.einsum("n,ni->i", dt, wx)])
    q = _spd_inverse(normal, "the normal matrix")
    sol = q @ rhs
    x0, vel = sol[:dim], sol[dim:]
    v = x - (x0 + dt[:, None] * vel)
    omega = float(np.einsum("ni,nij,nj->", v, w, v))
    dof = dim * (n - 2)
    _, _, spread = _spread_verdict(omega, dof, confidence)
    s0 = float(np.sqrt(omega / dof))
    cov_vel = q[dim:, dim:]
    sigma_vel = np.sqrt(np.diag(cov_vel))
    return VelocityResult(
        n=n,
        ref_epoch_yr=float(ref_epoch_yr),
        span_yr=float(np.ptp(t)),
        position_m=x0,
        velocity_m_yr=vel,
        cov_velocity_m2_yr2=cov_vel,
        sigma_velocity_m_yr=sigma_vel,
        sigma_velocity_stated_m_yr=sigma_vel * (s0 if spread == "too_large" else 1.0),
        omega=omega,
        dof=dof,
        s0=s0,
        spread=spread,
        residuals_m=v,
    )
