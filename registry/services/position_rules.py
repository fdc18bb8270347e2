"""What a position must satisfy, written once: the publish/propose service, the file importer, the forms
and the API all ask this module (and the database constraint ``position_variances_positive`` agrees).

Bounds, decided once
--------------------
* **Frame**: a geographic 3D CRS known to PROJ (latitude, longitude, ellipsoidal height).
* **Variances strictly positive, covariance positive definite.** A position with a zero variance claims
  a coordinate known exactly, which no survey gives; and the movement check, the combination of repeat
  solutions and the accuracy statements all need Σ⁻¹. (Before this module the service accepted a
  positive *semi*-definite matrix and the importer refused it, so an export did not re-import.)
  Positive definiteness is decided by a Cholesky factorisation of the symmetric matrix (as the
  statistics do), so "accepted here" and "usable by the tests" are the same thing.
* **σ ≤ 100 m per axis** (variance ≤ 10 000 m²). A registry also holds rough positions (scaled from a
  plan, a hand-held receiver near an unsurveyed mark) with σ of metres to tens of metres; those are
  worth keeping, labelled by their σ. Beyond 100 m a value is a unit mistake (mm² for m², a variance
  typed as a σ...) rather than a position anyone could use to find a mark. The importer used 10 m;
  it now takes the same 100 m.
* **|velocity| ≤ 1 m/yr per component, velocity σ within 0 … 1 m/yr.** The fastest plate moves about
  0.2 m/yr (common practice); 1 m/yr catches mm/yr typed as m/yr while leaving room for landslides and
  post-seismic motion.

Each rule returns :class:`Problem` items (field, code, message) instead of raising, so callers collect
them in their own shape (a ValidationError per field for the service, a row error for imports).
"""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping
from dataclasses import dataclass
from functools import lru_cache
from typing import Any

import numpy as np

COV_FIELDS = ("cov_ee_m2", "cov_en_m2", "cov_eu_m2", "cov_nn_m2", "cov_nu_m2", "cov_uu_m2")
COV_DIAGONAL = ("cov_ee_m2", "cov_nn_m2", "cov_uu_m2")
VEL_FIELDS = ("vel_e_m_yr", "vel_n_m_yr", "vel_u_m_yr")
VEL_SIGMA_FIELDS = ("vel_sigma_e_m_yr", "vel_sigma_n_m_yr", "vel_sigma_u_m_yr")

#: Largest standard deviation of a coordinate component (see the module docstring).
SIGMA_MAX_M = 100.0
VARIANCE_MAX_M2 = SIGMA_MAX_M**2
#: Largest velocity component and velocity σ (m/yr).
VELOCITY_MAX_M_YR = 1.0


@dataclass(frozen=True)
class Problem:
    """One broken rule: the field it is reported on, a stable code and a sentence for people."""

    field: str
    code: str
    message: str
    params: dict[str, Any] = dataclasses.field(default_factory=dict)


@lru_cache(maxsize=256)
def frame_problem(frame_epsg: int) -> str | None:
    """Why ``frame_epsg`` cannot carry a position, or ``None`` when it is a geographic 3D CRS.

    >>> frame_problem(7912) is None and frame_problem(6319) is None
    True
    >>> frame_problem(4326)
    'EPSG:4326 (WGS 84) is a 2D CRS; a position needs a geographic 3D CRS (latitude, longitude, ellipsoidal height), e.g. EPSG:7912 or EPSG:6319.'
    """
    from pyproj import CRS
    from pyproj.exceptions import CRSError

    if frame_epsg <= 0:
        return f"EPSG:{frame_epsg} is not a valid code."
    try:
        crs = CRS.from_epsg(frame_epsg)
    except CRSError:
        return f"EPSG:{frame_epsg} is not a coordinate reference system known to PROJ."
    if not crs.is_geographic or len(crs.axis_info) != 3:
        kind = "2D CRS" if crs.is_geographic else crs.type_name
        return (
            f"EPSG:{frame_epsg} ({crs.name}) is a {kind}; a position needs a geographic 3D CRS "
            "(latitude, longitude, ellipsoidal height), e.g. EPSG:7912 or EPSG:6319."
        )
    return None


def covariance_matrix_m2(cov: Mapping[str, float | None]) -> np.ndarray:
    """The 3×3 east/north/up matrix from the six ``cov_*_m2`` values (missing off-diagonals are 0)."""
    c = {n: float(cov.get(n) or 0.0) for n in COV_FIELDS}
    return np.array(
        [
            [c["cov_ee_m2"], c["cov_en_m2"], c["cov_eu_m2"]],
            [c["cov_en_m2"], c["cov_nn_m2"], c["cov_nu_m2"]],
            [c["cov_eu_m2"], c["cov_nu_m2"], c["cov_uu_m2"]],
        ]
    )


