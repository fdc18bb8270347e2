"""Reference frames and coordinate epochs: frame changes, epoch propagation, the chain applied.

Pure module (no Django). A position is always (frame EPSG code, coordinate epoch in decimal years,
latitude, longitude, ellipsoidal height); this module moves it to another frame and/or epoch and
returns the chain of operations with their stated accuracy, for display.

Method
------
- **Frame change** (frame A → frame B *at one epoch t*): PROJ's time-dependent transformations
  through pyproj (4D: x, y, z, t), with the network off, ``allow_ballpark=False`` and
  ``only_best=True``. A pair with only a ballpark route, or whose best route needs a grid that is
  not installed, raises :class:`FrameTransformError` — never a silently degraded result.
  The 14-parameter model is that of the IERS/IGN (position-vector convention):
  X_B = X_A + T + D·X_A + R·X_A with P(t) = P(t0) + Ṗ (t − t0); IERS Conventions (2010), IERS
  Technical Note 36, §4.2.3 eq. (4.13); parameters from the IERS/IGN file
  ``Transfo-ITRF2020_TRFs.txt`` (2022) as carried in PROJ's EPSG database.
- **Epoch change within a frame** (t1 → t2): a time-dependent Helmert between frames does *not*
  move a point along its own trajectory. With a known velocity (local east/north/up, m/yr) the
  point is propagated linearly, X(t2) = X(t1) + v (t2 − t1) (e.g. Altamimi et al. 2023,
  doi:10.1029/2023GL106373, for the linear model). Without one, the coordinates are held and the
  uncertainty is inflated per axis by σ_added = rate × |t2 − t1|, with the rate a setting
  (default 2 mm/yr per axis, common practice for intra-plate motion of a stable monument).
- **Plate motion** (dynamic frame, no velocity, a plate given): the point moves with the plate's
  rigid rotation, v = ω × X, from the ITRF2020 plate motion model
  (:mod:`registry.geodesy.platemotion`; Altamimi et al. 2023, doi:10.1029/2023GL106373), and the
  uncertainty is still inflated by the assumed rate × |t2 − t1|, which then stands for the mark's
  residual motion relative to the rigid plate.

Order of operations (documented choice)
---------------------------------------
- Velocity known (it is expressed in the *source* frame): propagate in the source frame to t2,
  then change frame at t2.
- No velocity: hold the coordinates in whichever of the two frames is plate-fixed (where a point
  nearly does not move), changing frame at the epoch that makes that possible: a plate-fixed source
  is held t1 → t2 then changed at t2; a dynamic source is changed at t1 and held in the target.
  If the frame the point is held in is dynamic (ITRF, WGS 84) and t1 ≠ t2, the point is moved
  with the plate motion model when a plate is given (``plate=``; the registry's setting
  ``REGISTRY["PLATE"]``); without one, plate motion of typically centimetres per year is NOT
  modelled and the result carries a warning.
"""

from __future__ import annotations

import datetime as _dt
import math
from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np

from registry.geodesy import platemotion as _pmm
from registry.geodesy import plates as _plates
from registry.geodesy.conversions import (
    Ellipsoid,
    ecef_to_geodetic,
    ellipsoid_of_epsg,
    enu_delta_to_ecef,
    geodetic_to_ecef,
)

__all__ = [
    "FrameTransformError",
    "FrameInfo",
    "Step",
    "FrameTransformResult",
    "DEFAULT_ASSUMED_RATE_MM_YR",
    "frame_info",
    "operation_for",
    "change_frame",
    "propagate_velocity",
    "transform_position",
    "assumed_rate_in",
    "decimal_year_to_date",
    "format_epoch",
]

#: Default assumed unmodelled rate, mm/yr per axis (common practice; a setting in the app).
DEFAULT_ASSUMED_RATE_MM_YR = 2.0
#: Coordinate epochs accepted (the same range as the database constraint on positions).
EPOCH_MIN_YR, EPOCH_MAX_YR = 1900.0, 2100.0
#: A frame change whose stated accuracy is worse than this is flagged as not survey grade (metres).
SURVEY_GRADE_LIMIT_M = 0.05


