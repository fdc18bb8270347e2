"""Rigid plate motion in the ITRF: the ITRF2020 plate motion model (ITRF2020-PMM).

Pure numpy (no Django). A point on a rigid plate moves in the ITRF with the velocity

    v = ω × X,

ω the plate's rotation vector (Euler pole and rate) expressed in the ITRF's Cartesian axes, X the
point's Earth-centred position. Optionally the model's origin rate bias (ORB, a translation rate of
the ITRF origin relative to the Earth's centre of mass as sensed by the plate velocities) is added:
v = ω × X + Ṫ. The model is linear in time: X(t2) = X(t1) + v (t2 − t1).

Source
------
Z. Altamimi, L. Métivier, P. Rebischung, X. Collilieux, K. Chanard, H. Bai (2023), "ITRF2020 plate
motion model", *Geophysical Research Letters* 50, e2023GL106373, doi:10.1029/2023GL106373,
Table 1 (rotation poles, mas/yr) and Table 2 (origin rate bias, mm/yr). The digits below are those
of PROJ's ``ITRF2020`` data file (which cites that paper and carries them in arcsec/yr): a secondary
transcription, the paper itself was not read; ``tests/geodesy/test_platemotion.py`` checks the
velocities against PROJ's own evaluation of that file (``+init=ITRF2020:<PLATE>`` Helmert with
rotation rates, position-vector convention) and against a hand-computed cross product.

Scope and cautions
------------------
- The model describes the rigid interior of each plate. Marks in deforming zones (plate boundaries,
  volcanic or tectonic areas, subsidence) move differently by millimetres to centimetres a year;
  there a mark's own velocity must be used. Callers add an assumed residual rate to the uncertainty.
- The poles are estimated in ITRF2020. Applied to positions in ITRF2014 (or ITRF2008), the difference
  between the frames' rates (≤ 0.2 mm/yr in translation, 0 in rotation for ITRF2020→ITRF2014, IERS
  ``Transfo-ITRF2020_TRFs.txt``) is well below the residual rate callers assume.

Examples
--------
>>> ve, vn, vu = velocity_enu_m_yr(45.2, -110.6, 1500.0, plate="NOAM")
>>> round(float(ve) * 1000, 2), round(float(vn) * 1000, 2), round(float(vu) * 1000, 2)
(-15.41, -8.54, -0.03)
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from registry.geodesy.conversions import GRS80, Ellipsoid, ecef_delta_to_enu, geodetic_to_ecef

__all__ = [
    "MODEL_NAME",
    "MODEL_CITATION",
    "PLATES",
    "ORIGIN_RATE_BIAS_MM_YR",
    "MAS_TO_RAD",
    "Plate",
    "PlateMotionError",
    "plate",
    "plate_codes",
    "rotation_rad_yr",
    "velocity_ecef_m_yr",
    "velocity_enu_m_yr",
    "model_label",
]

MODEL_NAME = "ITRF2020-PMM"
MODEL_CITATION = "Altamimi et al. (2023), Geophys. Res. Lett., doi:10.1029/2023GL106373"

#: One milliarcsecond in radians: π / (180 · 3600 · 1000).
MAS_TO_RAD = math.pi / 648_000_000.0

#: Origin rate bias of the model (mm/yr; X, Y, Z), Altamimi et al. (2023) Table 2.
ORIGIN_RATE_BIAS_MM_YR = (0.37, 0.35, 0.74)


@dataclass(frozen=True)
class Plate:
    """A plate of the model: its code, its name and its rotation rate ω (mas/yr; X, Y, Z)."""

    code: str
    name: str
    omega_mas_yr: tuple[float, float, float]


#: Rotation rates ω (mas/yr) of the ITRF2020-PMM, Altamimi et al. (2023) Table 1; identical to
#: PROJ's ``ITRF2020`` data file (there in arcsec/yr; secondary transcription of the paper).
PLATES: dict[str, Plate] = {
    p.code: p
    for p in (
        Plate("AMUR", "Amurian", (-0.131, -0.551, 0.837)),
        Plate("ANTA", "Antarctic", (-0.269, -0.312, 0.678)),
        Plate("ARAB", "Arabian", (1.129, -0.146, 1.438)),
        Plate("AUST", "Australian", (1.487, 1.175, 1.223)),
        Plate("CARB", "Caribbean", (0.207, -1.422, 0.726)),
        Plate("EURA", "Eurasian", (-0.085, -0.519, 0.753)),
        Plate("INDI", "Indian", (1.137, 0.013, 1.444)),
        Plate("NAZC", "Nazca", (-0.327, -1.561, 1.605)),
        Plate("NOAM", "North American", (0.045, -0.666, -0.098)),
        Plate("NUBI", "Nubian", (0.090, -0.585, 0.717)),
        Plate("PCFC", "Pacific", (-0.404, 1.021, -2.154)),
        Plate("SOAM", "South American", (-0.261, -0.282, -0.157)),
        Plate("SOMA", "Somalian", (-0.081, -0.719, 0.864)),
    )
}


class PlateMotionError(ValueError):
    """An unknown plate code; ``code`` is ``"unknown_plate"``."""

    def __init__(self, message: str, *, code: str = "unknown_plate"):
        super().__init__(message)
        self.code = code


def plate_codes() -> list[str]:
    """The model's plate codes, sorted.

    >>> plate_codes()[:3]
    ['AMUR', 'ANTA', 'ARAB']
    """
    return sorted(PLATES)


def plate(code: str) -> Plate:
    """The plate with ``code`` (case-insensitive), or :class:`PlateMotionError`.

    >>> plate("noam").name
    'North American'
    """
    key = str(code or "").strip().upper()
    try:
        return PLATES[key]
    except KeyError:
        raise PlateMotionError(
            f"Unknown plate {code!r} for {MODEL_NAME}; known plates: {', '.join(plate_codes())}."
        ) from None


def model_label(code: str, *, origin_rate_bias: bool = False) -> str:
    """Human-readable name of the model and plate, for chains of operations and documents.

    >>> model_label("NOAM")
    'ITRF2020-PMM (Altamimi et al. 2023) North American plate (NOAM)'
    """
    p = plate(code)
    orb = " with origin rate bias" if origin_rate_bias else ""
    return f"{MODEL_NAME} (Altamimi et al. 2023) {p.name} plate ({p.code}){orb}"


def rotation_rad_yr(code: str) -> np.ndarray:
    """Rotation vector ω of plate ``code`` in rad/yr (X, Y, Z), shape (3,).

    >>> w = rotation_rad_yr("NOAM")
    >>> f"{w[1]:.6e}"
    '-3.228859e-09'
    """
    return np.asarray(plate(code).omega_mas_yr, dtype=float) * MAS_TO_RAD


def velocity_ecef_m_yr(x_m, y_m, z_m, *, plate: str, origin_rate_bias: bool = False):
    """Model velocity v = ω × X (+ Ṫ) of points X (ECEF, metres, in an ITRF) in m/yr.

    Parameters
    ----------
    x_m, y_m, z_m : array_like
        Earth-centred coordinates in an ITRF realization (metres); broadcast together.
    plate : str
        Plate code of the model (e.g. ``"NOAM"``); see :data:`PLATES`.
    origin_rate_bias : bool
        Add the model's origin rate bias (Table 2 of the paper). Off by default, as in the
        plate-fixed frames derived from the model and in PROJ's ``ITRF2020:<PLATE>`` entries.

    Returns
    -------
    tuple of ndarray
        (vx, vy, vz) in m/yr, the broadcast shape of the inputs.

    Examples
    --------
    A point on the equator at 0° longitude, X = (a, 0, 0): v = (0, ω_z a, −ω_y a).

    >>> vx, vy, vz = velocity_ecef_m_yr(6378137.0, 0.0, 0.0, plate="NOAM")
    >>> round(float(vx), 9), round(float(vy), 6), round(float(vz), 6)
    (0.0, -0.00303, 0.020594)
    """
    wx, wy, wz = rotation_rad_yr(plate)
    x, y, z = np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in (x_m, y_m, z_m)))
    vx = wy * z - wz * y
    vy = wz * x - wx * z
    vz = wx * y - wy * x
    if origin_rate_bias:
        tx, ty, tz = (c / 1000.0 for c in ORIGIN_RATE_BIAS_MM_YR)
        vx, vy, vz = vx + tx, vy + ty, vz + tz
    return vx, vy, vz


def velocity_enu_m_yr(
    lat_deg, lon_deg, h_m, *, plate: str, ellipsoid: Ellipsoid = GRS80, origin_rate_bias: bool = False
):
    """Model velocity in local east, north, up (m/yr) at geodetic positions in an ITRF.

    Parameters
    ----------
    lat_deg, lon_deg, h_m : array_like
        Geodetic positions (degrees, degrees, metres) in an ITRF realization (GRS80 by default).
    plate : str
        Plate code of the model.
    ellipsoid : Ellipsoid
        The frame's ellipsoid.
    origin_rate_bias : bool
        See :func:`velocity_ecef_m_yr`.

    Returns
    -------
    tuple of ndarray
        (ve, vn, vu) in m/yr. Without the origin rate bias the up component is small but not zero:
        a rotation about the centre is tangent to the sphere, not to the ellipsoid, so it has an
        up component of |v| times the angle between the radius and the normal (≤ 0.2 mm/yr for
        every plate of the model).
    """
    x, y, z = geodetic_to_ecef(lat_deg, lon_deg, h_m, ellipsoid=ellipsoid)
    vx, vy, vz = velocity_ecef_m_yr(x, y, z, plate=plate, origin_rate_bias=origin_rate_bias)
    return ecef_delta_to_enu(vx, vy, vz, lat_deg, lon_deg)
