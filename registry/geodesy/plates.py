"""Which plate a point is on: coarse plate outlines, and the rule for choosing a point's plate motion.

Pure module (no Django). The outlines are ``data/plate_outlines.json``: the 56 plates of NNR-MORVEL56
(D. F. Argus, R. G. Gordon, C. DeMets 2011, *Geochem. Geophys. Geosyst.* 12, Q11001,
doi:10.1029/2011GC003751), whose boundaries are P. Bird's PB2002 (P. Bird 2003, "An updated
digital model of plate boundaries", *Geochem. Geophys. Geosyst.* 4(3), 1027,
doi:10.1029/2001GC000252), simplified to about 2 km by ``data/make_plate_outlines.py`` (which
states the source file, its licence and checksum).

The ITRF2020 plate motion model (:mod:`registry.geodesy.platemotion`; Altamimi et al. 2023) has 13
of those plates. Mapping (NNR-MORVEL56 code → model): am → AMUR, an → ANTA, ar → ARAB,
au → AUST, ca → CARB, eu → EURA, in → INDI, na → NOAM, nb (Nubia) → NUBI, nz → NAZC,
pa → PCFC, sa → SOAM, sm → SOMA. A point on any of the other 43 (microplates such as Anatolia,
Okhotsk, Philippine Sea, Sunda, Yangtze, Caribbean's neighbours, Juan de Fuca...) is **refused**
with the plate's name, not given a larger neighbour's motion: those plates move differently from
their neighbours by centimetres a year, and only the mark's own velocity is right there.

Choosing the plate (:func:`choose_plates`)
------------------------------------------
- ``"AUTO"``: each point gets the model plate of the outline it falls in.
- the office's plate (a code from the setting, ``explicit=False``): a point located on another
  plate is refused (the office's plate would move it wrongly by up to decimetres a decade);
- a plate asked for by the user for this computation (``explicit=True``): used as asked, with a
  warning where the point's location says otherwise.

In every case a point within :data:`NEAR_BOUNDARY_KM` of its plate's outline gets a warning: plate
boundaries are zones (tens to hundreds of km wide; Bird 2003 §1 and its "orogens") in which marks do
not move with either rigid plate, and the coarse outlines are themselves uncertain by a few km.
Outlines are tested in longitude/latitude as plane polygons (the data's vertices are at most about
111 km apart; Bird 2003 notes that straight lines between them add no significant error); a point
that falls in no outline or in two (a sliver from the simplification, always within a few km of a
boundary) takes the plate whose outline it is deepest inside or nearest to, with the warning.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path

import numpy as np

from registry.geodesy import platemotion as _pmm

__all__ = [
    "AUTO",
    "NEAR_BOUNDARY_KM",
    "PlateAtPoint",
    "PlateChoiceError",
    "PlateChoice",
    "plates_at",
    "plate_at",
    "choose_plates",
    "OUTLINES_CITATION",
]

AUTO = "AUTO"
#: A point nearer than this to its plate's outline gets a warning (km): boundary zones are tens to
#: hundreds of km wide (Bird 2003) and the coarse outlines are uncertain by a few km.
NEAR_BOUNDARY_KM = 100.0
OUTLINES_CITATION = (
    "plate outlines of NNR-MORVEL56 (Argus, Gordon & DeMets 2011) on P. Bird's PB2002 boundaries (Bird 2003)"
)
_DATA = Path(__file__).with_name("data") / "plate_outlines.json"
_KM_PER_DEG = 111.195  # mean Earth radius 6371.0 km × π/180


class PlateChoiceError(ValueError):
    """No plate motion can be applied to a point; ``code`` says why (shown with the message)."""

    def __init__(self, message: str, *, code: str):
        super().__init__(message)
        self.code = code


@dataclass(frozen=True)
class PlateAtPoint:
    """The plate outline a point falls in, its model plate (None: not in the model), distance to its edge."""

    outline_code: str
    name: str
    pmm_code: str | None
    boundary_km: float

    @property
    def near_boundary(self) -> bool:
        return self.boundary_km < NEAR_BOUNDARY_KM


@dataclass(frozen=True)
class _Outline:
    code: str
    name: str
    pmm: str | None
    lon: np.ndarray  # closed ring, unwrapped longitudes
    lat: np.ndarray
    poly_lon: np.ndarray  # the polygon tested (polar rings closed through their pole)
    poly_lat: np.ndarray
    lon_min: float
    lon_max: float
    lat_min: float
    lat_max: float


@lru_cache(maxsize=1)
def _outlines() -> tuple[_Outline, ...]:
    doc = json.loads(_DATA.read_text(encoding="utf-8"))
    out = []
    for p in doc["plates"]:
        ring = np.asarray(p["ring"], dtype=float)
        lon, lat = ring[:, 0], ring[:, 1]
        if p["pole"]:
            pole_lat = 90.0 if p["pole"] == "N" else -90.0
            plon = np.concatenate([lon, [lon[-1], lon[0], lon[0]]])
            plat = np.concatenate([lat, [pole_lat, pole_lat, lat[0]]])
        else:
            plon, plat = lon, lat
        out.append(
            _Outline(
                code=p["code"],
                name=p["name"],
                pmm=p["pmm"],
                lon=lon,
                lat=lat,
                poly_lon=plon,
                poly_lat=plat,
                lon_min=float(plon.min()),
                lon_max=float(plon.max()),
                lat_min=float(plat.min()),
                lat_max=float(plat.max()),
            )
        )
    return tuple(out)


@lru_cache(maxsize=1)
def _edges():
    """All outlines' polygon edges in one set of arrays (x0, y0, x1, y1, outline index)."""
    parts = [
        (o.poly_lon[:-1], o.poly_lat[:-1], o.poly_lon[1:], o.poly_lat[1:], np.full(o.poly_lon.size - 1, i))
        for i, o in enumerate(_outlines())
    ]
    return tuple(np.concatenate([p[k] for p in parts]) for k in range(5))