class FrameTransformError(Exception):
    """A position cannot be moved to the requested frame/epoch; ``code`` says why."""

    def __init__(self, message: str, *, code: str):
        super().__init__(message)
        self.code = code


def crs_label(name: str, epsg: int) -> str:
    """A frame (or any CRS) in words, as every page, sheet and command writes it: "name (EPSG:code)".

    >>> crs_label("ITRF2014", 7912)
    'ITRF2014 (EPSG:7912)'
    """
    return f"{name} (EPSG:{int(epsg)})"


@dataclass(frozen=True)
class FrameInfo:
    epsg: int
    name: str
    dynamic: bool
    ensemble: bool
    reference_epoch_yr: float | None
    ellipsoid: Ellipsoid

    @property
    def label(self) -> str:
        return crs_label(self.name, self.epsg)

    @property
    def kind(self) -> str:
        if self.ensemble:
            return "datum ensemble"
        return "dynamic" if self.dynamic else "plate-fixed"


@dataclass(frozen=True)
class Step:
    """One operation applied: what it was, its stated accuracy (m; None when unknown) and epochs."""

    kind: str  # "frame_change" | "velocity" | "hold" | "plate_motion"
    description: str
    accuracy_m: float | None
    from_label: str
    to_label: str
    from_epoch_yr: float
    to_epoch_yr: float

    def as_dict(self) -> dict:
        return {
            "kind": self.kind,
            "description": self.description,
            "accuracy_m": self.accuracy_m,
            "from": self.from_label,
            "to": self.to_label,
            "from_epoch": self.from_epoch_yr,
            "to_epoch": self.to_epoch_yr,
        }


@dataclass
class FrameTransformResult:
    lat_deg: np.ndarray
    lon_deg: np.ndarray
    h_m: np.ndarray
    frame: FrameInfo
    epoch_yr: float
    added_sigma_enu_m: tuple  # (σE, σN, σU) added by the epoch change, metres
    steps: list[Step] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)
    #: Years over which the point was held in a dynamic frame with neither a velocity nor a plate
    #: model: its motion over that span is not modelled (0.0 when nothing of the kind happened).
    unmodelled_dynamic_hold_yr: float = 0.0
    #: Plates of the plate motion model applied (one per point, flattened; empty when none) and how
    #: they were chosen: "location" (AUTO), "office" (the setting, checked against the location),
    #: "asked" (given for this computation).
    plate_codes: tuple[str, ...] = ()
    plate_rule: str = ""


def _network_off() -> None:
    import pyproj.network

    if pyproj.network.is_network_enabled():
        pyproj.network.set_network_enabled(False)


@lru_cache(maxsize=256)
def frame_info(epsg: int) -> FrameInfo:
    """Describe geographic 3D frame ``epsg``; raise if it is unknown or not geographic 3D.

    >>> fi = frame_info(7912)
    >>> fi.name, fi.dynamic, fi.reference_epoch_yr
    ('ITRF2014', True, 2010.0)
    >>> frame_info(6319).kind
    'plate-fixed'
    """
    import pyproj

    try:
        code = int(epsg)
        crs = pyproj.CRS.from_epsg(code)
    except (ValueError, TypeError, pyproj.exceptions.CRSError) as exc:
        raise FrameTransformError(
            f"EPSG:{epsg} is not a known coordinate reference system.", code="unknown_frame"
        ) from exc
    if not (crs.is_geographic and len(crs.axis_info) == 3):
        raise FrameTransformError(
            f"EPSG:{code} ({crs.name}) is a {crs.type_name}; a frame must be a geographic 3D CRS "
            "(latitude, longitude, ellipsoidal height).",
            code="not_geographic_3d",
        )
    d = crs.to_json_dict()
    datum = d.get("datum") or {}
    ensemble = "datum_ensemble" in d
    dynamic = datum.get("type") == "DynamicGeodeticReferenceFrame"
    ref_epoch = datum.get("frame_reference_epoch")
    return FrameInfo(
        epsg=code,
        name=crs.name,
        dynamic=bool(dynamic),
        ensemble=bool(ensemble),
        reference_epoch_yr=float(ref_epoch) if ref_epoch is not None else None,
        ellipsoid=ellipsoid_of_epsg(code),
    )


