"""One point, every form: geodetic, ECEF, grid with factors, orthometric height, in a target frame and epoch.

Pure module (no Django). This is the single function behind the ``convert_point`` command, the
conversion page and ``/api/convert/`` (through ``registry.selectors.conversion``, which supplies the
office's geoid model and assumed rate from settings). It composes the other geodesy modules and
adds no formula of its own; see their docstrings for sources:
:mod:`registry.geodesy.conversions`, :mod:`~registry.geodesy.frames`, :mod:`~registry.geodesy.grid`,
:mod:`~registry.geodesy.heights`, :mod:`~registry.geodesy.dms`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from registry.geodesy import dms as _dms
from registry.geodesy import frames as _frames
from registry.geodesy import grid as _grid
from registry.geodesy import heights as _heights
from registry.geodesy.conversions import ecef_to_geodetic, geodetic_to_ecef

__all__ = ["ConversionError", "PointConversion", "convert_point", "display_rows", "CAUTIONS", "JSON_KEYS"]

#: Keys of the JSON form (command ``--json`` and the API), in order.
JSON_KEYS = (
    "lat_deg",
    "lon_deg",
    "h_m",
    "x_m",
    "y_m",
    "z_m",
    "easting_m",
    "northing_m",
    "grid_crs",
    "scale_factor",
    "convergence_deg",
    "elevation_factor",
    "combined_factor",
    "orthometric_height_m",
    "geoid_model",
    "frame",
    "epoch",
)

CAUTIONS = (
    "Computed values, not a survey: verify control in the field (check shots on other trusted marks) before staking "
    "or setting out from them.",
    "Local codes, agency specifications and licensed practice govern; a licensed surveyor decides fitness for purpose.",
)


class ConversionError(ValueError):
    """Bad input or an impossible conversion; ``code`` is stable, ``field`` names the input at fault."""

    def __init__(self, message: str, *, code: str, field: str | None = None):
        super().__init__(message)
        self.code = code
        self.field = field


@dataclass
class PointConversion:
    """The converted point. Coordinates are in ``frame`` at ``epoch_yr``; grid values may be None."""

    frame: _frames.FrameInfo
    epoch_yr: float
    lat_deg: float
    lon_deg: float
    h_m: float
    x_m: float
    y_m: float
    z_m: float
    grid: _grid.GridCRS | None
    easting_m: float | None
    northing_m: float | None
    scale_factor: float | None
    convergence_deg: float | None
    radius_m: float
    elevation_factor: float
    combined_factor: float | None
    geoid: _heights.GeoidModel | None
    geoid_height_m: float | None
    orthometric_height_m: float | None
    added_sigma_m: float
    source_frame: _frames.FrameInfo
    source_epoch_yr: float
    input_form: str
    steps: list[_frames.Step] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)
    #: Ellipsoidal height in the geoid model's frame (None: no orthometric height), and the steps
    #: that brought it there (empty when the point is already in that frame).
    h_geoid_frame_m: float | None = None
    geoid_steps: list[_frames.Step] = field(default_factory=list)
    #: Plate motion applied for the epoch change: the model plate(s) and how chosen ("" = none).
    plate_codes: tuple[str, ...] = ()
    plate_rule: str = ""

    @property
    def plate_json(self) -> dict | None:
        if not self.plate_codes:
            return None
        return {"codes": sorted(set(self.plate_codes)), "chosen_by": self.plate_rule, "model": "ITRF2020-PMM"}

    def native_grid_json(self) -> dict | None:
        if self.grid is None or self.easting_m is None:
            return None
        return _grid.native_units(self.easting_m, self.northing_m, grid=self.grid)

    def as_json(self) -> dict:
        """The JSON form, numbers UNROUNDED (full double precision; rounding belongs to pages and documents)."""

        def r(v):
            return None if v is None else float(v)

        grid = None
        if self.grid is not None:
            grid = self.grid.as_dict()
        geoid = None
        if self.geoid is not None and self.orthometric_height_m is not None:
            geoid = {
                **self.geoid.as_dict(),
                "geoid_height_m": r(self.geoid_height_m),
                "h_in_model_frame_m": r(self.h_geoid_frame_m),
                "frame_change": [st.as_dict() for st in self.geoid_steps],
            }
        return {
            "lat_deg": r(self.lat_deg),
            "lon_deg": r(self.lon_deg),
            "h_m": r(self.h_m),
            "x_m": r(self.x_m),
            "y_m": r(self.y_m),
            "z_m": r(self.z_m),
            "easting_m": r(self.easting_m),
            "northing_m": r(self.northing_m),
            "grid_crs": grid,
            "scale_factor": r(self.scale_factor),
            "convergence_deg": r(self.convergence_deg),
            "elevation_factor": r(self.elevation_factor),
            "combined_factor": r(self.combined_factor),
            "orthometric_height_m": r(self.orthometric_height_m),
            "geoid_model": geoid,
            "frame": {"epsg": self.frame.epsg, "name": self.frame.name, "kind": self.frame.kind},
            "epoch": float(self.epoch_yr),
            # Beyond the 17 keys: how the numbers were obtained (shown to the user).
            "grid_native": self.native_grid_json(),
            "plate": self.plate_json,
            "added_sigma_mm": float(self.added_sigma_m * 1000.0),
            "chain": [s.as_dict() for s in self.steps],
            "warnings": list(self.warnings),
            "cautions": list(CAUTIONS),
        }


def _finite(value, name: str, field_name: str) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError) as exc:
        raise ConversionError(
            f"{name} must be a number, got {value!r}.", code="not_a_number", field=field_name
        ) from exc
    if not math.isfinite(v):
        raise ConversionError(f"{name} must be a finite number.", code="not_a_number", field=field_name)
    return v


def _angle(value, kind: str, field_name: str) -> float:
    if isinstance(value, int | float | np.floating):
        v = _finite(value, "Latitude" if kind == "lat" else "Longitude", field_name)
        if abs(v) > (90.0 if kind == "lat" else 180.0):
            raise ConversionError(
                f"{'Latitude' if kind == 'lat' else 'Longitude'} must be within ±{90 if kind == 'lat' else 180}°.",
                code="out_of_range",
                field=field_name,
            )
        return v
    try:
        return _dms.parse_angle(str(value), kind=kind)
    except _dms.AngleParseError as exc:
        raise ConversionError(str(exc), code=exc.code, field=field_name) from exc


def _epsg(value, field_name: str) -> int:
    text = str(value).strip().upper().removeprefix("EPSG:")
    if not text.isdigit():
        raise ConversionError(f"An EPSG code (a number) is expected, got {value!r}.", code="bad_epsg", field=field_name)
    return int(text)


def convert_point(
    *,
    frame_epsg,
    epoch_yr,
    lat=None,
    lon=None,
    h_m=None,
    xyz_m=None,
    en_m=None,
    grid_in=None,
    to_frame_epsg=None,
    to_epoch_yr=None,
    grid="utm",
    grid_explicit: bool = False,
    geoid: _heights.GeoidModel | None = None,
    assumed_rate_mm_yr: float = _frames.DEFAULT_ASSUMED_RATE_MM_YR,
    velocity_enu_m_yr=None,
    plate: str | None = None,
    plate_explicit: bool = False,
    assumed_rate_plate_fixed_mm_yr: float | None = None,
) -> PointConversion:
    """Convert one point given in one of three forms to every form, in a target frame and epoch.

    Parameters
    ----------
    frame_epsg, epoch_yr
        The input's frame (EPSG code of a geographic 3D CRS) and coordinate epoch (decimal year).
    lat, lon, h_m
        Geodetic input: latitude/longitude as numbers (degrees) or strings (decimal or DMS, with
        sign or hemisphere), ellipsoidal height in metres. ``h_m`` is also required with ``en_m``.
    xyz_m
        ECEF input (X, Y, Z) in metres, in the frame's geocentric form (same datum and ellipsoid).
    en_m, grid_in
        Grid input: (easting, northing) in metres on projected CRS ``grid_in`` (EPSG, or a ready
        :class:`registry.geodesy.grid.GridCRS` such as a custom grid), whose datum must be the input
        frame's.
    to_frame_epsg, to_epoch_yr
        Target frame and epoch (default: the input's).
    grid
        Output grid: an EPSG code of a projected CRS on the target frame's datum, "utm", or a
        :class:`registry.geodesy.grid.GridCRS` (a custom grid). Points outside the grid's area of
        use are converted with a warning.
        ``grid_explicit`` says the user asked for it (then a grid failure is an error; otherwise
        the grid part is left empty with a warning).
    geoid
        Geoid model for the orthometric height (None: no orthometric height). The height is first
        brought into the model's frame at the target epoch (see
        :func:`registry.geodesy.heights.orthometric_from_ellipsoidal`).
    assumed_rate_mm_yr, assumed_rate_plate_fixed_mm_yr, velocity_enu_m_yr, plate, plate_explicit
        See :func:`registry.geodesy.frames.transform_position` (``plate``: "AUTO" or the ITRF2020
        plate motion model's plate for epoch changes in a dynamic frame without a velocity;
        ``velocity_enu_m_yr``: the point's own velocity in the input frame, m/yr east, north, up).

    Raises
    ------
    ConversionError
        With ``code`` and ``field`` (for forms and the API).

    Examples
    --------
    >>> c = convert_point(frame_epsg=6319, epoch_yr=2010.0, lat="45 12 00 N", lon="110 36 00 W", h_m=1500.0)
    >>> c.grid.epsg, round(c.easting_m, 3), round(c.scale_factor, 8)
    (6341, 531416.247, 0.99961214)
    """
    src_epsg = _epsg(frame_epsg, "frame")
    dst_epsg = src_epsg if to_frame_epsg in (None, "") else _epsg(to_frame_epsg, "to_frame")
    t1 = _finite(epoch_yr, "Epoch", "epoch")
    t2 = t1 if to_epoch_yr in (None, "") else _finite(to_epoch_yr, "Target epoch", "to_epoch")
    try:
        src = _frames.frame_info(src_epsg)
    except _frames.FrameTransformError as exc:
        raise ConversionError(str(exc), code=exc.code, field="frame") from exc
    try:
        _frames.frame_info(dst_epsg)
    except _frames.FrameTransformError as exc:
        raise ConversionError(str(exc), code=exc.code, field="to_frame") from exc

    given = [
        name
        for name, v in (("geodetic", lat if lat is not None else lon), ("ecef", xyz_m), ("grid", en_m))
        if v is not None
    ]
    if len(given) != 1:
        raise ConversionError(
            "Give exactly one input form: latitude/longitude/height, ECEF X/Y/Z, or easting/northing with its grid.",
            code="one_input_form",
            field="input",
        )
    form = given[0]
    if form == "geodetic":
        if lat is None or lon is None or h_m is None:
            raise ConversionError(
                "Latitude, longitude and ellipsoidal height are all needed.", code="incomplete", field="input"
            )
        lat_deg = _angle(lat, "lat", "lat")
        lon_deg = _angle(lon, "lon", "lon")
        h = _finite(h_m, "Ellipsoidal height", "h")
    elif form == "ecef":
        try:
            x, y, z = (_finite(v, "ECEF coordinate", "xyz") for v in xyz_m)
        except ValueError as exc:
            if isinstance(exc, ConversionError):
                raise
            raise ConversionError("ECEF input needs three numbers X Y Z (m).", code="incomplete", field="xyz") from exc
        if not 6.0e6 <= math.sqrt(x * x + y * y + z * z) <= 6.5e6:
            raise ConversionError(
                "X, Y, Z (m) must describe a point near the Earth's surface (6 000–6 500 km from the centre).",
                code="out_of_range",
                field="xyz",
            )
        la, lo, hh = ecef_to_geodetic(x, y, z, ellipsoid=src.ellipsoid)
        lat_deg, lon_deg, h = float(la), float(lo), float(hh)
    else:
        if grid_in in (None, ""):
            raise ConversionError(
                "Easting/northing input needs the grid it is on (an EPSG code).", code="incomplete", field="grid_in"
            )
        if h_m is None:
            raise ConversionError(
                "Easting/northing input also needs the ellipsoidal height (m): it is used for ECEF, frame changes "
                "and the elevation factor.",
                code="incomplete",
                field="h",
            )
        try:
            e, n = (_finite(v, "Easting/northing", "en") for v in en_m)
        except ValueError as exc:
            if isinstance(exc, ConversionError):
                raise
            raise ConversionError("Grid input needs two numbers E N (m).", code="incomplete", field="en") from exc
        h = _finite(h_m, "Ellipsoidal height", "h")
        try:
            gin = grid_in if isinstance(grid_in, _grid.GridCRS) else _epsg(grid_in, "grid_in")
            la, lo = _grid.from_grid(e, n, grid=gin, frame_epsg=src_epsg)
        except _grid.GridError as exc:
            raise ConversionError(str(exc), code=exc.code, field="grid_in") from exc
        lat_deg, lon_deg = float(la), float(lo)
    if not -1000.0 <= h <= 10000.0:
        raise ConversionError(
            "Ellipsoidal height must be between −1000 m and 10 000 m.", code="out_of_range", field="h"
        )

    try:
        moved = _frames.transform_position(
            lat_deg,
            lon_deg,
            h,
            from_epsg=src_epsg,
            from_epoch_yr=t1,
            to_epsg=dst_epsg,
            to_epoch_yr=t2,
            velocity_enu_m_yr=velocity_enu_m_yr,
            assumed_rate_mm_yr=assumed_rate_mm_yr,
            assumed_rate_plate_fixed_mm_yr=assumed_rate_plate_fixed_mm_yr,
            plate=plate,
            plate_explicit=plate_explicit,
        )
    except _frames.FrameTransformError as exc:
        fld = {
            "bad_epoch": "epoch",
            "bad_velocity": "velocity",
            "unknown_plate": "plate",
            "plate_not_in_model": "plate",
            "outside_office_plate": "plate",
        }.get(exc.code, "to_frame")
        raise ConversionError(str(exc), code=exc.code, field=fld) from exc
    dst = moved.frame
    lat2, lon2, h2 = float(moved.lat_deg), float(moved.lon_deg), float(moved.h_m)
    x2, y2, z2 = (float(v) for v in geodetic_to_ecef(lat2, lon2, h2, ellipsoid=dst.ellipsoid))
    warnings = list(moved.warnings)

    grid_crs = easting = northing = k = gamma = cf = None
    if grid not in (None, ""):
        try:
            g = _grid.to_grid(lat2, lon2, frame_epsg=dst.epsg, grid=grid)
        except _grid.GridError as exc:
            if grid_explicit:
                raise ConversionError(str(exc), code=exc.code, field="grid") from exc
            warnings.append(f"No grid coordinates: {exc}")
        else:
            grid_crs, easting, northing = g.grid, float(g.easting_m), float(g.northing_m)
            k, gamma = float(g.scale_factor), float(g.convergence_deg)
            warnings.extend(g.warnings)
    radius = float(_grid.radius_gaussian_m(lat2, dst.ellipsoid))
    ef = float(_grid.elevation_factor(h2, radius_m=radius))
    if k is not None:
        cf = float(_grid.combined_factor(k, ef))

    n_geoid = ortho = h_geoid = None
    geoid_steps: list[_frames.Step] = []
    if geoid is not None:
        try:
            oh = _heights.orthometric_from_ellipsoidal(
                lat2, lon2, h2, frame_epsg=dst.epsg, epoch_yr=moved.epoch_yr, model=geoid
            )
        except _heights.HeightError as exc:
            warnings.append(f"No orthometric height: {exc}")
        else:
            n_geoid = float(oh.geoid_height_m)
            ortho = float(oh.orthometric_height_m)
            h_geoid = float(oh.h_model_frame_m)
            geoid_steps = list(oh.steps)
            if geoid.approximate:
                warnings.append(f"Orthometric height from {geoid.label}: use an office geoid model for survey work.")
    else:
        warnings.append("No geoid model is installed: no orthometric height.")

    sig = moved.added_sigma_enu_m
    added = float(np.max([np.max(s) for s in sig])) if sig else 0.0
    return PointConversion(
        frame=dst,
        epoch_yr=moved.epoch_yr,
        lat_deg=lat2,
        lon_deg=lon2,
        h_m=h2,
        x_m=x2,
        y_m=y2,
        z_m=z2,
        grid=grid_crs,
        easting_m=easting,
        northing_m=northing,
        scale_factor=k,
        convergence_deg=gamma,
        radius_m=radius,
        elevation_factor=ef,
        combined_factor=cf,
        geoid=geoid,
        geoid_height_m=n_geoid,
        orthometric_height_m=ortho,
        added_sigma_m=added,
        source_frame=src,
        source_epoch_yr=t1,
        input_form=form,
        steps=list(moved.steps),
        warnings=warnings,
        h_geoid_frame_m=h_geoid,
        geoid_steps=geoid_steps,
        plate_codes=tuple(moved.plate_codes),
        plate_rule=moved.plate_rule,
    )


def _accuracy_text(step: _frames.Step) -> str:
    if step.kind in ("hold", "plate_motion"):
        assert step.accuracy_m is not None  # these steps always state the σ they add
        added = f"σ added {step.accuracy_m * 1000:.1f} mm per axis"
        return added if step.kind == "hold" else f"{added} for residual motion"
    if step.accuracy_m is None:
        return "accuracy not stated"
    if step.accuracy_m == 0.0:
        return "EPSG accuracy 0 m: exact by definition"
    return f"stated accuracy {step.accuracy_m * 1000:.0f} mm"


def display_rows(c: PointConversion) -> dict:
    """Labelled, formatted values for the command's text output and the page (same strings in both).

    Returns a dict with ``rows`` (label, value, note) and ``chain``, ``warnings``, ``cautions`` lists.
    """
    fr = c.frame
    rows: list[tuple[str, str, str]] = [
        ("Frame", fr.label, fr.kind),
        ("Coordinate epoch", _frames.format_epoch(c.epoch_yr), "decimal year (calendar date)"),
        ("Latitude", _dms.format_lat(c.lat_deg, decimals=5), f"{c.lat_deg:.9f}°"),
        ("Longitude", _dms.format_lon(c.lon_deg, decimals=5), f"{c.lon_deg:.9f}°"),
        ("Ellipsoidal height h", f"{c.h_m:.3f} m", f"on {fr.ellipsoid.name}"),
        ("ECEF X", f"{c.x_m:.4f} m", f"{fr.name} geocentric"),
        ("ECEF Y", f"{c.y_m:.4f} m", ""),
        ("ECEF Z", f"{c.z_m:.4f} m", ""),
    ]
    if c.grid is not None:
        native = c.native_grid_json()
        feet_e = feet_n = ""
        if native:
            legacy = " (legacy)"
            mark_ft = " — the grid's unit" if native["grid_unit"] == "international foot" else ""
            mark_us = " — the grid's unit" if native["grid_unit"] == "US survey foot" else ""
            feet_e = (
                f"{native['easting_ft']:.3f} ft{mark_ft}; {native['easting_us_ft']:.3f} US survey ft{legacy}{mark_us}"
            )
            feet_n = (
                f"{native['northing_ft']:.3f} ft{mark_ft}; {native['northing_us_ft']:.3f} US survey ft{legacy}{mark_us}"
            )
        assert c.convergence_deg is not None  # set whenever a grid is
        rows += [
            ("Grid", c.grid.label, ""),
            ("Easting", f"{c.easting_m:.3f} m", feet_e),
            ("Northing", f"{c.northing_m:.3f} m", feet_n),
            ("Point scale factor k", f"{c.scale_factor:.8f}", ""),
            (
                "Convergence γ",
                _dms.format_signed_dms(c.convergence_deg, decimals=2),
                "γ from true north to grid north, clockwise; grid azimuth = geodetic azimuth − γ",
            ),
        ]
    rows.append(
        (
            "Elevation factor",
            f"{c.elevation_factor:.8f}",
            f"R/(R+h), h ellipsoidal, R = √(ρν) = {c.radius_m:.3f} m",
        )
    )
    if c.combined_factor is not None:
        rows.append(("Combined factor", f"{c.combined_factor:.8f}", "k × elevation factor; grid = ground × factor"))
    if c.orthometric_height_m is not None:
        assert c.geoid is not None  # an orthometric height comes from a geoid model
        if c.geoid_steps:
            model_frame = c.geoid_steps[-1].to_label
            rows.append(
                (
                    "h in the geoid model's frame",
                    f"{c.h_geoid_frame_m:.3f} m",
                    f"{model_frame} at {c.epoch_yr:.3f}: {c.geoid.name} applies to heights in that frame",
                )
            )
        rows += [
            ("Geoid height N", f"{c.geoid_height_m:.3f} m", c.geoid.label),
            ("Orthometric height H", f"{c.orthometric_height_m:.3f} m", f"H = h − N, {c.geoid.label}"),
        ]
    if c.added_sigma_m > 0:
        rows.append(("Added uncertainty", f"{c.added_sigma_m * 1000:.1f} mm", "per axis, from the epoch change"))
    chain = [
        f"{s.from_label} @ {s.from_epoch_yr:.3f} → {s.to_label} @ {s.to_epoch_yr:.3f}: {s.description} ({_accuracy_text(s)})"
        for s in c.steps
    ]
    if not chain:
        chain = ["none (same frame and epoch)"]
    chain += [
        f"for the orthometric height only: {s.from_label} @ {s.from_epoch_yr:.3f} → {s.to_label} "
        f"@ {s.to_epoch_yr:.3f}: {s.description} ({_accuracy_text(s)})"
        for s in c.geoid_steps
    ]
    source = (
        f"{c.source_frame.label} at {_frames.format_epoch(c.source_epoch_yr)}, "
        f"given as {dict(geodetic='latitude/longitude/height', ecef='ECEF X/Y/Z', grid='easting/northing')[c.input_form]}"
    )
    return {"rows": rows, "source": source, "chain": chain, "warnings": list(c.warnings), "cautions": list(CAUTIONS)}