def _inside_all(lat: np.ndarray, lon: np.ndarray) -> np.ndarray:
    """(points × outlines) booleans: even-odd ray casting in (longitude, latitude), the longitude
    also tried shifted by ±360° (rings are unwrapped, so some extend beyond ±180°)."""
    x0, y0, x1, y1, owner = _edges()
    n_out = len(_outlines())
    result = np.zeros((lat.size, n_out), dtype=bool)
    slope = np.divide(x1 - x0, y1 - y0, out=np.zeros_like(x0), where=y1 != y0)
    for i in range(lat.size):
        py = lat[i]
        crosses = (y0 > py) != (y1 > py)
        xint = x0[crosses] + (py - y0[crosses]) * slope[crosses]
        own = owner[crosses]
        for shift in (-360.0, 0.0, 360.0):
            hits = np.bincount(own[(lon[i] + shift) < xint], minlength=n_out)
            result[i] |= hits % 2 == 1
    return result


def _edge_distance_km(o: _Outline, lat: np.ndarray, lon: np.ndarray) -> np.ndarray:
    """Distance (km, local plane at each point) from each point to the outline's edges."""
    lat_r = np.radians(lat)[:, None]
    dx0 = ((o.lon[:-1][None, :] - lon[:, None] + 180.0) % 360.0 - 180.0) * np.cos(lat_r)
    dx1 = ((o.lon[1:][None, :] - lon[:, None] + 180.0) % 360.0 - 180.0) * np.cos(lat_r)
    dy0 = o.lat[:-1][None, :] - lat[:, None]
    dy1 = o.lat[1:][None, :] - lat[:, None]
    ex, ey = dx1 - dx0, dy1 - dy0
    length2 = ex * ex + ey * ey
    with np.errstate(divide="ignore", invalid="ignore"):
        t = np.clip(np.where(length2 > 0, -(dx0 * ex + dy0 * ey) / length2, 0.0), 0.0, 1.0)
    cx, cy = dx0 + t * ex, dy0 + t * ey
    return np.sqrt(np.min(cx * cx + cy * cy, axis=1)) * _KM_PER_DEG


def plates_at(lat_deg, lon_deg) -> list[PlateAtPoint]:
    """The plate of each point (flattened, in order).

    Examples
    --------
    >>> [p.pmm_code for p in plates_at([45.2, -33.87, 51.5], [-110.6, 151.21, -0.13])]
    ['NOAM', 'AUST', 'EURA']
    >>> plate_at(39.0, 35.0).name, plate_at(39.0, 35.0).pmm_code   # central Anatolia
    ('Anatolia', None)
    """
    lat = np.atleast_1d(np.asarray(lat_deg, dtype=float)).ravel()
    lon = np.atleast_1d(np.asarray(lon_deg, dtype=float)).ravel()
    lat, lon = np.broadcast_arrays(lat, lon)
    if not (np.all(np.isfinite(lat)) and np.all(np.isfinite(lon))) or np.any(np.abs(lat) > 90.0):
        raise PlateChoiceError("Latitude and longitude must be finite, latitude within ±90°.", code="not_finite")
    lon = np.mod(lon + 180.0, 360.0) - 180.0
    outlines = _outlines()
    inside = _inside_all(lat, lon)
    out: list[PlateAtPoint] = []
    for i in range(lat.size):
        hits = np.flatnonzero(inside[i])
        pt_lat, pt_lon = lat[i : i + 1], lon[i : i + 1]
        if hits.size == 1:
            o = outlines[int(hits[0])]
            dist = float(_edge_distance_km(o, pt_lat, pt_lon)[0])
        else:
            pool = hits if hits.size > 1 else range(len(outlines))
            dists = {int(j): float(_edge_distance_km(outlines[int(j)], pt_lat, pt_lon)[0]) for j in pool}
            # In two outlines: the one it is deepest inside; in none: the nearest one.
            j = max(dists, key=dists.__getitem__) if hits.size > 1 else min(dists, key=dists.__getitem__)
            o, dist = outlines[j], (0.0 if hits.size == 0 else min(dists.values()))
        out.append(PlateAtPoint(outline_code=o.code, name=o.name, pmm_code=o.pmm, boundary_km=dist))
    return out