def _check_epoch(value, what: str) -> float:
    try:
        t = float(value)
    except (TypeError, ValueError) as exc:
        raise FrameTransformError(f"{what} must be a decimal year, got {value!r}.", code="bad_epoch") from exc
    if not math.isfinite(t) or not EPOCH_MIN_YR <= t <= EPOCH_MAX_YR:
        raise FrameTransformError(
            f"{what} must be a decimal year between {EPOCH_MIN_YR:.0f} and {EPOCH_MAX_YR:.0f}, got {value!r}.",
            code="bad_epoch",
        )
    return t


def _aoi_key(lat, lon) -> tuple[float, float, float, float]:
    """Bounding box of the points, rounded outwards to 0.1° (a cache key for the area of use)."""
    return (
        math.floor(float(np.min(lon)) * 10) / 10,
        math.floor(float(np.min(lat)) * 10) / 10,
        math.ceil(float(np.max(lon)) * 10) / 10,
        math.ceil(float(np.max(lat)) * 10) / 10,
    )


@lru_cache(maxsize=256)
def operation_for(from_crs: str, to_crs: str, aoi: tuple[float, float, float, float] | None = None):
    """The best PROJ operation between two CRSs (strings PROJ understands), or FrameTransformError.

    Network off, no ballpark, only the best operation (a missing grid is an error, not a fallback).
    """
    import pyproj
    from pyproj.transformer import AreaOfInterest

    _network_off()
    area = AreaOfInterest(*aoi) if aoi else None
    try:
        return pyproj.Transformer.from_crs(
            from_crs, to_crs, always_xy=True, allow_ballpark=False, only_best=True, area_of_interest=area
        )
    except pyproj.exceptions.ProjError as exc:
        msg = str(exc)
        if "not available" in msg or "grid" in msg.lower():
            raise FrameTransformError(
                f"The best transformation from {from_crs} to {to_crs} needs a grid that is not installed. "
                f"PROJ says: {msg} Install the grid into the PROJ data folder (or the registry's grid folder); "
                "the registry never falls back to a less accurate route silently.",
                code="grid_missing",
            ) from exc
        raise FrameTransformError(
            f"No transformation better than a ballpark is known from {from_crs} to {to_crs}. "
            "A ballpark route can be metres off, so it is refused.",
            code="no_transformation",
        ) from exc


