"""Custom grids: a low-distortion projection or a scaled ground system, defined by its parameters.

Pure module (no Django). A custom grid is a conformal projection of one geographic frame (its
datum and ellipsoid), given by the parameters a surveyor writes on a project's coordinate
statement, and built with PROJ (pyproj) into a :class:`registry.geodesy.grid.GridCRS`, so that
every grid computation (grid coordinates, point scale factor, convergence, elevation and combined
factors, area-of-use warnings) treats it exactly as an EPSG grid. The Django side stores the
definitions (``registry.models.CustomGrid``) and a manager adds them (``registry.services.grids``).

Methods (EPSG Guidance Note 7-2, *Coordinate Conversions and Transformations including Formulas*,
IOGP Publication 373-7-2, method codes in brackets; PROJ operation names after them):

- ``tm``: transverse Mercator (EPSG method 9807; ``+proj=tmerc``) with latitude and longitude of
  origin, scale factor k0 on the central meridian, false easting and northing;
- ``oblique_stereographic``: oblique stereographic, the "double" stereographic (EPSG method 9809;
  ``+proj=sterea``), with the same parameters; k0 is the scale at the origin;
- ``lcc_1sp``: Lambert conic conformal with one standard parallel (EPSG method 9801; ``+proj=lcc``),
  the origin's latitude being the standard parallel where k = k0;
- ``utm_scaled``: a UTM zone whose coordinates are scaled by a factor s about a point P:
  E′ = E_P + s (E − E_P), N′ = N_P + s (N − N_P). That is itself a transverse Mercator with
  k0′ = 0.9996 s, false easting s · 500 000 + (1 − s) E_P and false northing s · N0 + (1 − s) N_P
  (N0 = 0 north, 10 000 000 m south), which is how it is built. A "ground" system uses
  s = 1 / (combined factor at P), so that grid distances near P equal ground distances.

Low-distortion projections (LDPs) and their design: M. L. Dennis, "Ground truth: design and
documentation of low distortion projections for surveying and GIS", *Surveying and Land
Information Science* 76 (2016) [from memory]. The scaled-UTM relation above is elementary algebra
on the UTM formulas (UTM: k0 = 0.9996, false easting 500 000 m, NIMA TM 8358.2).

Units: false easting and northing are given in the grid's own unit (metre, international foot
0.3048 m, or US survey foot 1200/3937 m, the last marked legacy); coordinates are always also
reported in metres.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from registry.geodesy.grid import UNITS, GridCRS

__all__ = [
    "METHODS",
    "CODE_MAX_LENGTH",
    "CustomGridDefinition",
    "CustomGridError",
    "build_custom_grid",
    "proj_definition",
]

#: Methods: key → label shown to the user.
METHODS = {
    "tm": "transverse Mercator",
    "oblique_stereographic": "oblique stereographic",
    "lcc_1sp": "Lambert conic conformal (one standard parallel)",
    "utm_scaled": "UTM zone scaled about a point",
}
CODE_MAX_LENGTH = 32
#: k0 and the UTM scale s are kept within these (a wider value is a typing error, not a design):
#: LDPs use k0 within a few hundred ppm of 1; a ground scale is 1/CF, within ±0.2 % anywhere on Earth.
K0_RANGE = (0.99, 1.01)
SCALE_RANGE = (0.99, 1.01)
#: False easting/northing (metres) kept within ±10 000 km.
FALSE_LIMIT_M = 1.0e7


class CustomGridError(ValueError):
    """A definition that cannot be a grid; ``field`` names the parameter at fault, ``code`` says why."""

    def __init__(self, message: str, *, code: str, field: str | None = None):
        super().__init__(message)
        self.code = code
        self.field = field


@dataclass(frozen=True)
class CustomGridDefinition:
    """The parameters of a custom grid (angles in degrees, false easting/northing in ``unit``)."""

    code: str
    name: str
    frame_epsg: int
    method: str
    area_west_deg: float
    area_south_deg: float
    area_east_deg: float
    area_north_deg: float
    unit: str = "metre"
    lat0_deg: float | None = None
    lon0_deg: float | None = None
    k0: float | None = None
    false_easting: float | None = None
    false_northing: float | None = None
    utm_zone: int | None = None
    utm_south: bool = False
    anchor_lat_deg: float | None = None
    anchor_lon_deg: float | None = None
    scale: float | None = None

    @property
    def method_label(self) -> str:
        return METHODS.get(self.method, self.method)


def _need(defn: CustomGridDefinition, field: str, lo: float, hi: float, what: str) -> float:
    value = getattr(defn, field)
    if value is None:
        raise CustomGridError(f"{what} is needed for a {defn.method_label} grid.", code="required", field=field)
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise CustomGridError(f"{what} must be a number.", code="not_a_number", field=field) from None
    if not math.isfinite(v) or not lo <= v <= hi:
        raise CustomGridError(f"{what} must be between {lo:g} and {hi:g}.", code="out_of_range", field=field)
    return v


def _utm_parameters(defn: CustomGridDefinition) -> tuple[float, float, float, float, float]:
    """(lat0, lon0, k0, FE m, FN m) of the transverse Mercator equal to the scaled UTM zone."""
    import pyproj

    zone = defn.utm_zone
    if zone is None or not 1 <= int(zone) <= 60:
        raise CustomGridError("The UTM zone must be 1–60.", code="out_of_range", field="utm_zone")
    lat_p = _need(defn, "anchor_lat_deg", -80.0, 84.0, "The latitude of the scaling point")
    lon_p = _need(defn, "anchor_lon_deg", -180.0, 180.0, "The longitude of the scaling point")
    s = _need(defn, "scale", *SCALE_RANGE, "The scale factor applied about the point")
    cm = -183.0 + 6.0 * int(zone)
    fn0 = 10_000_000.0 if defn.utm_south else 0.0
    ellps = _ellipsoid_proj(defn.frame_epsg)
    utm = pyproj.Proj(f"+proj=tmerc +lat_0=0 +lon_0={cm} +k=0.9996 +x_0=500000 +y_0={fn0} {ellps} +units=m")
    e_p, n_p = utm(lon_p, lat_p)
    return 0.0, cm, 0.9996 * s, s * 500_000.0 + (1.0 - s) * e_p, s * fn0 + (1.0 - s) * n_p


def _ellipsoid_proj(frame_epsg: int) -> str:
    from registry.geodesy.conversions import ellipsoid_of_epsg

    ell = ellipsoid_of_epsg(int(frame_epsg))
    return f"+a={ell.a_m!r} +rf={1.0 / ell.f!r}" if ell.f else f"+R={ell.a_m!r}"


def projection_parameters(defn: CustomGridDefinition) -> tuple[float, float, float, float, float]:
    """(lat0_deg, lon0_deg, k0, false easting m, false northing m) of the projection."""
    if defn.method not in METHODS:
        raise CustomGridError(
            f"Unknown method {defn.method!r}; one of: {', '.join(METHODS)}.", code="invalid_choice", field="method"
        )
    if defn.unit not in UNITS:
        raise CustomGridError(
            f"Unknown unit {defn.unit!r}; one of: {', '.join(UNITS)}.", code="invalid_choice", field="unit"
        )
    if defn.method == "utm_scaled":
        return _utm_parameters(defn)
    lat_limit = 89.0 if defn.method == "lcc_1sp" else 90.0
    lat0 = _need(defn, "lat0_deg", -lat_limit, lat_limit, "The latitude of origin")
    if defn.method == "lcc_1sp" and abs(lat0) < 1.0:
        raise CustomGridError(
            "A Lambert conic conformal grid needs its standard parallel away from the equator (|φ0| ≥ 1°).",
            code="out_of_range",
            field="lat0_deg",
        )
    lon0 = _need(defn, "lon0_deg", -180.0, 180.0, "The longitude of origin")
    k0 = _need(defn, "k0", *K0_RANGE, "The scale factor at the origin")
    to_m = UNITS[defn.unit][1]
    fe = _need(defn, "false_easting", -FALSE_LIMIT_M / to_m, FALSE_LIMIT_M / to_m, "The false easting") * to_m
    fn = _need(defn, "false_northing", -FALSE_LIMIT_M / to_m, FALSE_LIMIT_M / to_m, "The false northing") * to_m
    return lat0, lon0, k0, fe, fn


def proj_definition(defn: CustomGridDefinition) -> str:
    """The projection as a PROJ string (metres), for display and audit.

    >>> d = CustomGridDefinition(code="T", name="t", frame_epsg=6319, method="tm", area_west_deg=-111.0,
    ...     area_south_deg=45.0, area_east_deg=-110.0, area_north_deg=45.5, lat0_deg=45.0, lon0_deg=-110.6,
    ...     k0=1.00021, false_easting=100000.0, false_northing=50000.0)
    >>> proj_definition(d)
    '+proj=tmerc +lat_0=45 +lon_0=-110.6 +k_0=1.00021 +x_0=100000 +y_0=50000 +a=6378137.0 +rf=298.257222101'
    """
    lat0, lon0, k0, fe, fn = projection_parameters(defn)
    op = {"tm": "tmerc", "utm_scaled": "tmerc", "oblique_stereographic": "sterea", "lcc_1sp": "lcc"}[defn.method]
    extra = f" +lat_1={lat0:.12g}" if op == "lcc" else ""
    return (
        f"+proj={op} +lat_0={lat0:.12g}{extra} +lon_0={lon0:.12g} +k_0={k0:.12g} +x_0={fe:.12g} +y_0={fn:.12g} "
        f"{_ellipsoid_proj(defn.frame_epsg)}"
    )


def _check_area(defn: CustomGridDefinition) -> tuple[float, float, float, float]:
    vals = []
    for field, lo, hi, what in (
        ("area_west_deg", -180.0, 180.0, "The west bound of the area of use"),
        ("area_south_deg", -90.0, 90.0, "The south bound of the area of use"),
        ("area_east_deg", -180.0, 180.0, "The east bound of the area of use"),
        ("area_north_deg", -90.0, 90.0, "The north bound of the area of use"),
    ):
        vals.append(_need(defn, field, lo, hi, what))
    w, s, e, n = vals
    if s >= n:
        raise CustomGridError(
            "The area of use's south bound must be below its north bound.", code="bad_area", field="area_south_deg"
        )
    if w == e:
        raise CustomGridError(
            "The area of use's west and east bounds must differ.", code="bad_area", field="area_west_deg"
        )
    return w, s, e, n


@lru_cache(maxsize=256)
def build_custom_grid(defn: CustomGridDefinition) -> GridCRS:
    """Build the grid with PROJ and check that it works; a :class:`GridCRS` ready for every grid function.

    The check: the projection is built on the frame's datum, the middle of the area of use goes
    forward and back through it to 1 µm, and PROJ's point scale factor there is finite and the
    same in every direction (the grid is conformal).

    Raises
    ------
    CustomGridError
        With ``code`` and ``field``: a parameter missing or out of range, an unknown method or
        unit, a frame that is not a geographic 3D CRS, or a projection PROJ refuses.
    """
    import pyproj
    from pyproj.crs import ProjectedCRS
    from pyproj.crs.coordinate_operation import LambertConformalConic1SPConversion, TransverseMercatorConversion
    from pyproj.crs.coordinate_system import Cartesian2DCS
    from pyproj.crs.enums import Cartesian2DCSAxis

    from registry.geodesy.frames import FrameTransformError, frame_info

    code = (defn.code or "").strip()
    if not code or len(code) > CODE_MAX_LENGTH:
        raise CustomGridError(f"A grid code is 1–{CODE_MAX_LENGTH} characters.", code="invalid_code", field="code")
    try:
        frame = frame_info(int(defn.frame_epsg))
    except (FrameTransformError, TypeError, ValueError) as exc:
        raise CustomGridError(str(exc), code="invalid_frame", field="frame_epsg") from exc
    area = _check_area(defn)
    lat0, lon0, k0, fe, fn = projection_parameters(defn)
    base = pyproj.CRS.from_epsg(frame.epsg).to_2d()
    conv: pyproj.crs.CoordinateOperation | None
    try:
        if defn.method in ("tm", "utm_scaled"):
            conv = TransverseMercatorConversion(
                latitude_natural_origin=lat0,
                longitude_natural_origin=lon0,
                false_easting=fe,
                false_northing=fn,
                scale_factor_natural_origin=k0,
            )
        elif defn.method == "lcc_1sp":
            conv = LambertConformalConic1SPConversion(
                latitude_natural_origin=lat0,
                longitude_natural_origin=lon0,
                false_easting=fe,
                false_northing=fn,
                scale_factor_natural_origin=k0,
            )
        else:
            conv = pyproj.CRS.from_proj4(
                f"+proj=sterea +lat_0={lat0!r} +lon_0={lon0!r} +k={k0!r} +x_0={fe!r} +y_0={fn!r} "
                f"{_ellipsoid_proj(frame.epsg)} +units=m"
            ).coordinate_operation
        axis = {
            "metre": Cartesian2DCSAxis.EASTING_NORTHING,
            "foot": Cartesian2DCSAxis.EASTING_NORTHING_FT,
            "US survey foot": Cartesian2DCSAxis.EASTING_NORTHING_US_FT,
        }[defn.unit]
        crs = ProjectedCRS(
            conversion=conv, geodetic_crs=base, name=defn.name or code, cartesian_cs=Cartesian2DCS(axis=axis)
        )
        fwd = pyproj.Transformer.from_crs(base, crs, always_xy=True, allow_ballpark=False)
        w, s, e, n = area
        mid_lat = (s + n) / 2.0
        mid_lon = (w + e) / 2.0 if w <= e else ((w + e + 360.0) / 2.0 + 180.0) % 360.0 - 180.0
        x, y = fwd.transform(mid_lon, mid_lat, errcheck=True)
        lon_b, lat_b = fwd.transform(x, y, direction="INVERSE", errcheck=True)
        factors = pyproj.Proj(crs).get_factors(mid_lon, mid_lat, errcheck=True)
    except (pyproj.exceptions.ProjError, pyproj.exceptions.CRSError) as exc:
        raise CustomGridError(f"PROJ cannot build this grid: {exc}", code="proj_refused", field="method") from exc
    if not all(math.isfinite(v) for v in (x, y, lon_b, lat_b, factors.meridional_scale, factors.parallel_scale)):
        raise CustomGridError(
            "The middle of the area of use falls outside this projection's domain.", code="proj_refused", field="method"
        )
    back_m = math.hypot((lon_b - mid_lon) * math.cos(math.radians(mid_lat)), lat_b - mid_lat) * 111_320.0
    if back_m > 1e-6 or abs(factors.meridional_scale - factors.parallel_scale) > 1e-9:
        raise CustomGridError(
            "PROJ's round trip through this grid does not close (or the grid is not conformal).",
            code="proj_refused",
            field="method",
        )
    label, to_m, _legacy = UNITS[defn.unit]
    name = defn.name or code
    return GridCRS(
        crs=crs,
        epsg=None,
        name=name,
        unit_to_m=float(np.float64(to_m)),
        code=code,
        area=area,
        area_name=f"stated with the custom grid {code}",
        unit_name=defn.unit,
    )