def plate_at(lat_deg: float, lon_deg: float) -> PlateAtPoint:
    """The plate of one point; see :func:`plates_at`."""
    return plates_at(lat_deg, lon_deg)[0]


@dataclass(frozen=True)
class PlateChoice:
    """The model plate for each point (flattened, in order) and warnings for the user."""

    codes: tuple[str, ...]
    warnings: tuple[str, ...]


def _where(lat: float, lon: float) -> str:
    return f"{abs(lat):.2f}°{'N' if lat >= 0 else 'S'} {abs(lon):.2f}°{'E' if lon >= 0 else 'W'}"


def choose_plates(lat_deg, lon_deg, *, plate: str, explicit: bool = False) -> PlateChoice:
    """The ITRF2020-PMM plate to move each point with, by the rule in the module docstring.

    Parameters
    ----------
    lat_deg, lon_deg : array_like
        The points (degrees).
    plate : str
        ``"AUTO"`` or a plate code of the model (case-insensitive).
    explicit : bool
        True when the user asked for ``plate`` for this computation; False when it is the office's
        setting (then a point located on another plate is refused).

    Raises
    ------
    PlateChoiceError
        ``unknown_plate``; ``plate_not_in_model`` (AUTO, a point on a plate the model lacks);
        ``outside_office_plate`` (the office's plate, a point located on another plate).

    Examples
    --------
    >>> choose_plates(-33.87, 151.21, plate="AUTO").codes
    ('AUST',)
    >>> choose_plates(-33.87, 151.21, plate="NOAM")
    Traceback (most recent call last):
    ...
    registry.geodesy.plates.PlateChoiceError: The point at 33.87°S 151.21°E lies on the Australian plate (AUST), not on the office's plate NOAM (North American). ...
    """
    key = str(plate or "").strip().upper()
    lat = np.atleast_1d(np.asarray(lat_deg, dtype=float)).ravel()
    lon = np.atleast_1d(np.asarray(lon_deg, dtype=float)).ravel()
    lat, lon = np.broadcast_arrays(lat, lon)
    if key != AUTO:
        try:
            key = _pmm.plate(key).code
        except _pmm.PlateMotionError as exc:
            raise PlateChoiceError(str(exc), code=exc.code) from None
    located = plates_at(lat, lon)
    warnings: list[str] = []
    codes: list[str] = []
    near: list[tuple[float, float, PlateAtPoint]] = []
    for la, lo, at in zip(lat.tolist(), lon.tolist(), located, strict=True):
        here = f"{_pmm.plate(at.pmm_code).name} plate ({at.pmm_code})" if at.pmm_code else f"{at.name} plate"
        if key == AUTO:
            if at.pmm_code is None:
                raise PlateChoiceError(
                    f"The point at {_where(la, lo)} lies on the {at.name} plate, which the ITRF2020 plate motion "
                    "model does not include, so no plate motion can be applied to it. Give the point's own "
                    "velocity, or convert at the point's own epoch.",
                    code="plate_not_in_model",
                )
            codes.append(at.pmm_code)
        elif explicit:
            codes.append(key)
            if at.pmm_code != key:
                warnings.append(
                    f"You asked for the {_pmm.plate(key).name} plate ({key}), but the point at {_where(la, lo)} lies "
                    f"on the {here} by the {OUTLINES_CITATION}: check that this is what you meant."
                )
        else:
            if at.pmm_code != key:
                raise PlateChoiceError(
                    f"The point at {_where(la, lo)} lies on the {here}, not on the office's plate {key} "
                    f"({_pmm.plate(key).name}). Moving it with the office's plate would be wrong by centimetres "
                    "a year. Give the point's own velocity, or its plate for this computation; an administrator "
                    "can also let the registry choose each point's plate from its location (REGISTRY_PLATE=AUTO).",
                    code="outside_office_plate",
                )
            codes.append(key)
        if at.near_boundary:
            near.append((la, lo, at))
    caution = (
        "near plate boundaries marks move with the deforming zone, not with a rigid plate. Use the mark's own "
        "velocity where it is known."
    )
    if len(near) == 1:
        la, lo, at = near[0]
        warnings.append(
            f"The point at {_where(la, lo)} is {at.boundary_km:.0f} km from the edge of the {at.name} plate: {caution}"
        )
    elif near:
        closest = min(near, key=lambda t: t[2].boundary_km)
        warnings.append(
            f"{len(near)} of {lat.size} points are within {NEAR_BOUNDARY_KM:.0f} km of a plate's edge (nearest "
            f"{closest[2].boundary_km:.0f} km, at {_where(closest[0], closest[1])}): {caution}"
        )
    return PlateChoice(codes=tuple(codes), warnings=tuple(dict.fromkeys(warnings)))