def change_frame(lat_deg, lon_deg, h_m, *, from_epsg: int, to_epsg: int, epoch_yr: float):
    """Change frame at one coordinate epoch. Returns (lat_deg, lon_deg, h_m, Step).

    The epoch is passed as the 4th coordinate so that time-dependent (14-parameter) Helmert
    transformations are evaluated at ``epoch_yr``; the output epoch equals the input epoch.
    """
    import pyproj

    src = frame_info(from_epsg)
    dst = frame_info(to_epsg)
    t = _check_epoch(epoch_yr, "Epoch")
    lat, lon, h = (np.asarray(v, dtype=float) for v in (lat_deg, lon_deg, h_m))
    lat, lon, h = np.broadcast_arrays(lat, lon, h)
    shape = lat.shape
    tr = operation_for(f"EPSG:{src.epsg}", f"EPSG:{dst.epsg}", _aoi_key(lat, lon))
    try:
        x, y, z, _ = tr.transform(lon.ravel(), lat.ravel(), h.ravel(), np.full(lat.size, t), errcheck=True)
    except pyproj.exceptions.ProjError as exc:
        raise FrameTransformError(
            f"PROJ could not transform {src.label} to {dst.label} at epoch {t:.3f}: {exc}", code="transform_failed"
        ) from exc
    out = [np.asarray(v, dtype=float).reshape(shape) for v in (y, x, z)]
    if not all(np.all(np.isfinite(v)) for v in out):
        raise FrameTransformError(
            f"Some points are outside the area where {src.label} → {dst.label} is defined.", code="outside_area"
        )
    description = tr.description
    accuracy = tr.accuracy
    if description.startswith("unavailable until proj_trans is called"):
        used = tr.get_last_used_operation()
        description, accuracy = used.description, used.accuracy
    step = Step(
        kind="frame_change",
        description=_compact(description),
        accuracy_m=None if accuracy is None or accuracy < 0 else float(accuracy),
        from_label=src.label,
        to_label=dst.label,
        from_epoch_yr=t,
        to_epoch_yr=t,
    )
    return out[0], out[1], out[2], step


_BOOKKEEPING = ("axis order change", "Conversion from", "Null geographic offset")


def _compact(description: str) -> str:
    """Drop PROJ's bookkeeping steps (axis swaps, geographic ↔ geocentric conversions) from a description."""
    parts = [p.strip() for p in description.split(" + ")]
    kept = [p for p in parts if not p.startswith(_BOOKKEEPING)]
    return " + ".join(kept) if kept else description


def propagate_velocity(lat_deg, lon_deg, h_m, *, velocity_enu_m_yr, dt_yr, ellipsoid: Ellipsoid):
    """Move points along a constant velocity (east, north, up in m/yr) for ``dt_yr`` years.

    Linear in ECEF: X(t + Δt) = X(t) + Rᵀ v Δt, with R the ENU rotation at the point.

    >>> from registry.geodesy.conversions import GRS80
    >>> lat, lon, h = propagate_velocity(0.0, 0.0, 0.0, velocity_enu_m_yr=(0.0, 0.0, 0.01), dt_yr=10.0,
    ...                                  ellipsoid=GRS80)
    >>> round(float(h), 6)
    0.1
    """
    ve, vn, vu = (np.asarray(v, dtype=float) for v in velocity_enu_m_yr)
    if not all(np.all(np.isfinite(v)) for v in (ve, vn, vu)):
        raise FrameTransformError("Velocity components must be finite numbers (m/yr).", code="bad_velocity")
    x, y, z = geodetic_to_ecef(lat_deg, lon_deg, h_m, ellipsoid=ellipsoid)
    dx, dy, dz = enu_delta_to_ecef(ve * dt_yr, vn * dt_yr, vu * dt_yr, lat_deg, lon_deg)
    return ecef_to_geodetic(x + dx, y + dy, z + dz, ellipsoid=ellipsoid)


def assumed_rate_in(epsg: int, *, dynamic_mm_yr: float, plate_fixed_mm_yr: float | None) -> float:
    """The assumed unmodelled rate (mm/yr per axis) for coordinates held, or a velocity given, in frame ``epsg``:
    ``plate_fixed_mm_yr`` in a plate-fixed frame (None: the dynamic rate), ``dynamic_mm_yr`` in a dynamic
    frame or a datum ensemble.

    >>> assumed_rate_in(6319, dynamic_mm_yr=2.0, plate_fixed_mm_yr=0.5), assumed_rate_in(7912, dynamic_mm_yr=2.0, plate_fixed_mm_yr=0.5)
    (0.5, 2.0)
    """
    if plate_fixed_mm_yr is not None and frame_info(epsg).kind == "plate-fixed":
        return float(plate_fixed_mm_yr)
    return float(dynamic_mm_yr)