def is_positive_definite(matrix: np.ndarray) -> bool:
    """True when the symmetric part of ``matrix`` has a Cholesky factor (all eigenvalues > 0).

    >>> is_positive_definite(np.diag([1e-6, 1e-6, 4e-6]))
    True
    >>> is_positive_definite(np.array([[1.0, 1.0], [1.0, 1.0]]))
    False
    """
    try:
        np.linalg.cholesky(0.5 * (matrix + matrix.T))
    except np.linalg.LinAlgError:
        return False
    return True


def covariance_problems(cov: Mapping[str, float | None]) -> list[Problem]:
    """Check an east/north/up covariance (m²): variances in (0, 100² m²], the matrix positive definite.

    >>> [p.code for p in covariance_problems({"cov_ee_m2": 1e-4, "cov_nn_m2": 1e-4, "cov_uu_m2": 0.0})]
    ['zero_variance']
    >>> covariance_problems({"cov_ee_m2": 1e4, "cov_nn_m2": 1e-4, "cov_uu_m2": 1e-4})
    []
    """
    values = {n: float(cov.get(n) or 0.0) for n in COV_FIELDS}
    if not any(values.values()):
        return [
            Problem(
                "cov_ee_m2",
                "covariance_zero",
                "Give the uncertainty of the coordinates; a position held fixed in an adjustment still has one.",
            )
        ]
    problems: list[Problem] = []
    for name in COV_DIAGONAL:
        value = values[name]
        if value < 0:
            problems.append(Problem(name, "negative_variance", "A variance cannot be negative."))
        elif value == 0:
            problems.append(
                Problem(
                    name,
                    "zero_variance",
                    "A variance of zero claims a coordinate known exactly; give its real uncertainty.",
                )
            )
        elif value > VARIANCE_MAX_M2:
            problems.append(
                Problem(
                    name,
                    "variance_too_large",
                    f"A variance above {VARIANCE_MAX_M2:g} m² (σ = {SIGMA_MAX_M:g} m) is refused; "
                    "covariances are in m².",
                    {"limit": VARIANCE_MAX_M2},
                )
            )
    if problems:
        return problems
    if not is_positive_definite(covariance_matrix_m2(values)):
        problems.append(
            Problem(
                "cov_ee_m2",
                "covariance_not_positive_definite",
                "The east/north/up covariance is not positive definite (check the correlations).",
            )
        )
    return problems


def sigma_problems(sigmas_m: Mapping[str, float | None]) -> list[Problem]:
    """Standard deviations given instead of a covariance: each in (0, 100 m].

    >>> [p.code for p in sigma_problems({"sigma_e_mm": 0.0})]
    ['zero_variance']
    """
    problems = []
    for name, value in sigmas_m.items():
        if value is None:
            continue
        if value <= 0:
            code = "zero_variance" if value == 0 else "negative_variance"
            problems.append(Problem(name, code, "A standard deviation must be greater than zero."))
        elif value > SIGMA_MAX_M:
            problems.append(
                Problem(name, "variance_too_large", f"A standard deviation above {SIGMA_MAX_M:g} m is refused.")
            )
    return problems


def velocity_problems(
    velocity_m_yr: Mapping[str, float | None], sigma_m_yr: Mapping[str, float | None]
) -> list[Problem]:
    """Velocity (m/yr): all three components or none, each within ±1 m/yr; its σ in 0 … 1 m/yr, only with it.

    >>> [p.code for p in velocity_problems({"vel_e_m_yr": 0.012}, {})]
    ['velocity_incomplete']
    >>> [p.code for p in velocity_problems({"vel_e_m_yr": 12.0, "vel_n_m_yr": 0.0, "vel_u_m_yr": 0.0}, {})]
    ['velocity_too_large']
    """
    problems: list[Problem] = []
    given = [velocity_m_yr.get(n) is not None for n in VEL_FIELDS]
    if any(given) and not all(given):
        problems.append(Problem("vel_e_m_yr", "velocity_incomplete", "Give all three velocity components or none."))
    if not any(given) and any(sigma_m_yr.get(n) is not None for n in VEL_SIGMA_FIELDS):
        problems.append(
            Problem("vel_sigma_e_m_yr", "velocity_sigma_without_velocity", "Velocity sigmas need a velocity.")
        )
    for name in VEL_FIELDS:
        value = velocity_m_yr.get(name)
        if value is not None and abs(value) > VELOCITY_MAX_M_YR:
            problems.append(
                Problem(
                    name,
                    "velocity_too_large",
                    f"A velocity component above {VELOCITY_MAX_M_YR:g} m/yr is refused (mm/yr typed as m/yr?).",
                )
            )
    for name in VEL_SIGMA_FIELDS:
        value = sigma_m_yr.get(name)
        if value is None:
            continue
        if value < 0:
            problems.append(Problem(name, "negative_sigma", "A sigma cannot be negative."))
        elif value > VELOCITY_MAX_M_YR:
            problems.append(
                Problem(name, "velocity_too_large", f"A velocity sigma above {VELOCITY_MAX_M_YR:g} m/yr is refused.")
            )
    return problems