def transform_position(
    lat_deg,
    lon_deg,
    h_m,
    *,
    from_epsg: int,
    from_epoch_yr: float,
    to_epsg: int,
    to_epoch_yr: float,
    velocity_enu_m_yr=None,
    velocity_sigma_enu_m_yr=None,
    assumed_rate_mm_yr: float = DEFAULT_ASSUMED_RATE_MM_YR,
    plate: str | None = None,
    plate_explicit: bool = False,
    plate_origin_rate_bias: bool = False,
    assumed_rate_plate_fixed_mm_yr: float | None = None,
) -> FrameTransformResult:
    """Move positions from (frame A, epoch t1) to (frame B, epoch t2).

    Parameters
    ----------
    lat_deg, lon_deg, h_m : array_like
        Positions in frame ``from_epsg`` at epoch ``from_epoch_yr`` (degrees, degrees, metres).
    from_epsg, to_epsg : int
        EPSG codes of geographic 3D frames.
    from_epoch_yr, to_epoch_yr : float
        Coordinate epochs, decimal years. Always required; equal epochs mean "frame change only".
    velocity_enu_m_yr : tuple of array_like, optional
        The points' velocity (east, north, up; m/yr) **in frame ``from_epsg``**.
    velocity_sigma_enu_m_yr : tuple of array_like, optional
        Its standard deviations; adds σ_v |Δt| per axis.
    assumed_rate_mm_yr : float
        Assumed unmodelled rate per axis when no velocity is given (mm/yr). With a plate model
        applied, the assumed residual rate relative to the rigid plate.
    assumed_rate_plate_fixed_mm_yr : float, optional
        The same for an epoch change held in a plate-fixed frame (NAD83(2011), ETRF2000, GDA2020, ...),
        where a mark off deforming zones moves by a fraction of a millimetre a year; None: the same as
        ``assumed_rate_mm_yr``. The rate follows the frame the coordinates are held in, not the target's.
    plate : str, optional
        ``"AUTO"`` or a plate code of the ITRF2020 plate motion model (e.g. ``"NOAM"``). When given,
        a point without a velocity that has to change epoch in a dynamic frame moves with a plate
        (:mod:`registry.geodesy.platemotion`), chosen by :func:`registry.geodesy.plates.choose_plates`:
        AUTO, each point's plate from its location; a code, that plate — refused for a point located
        on another plate unless ``plate_explicit``. None or "": held, with a warning.
    plate_explicit : bool
        True when ``plate`` was asked for this computation by the user (used as asked, with a
        warning where the location disagrees); False when it is the office's setting.
    plate_origin_rate_bias : bool
        Add the model's origin rate bias to the plate velocity (off by default).

    Returns
    -------
    FrameTransformResult
        Coordinates in frame ``to_epsg`` at ``to_epoch_yr``, the σ added by the epoch change, the
        chain of steps with their stated accuracy, and warnings to show the user.

    Raises
    ------
    FrameTransformError
        Unknown or non-3D frame, bad epoch, no non-ballpark transformation, missing grid, points
        outside the area of use.

    Examples
    --------
    >>> r = transform_position(45.2, -110.6, 1500.0, from_epsg=9989, from_epoch_yr=2024.5,
    ...                        to_epsg=7912, to_epoch_yr=2024.5)
    >>> r.frame.label, [s.kind for s in r.steps]
    ('ITRF2014 (EPSG:7912)', ['frame_change'])
    """
    src = frame_info(from_epsg)
    dst = frame_info(to_epsg)
    t1 = _check_epoch(from_epoch_yr, "Source epoch")
    t2 = _check_epoch(to_epoch_yr, "Target epoch")
    rate_m_yr = float(assumed_rate_mm_yr) / 1000.0
    fixed_rate_mm_yr = float(
        assumed_rate_mm_yr if assumed_rate_plate_fixed_mm_yr is None else assumed_rate_plate_fixed_mm_yr
    )
    for value in (rate_m_yr, fixed_rate_mm_yr):
        if not math.isfinite(value) or value < 0:
            raise FrameTransformError("The assumed rate must be a non-negative number (mm/yr).", code="bad_rate")
    plate_code = None
    if plate not in (None, ""):
        if str(plate).strip().upper() == _plates.AUTO:
            plate_code = _plates.AUTO
        else:
            try:
                plate_code = _pmm.plate(plate).code
            except _pmm.PlateMotionError as exc:
                raise FrameTransformError(str(exc), code=exc.code) from exc
    applied_plates: tuple[str, ...] = ()
    lat, lon, h = (np.asarray(v, dtype=float) for v in (lat_deg, lon_deg, h_m))
    lat, lon, h = np.broadcast_arrays(lat, lon, h)
    if not (np.all(np.isfinite(lat)) and np.all(np.isfinite(lon)) and np.all(np.isfinite(h))):
        raise FrameTransformError("Coordinates must be finite numbers.", code="not_finite")
    if np.any(np.abs(lat) > 90.0) or np.any(np.abs(lon) > 360.0):
        raise FrameTransformError("Latitude must be within ±90° and longitude within ±360°.", code="out_of_range")

    dt = t2 - t1
    steps: list[Step] = []
    warnings: list[str] = []
    zero = np.zeros_like(lat)
    sig = (zero, zero, zero)
    same_frame = src.epsg == dst.epsg
    unmodelled_hold_yr = 0.0

    def _hold(frame: FrameInfo, la, lo, hh):
        nonlocal sig, unmodelled_hold_yr
        moving = frame.dynamic or frame.ensemble
        rate_mm_yr = assumed_rate_in(
            frame.epsg, dynamic_mm_yr=assumed_rate_mm_yr, plate_fixed_mm_yr=assumed_rate_plate_fixed_mm_yr
        )
        added = rate_mm_yr / 1000.0 * abs(dt)
        sig = (np.sqrt(sig[0] ** 2 + added**2), np.sqrt(sig[1] ** 2 + added**2), np.sqrt(sig[2] ** 2 + added**2))
        if plate_code is not None and (frame.dynamic or frame.ensemble):
            return _plate_motion(frame, la, lo, hh, added)
        steps.append(
            Step(
                kind="hold",
                description=(
                    f"no velocity known: coordinates held; assumed rate {rate_mm_yr:g} mm/yr per axis "
                    f"× {abs(dt):.3f} yr" + ("" if moving else " (plate-fixed frame)")
                ),
                accuracy_m=added,
                from_label=frame.label,
                to_label=frame.label,
                from_epoch_yr=t1,
                to_epoch_yr=t2,
            )
        )
        if frame.dynamic or frame.ensemble:
            unmodelled_hold_yr = max(unmodelled_hold_yr, abs(dt))
            warnings.append(
                f"{frame.label} is a dynamic frame: marks move in it with their plate, typically by centimetres "
                f"a year. Without the mark's velocity, the epoch change {t1:.3f} → {t2:.3f} is NOT modelled "
                "and the result may be off by far more than the inflated uncertainty. Give a velocity, or "
                "convert at the mark's own epoch."
            )
        return la, lo, hh

    def _plate_motion(frame: FrameInfo, la, lo, hh, added):
        nonlocal applied_plates
        assert plate_code is not None  # called only when a plate is to be applied
        try:
            choice = _plates.choose_plates(la, lo, plate=plate_code, explicit=plate_explicit)
        except _plates.PlateChoiceError as exc:
            raise FrameTransformError(str(exc), code=exc.code) from exc
        applied_plates = choice.codes
        codes = np.asarray(choice.codes, dtype=object).reshape(np.shape(la))
        ve, vn, vu = (np.zeros(np.shape(la)) for _ in range(3))
        for code in sorted(set(choice.codes)):
            mask = codes == code
            e_, n_, u_ = _pmm.velocity_enu_m_yr(
                np.asarray(la)[mask],
                np.asarray(lo)[mask],
                np.asarray(hh)[mask],
                plate=code,
                ellipsoid=frame.ellipsoid,
                origin_rate_bias=plate_origin_rate_bias,
            )
            ve[mask], vn[mask], vu[mask] = e_, n_, u_
        if np.ndim(la) == 0:
            ve, vn, vu = (float(v) for v in (ve, vn, vu))  # type: ignore[assignment]  # scalar in, scalar out
        la, lo, hh = propagate_velocity(la, lo, hh, velocity_enu_m_yr=(ve, vn, vu), dt_yr=dt, ellipsoid=frame.ellipsoid)
        if np.size(ve) == 1:
            vtext = (
                f"model velocity ({float(np.ravel(ve)[0]) * 1000:.1f}, {float(np.ravel(vn)[0]) * 1000:.1f}, "
                f"{float(np.ravel(vu)[0]) * 1000:.1f}) mm/yr east, north, up"
            )
        else:
            vtext = "each point's model velocity"
        distinct = sorted(set(choice.codes))
        how = {
            _plates.AUTO: "plate chosen from the point's location",
            None: "",
        }.get(
            plate_code, "the plate asked for" if plate_explicit else "the office's plate, checked against the location"
        )
        if len(distinct) == 1:
            model = _pmm.model_label(distinct[0], origin_rate_bias=plate_origin_rate_bias)
        else:
            model = f"{_pmm.MODEL_NAME} (Altamimi et al. 2023), plates {', '.join(distinct)}"
        steps.append(
            Step(
                kind="plate_motion",
                description=(
                    f"moved with the plate: {model} ({how}), {vtext} × {dt:+.3f} yr; residual rate "
                    f"{assumed_rate_mm_yr:g} mm/yr per axis × {abs(dt):.3f} yr added to σ"
                ),
                accuracy_m=added,
                from_label=frame.label,
                to_label=frame.label,
                from_epoch_yr=t1,
                to_epoch_yr=t2,
            )
        )
        names = " and ".join(f"{_pmm.plate(c).name} ({c})" for c in distinct)
        warnings.append(
            f"The epoch change {t1:.3f} → {t2:.3f} in {frame.label} uses the rigid motion of the {names} plate "
            f"({_pmm.MODEL_NAME}), not the mark's own velocity. Near plate boundaries and in deforming areas marks "
            "move differently; give the mark's velocity where it is known."
        )
        warnings.extend(choice.warnings)
        return la, lo, hh

    if dt != 0.0 and velocity_enu_m_yr is not None:
        lat, lon, h = propagate_velocity(
            lat, lon, h, velocity_enu_m_yr=velocity_enu_m_yr, dt_yr=dt, ellipsoid=src.ellipsoid
        )
        added_desc = ""
        if velocity_sigma_enu_m_yr is not None:
            sv = [np.abs(np.asarray(v, dtype=float)) * abs(dt) for v in velocity_sigma_enu_m_yr]
            sig = tuple(np.sqrt(s**2 + a**2) for s, a in zip(sig, sv, strict=True))
            added_desc = "; velocity uncertainty × |Δt| added"
        ve, vn, vu = (np.asarray(v, dtype=float) for v in velocity_enu_m_yr)
        if ve.size == 1:
            vtext = f"({float(ve) * 1000:.1f}, {float(vn) * 1000:.1f}, {float(vu) * 1000:.1f}) mm/yr east, north, up"
        else:
            vtext = "each point's own velocity"
        steps.append(
            Step(
                kind="velocity",
                description=f"propagated along {vtext} from {t1:.3f} to {t2:.3f}{added_desc}",
                accuracy_m=None,
                from_label=src.label,
                to_label=src.label,
                from_epoch_yr=t1,
                to_epoch_yr=t2,
            )
        )
        if not same_frame:
            lat, lon, h, step = change_frame(lat, lon, h, from_epsg=src.epsg, to_epsg=dst.epsg, epoch_yr=t2)
            steps.append(step)
    elif same_frame:
        if dt != 0.0:
            lat, lon, h = _hold(src, lat, lon, h)
    elif dt != 0.0 and not (src.dynamic or src.ensemble):
        # Plate-fixed source: hold there (the point nearly does not move), then change frame at t2.
        lat, lon, h = _hold(src, lat, lon, h)
        lat, lon, h, step = change_frame(lat, lon, h, from_epsg=src.epsg, to_epsg=dst.epsg, epoch_yr=t2)
        steps.append(step)
    else:
        # Dynamic source (or no epoch change): change frame at t1, then hold in the target
        # (plate-fixed target: fine; dynamic target: the hold step warns).
        lat, lon, h, step = change_frame(lat, lon, h, from_epsg=src.epsg, to_epsg=dst.epsg, epoch_yr=t1)
        steps.append(step)
        if dt != 0.0:
            lat, lon, h = _hold(dst, lat, lon, h)

    for step in steps:
        if step.kind == "frame_change":
            if step.accuracy_m is None:
                warnings.append(f"The accuracy of '{step.description}' is not stated by PROJ/EPSG.")
            elif step.accuracy_m > SURVEY_GRADE_LIMIT_M:
                warnings.append(
                    f"'{step.description}' is stated accurate to {step.accuracy_m:g} m only: not survey grade."
                )
    if src.ensemble or dst.ensemble:
        warnings.append(
            "WGS 84 (and any datum ensemble) is only defined to about 2 m; use a realization (an ITRF frame) "
            "for survey work."
        )
    lon = np.where(lon >= 180.0, lon - 360.0, np.where(lon < -180.0, lon + 360.0, lon))
    return FrameTransformResult(
        lat_deg=np.asarray(lat, dtype=float),
        lon_deg=np.asarray(lon, dtype=float),
        h_m=np.asarray(h, dtype=float),
        frame=dst,
        epoch_yr=t2,
        added_sigma_enu_m=sig,
        steps=steps,
        warnings=warnings,
        unmodelled_dynamic_hold_yr=float(unmodelled_hold_yr),
        plate_codes=applied_plates,
        plate_rule=(
            ""
            if not applied_plates
            else "location"
            if plate_code == _plates.AUTO
            else "asked"
            if plate_explicit
            else "office"
        ),
    )


def decimal_year_to_date(epoch_yr: float) -> _dt.date:
    """Calendar date (UTC) of the day containing decimal year ``epoch_yr`` (fraction of that year's days).

    >>> decimal_year_to_date(2024.5)
    datetime.date(2024, 7, 2)
    >>> decimal_year_to_date(2010.0)
    datetime.date(2010, 1, 1)
    """
    t = float(epoch_yr)
    year = math.floor(t)
    start = _dt.datetime(year, 1, 1)
    days = (_dt.datetime(year + 1, 1, 1) - start).days
    return (start + _dt.timedelta(days=(t - year) * days)).date()


def date_to_decimal_year(day: _dt.date) -> float:
    """Decimal year of the middle of ``day`` (UTC): year + (day of year − 0.5) / days in the year.

    >>> round(date_to_decimal_year(_dt.date(2026, 12, 4)), 4)
    2026.9247
    >>> decimal_year_to_date(date_to_decimal_year(_dt.date(2024, 7, 2)))
    datetime.date(2024, 7, 2)
    """
    start = _dt.date(day.year, 1, 1)
    days = (_dt.date(day.year + 1, 1, 1) - start).days
    return day.year + ((day - start).days + 0.5) / days


def format_epoch(epoch_yr: float) -> str:
    """Epoch as a decimal year to 3 places with the calendar date beside it.

    >>> format_epoch(2024.5)
    '2024.500 (2024-07-02)'
    """
    return f"{float(epoch_yr):.3f} ({decimal_year_to_date(epoch_yr).isoformat()})"
