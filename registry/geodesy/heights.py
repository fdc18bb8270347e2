"""Orthometric and ellipsoidal heights with a geoid model: H = h − N.

Pure module (no Django). The geoid undulation N is read from a grid file through PROJ's
``vgridshift`` operation (bilinear interpolation in the grid); the caller passes the grid (a file
name PROJ can find on its search path, or an absolute path) and the model's name. Choosing the
office's configured grid is done on the Django side (``registry.selectors.conversion``).

Sources
-------
- h = H + N (ellipsoidal height = orthometric height + geoid height): e.g. ICSM *GDA Technical
  Manual* v2.3, Flinders Peak: 347.200 + 3.748 = 350.948 m (checked in the tests).
- PROJ ``vgridshift``: Z_out = Z_in + multiplier × N(φ, λ) (PROJ documentation, "vgridshift");
  here multiplier = 1 applied to Z_in = 0 yields N itself.
- EGM96 (``egm96_15.gtx``, 15′ grid, shipped by Debian's ``proj-data``): F. G. Lemoine et al.,
  *The Development of the Joint NASA GSFC and NIMA Geopotential Model EGM96*, NASA/TP-1998-206861.
  A global model; its N can be off by decimetres to metres from a national gravimetric geoid, so
  every height computed with it is labelled approximate and is NOT survey grade.

Geoid models are tied to a frame
--------------------------------
N is the separation between a height surface and the ellipsoid *of one particular frame*: a global
model such as EGM96 gives N above the WGS 84 ellipsoid as realised by WGS 84 itself, which since
its G1150 realisation is aligned with the ITRF to about a centimetre (NGA, *World Geodetic System
1984*, NGA.STND.0036, 2014 [from memory]); a national *hybrid* model (e.g. a model fitted to
levelling on a plate-fixed frame) gives N above that frame's ellipsoid *as that frame places it*.
The ellipsoidal heights of two frames differ by up to metres (NAD83(2011) and ITRF2014 by about
−0.6 m in the Rocky Mountains and −1.5 m in Florida, through the frames' origin offset), so
applying a model to heights of another frame gives a wrong orthometric height. Each
:class:`GeoidModel` therefore states ``frame_epsg``, the geographic 3D frame its ellipsoidal heights
are in, and :func:`orthometric_from_ellipsoidal` first transforms a height given in another frame to
that frame (at the height's coordinate epoch, through :mod:`registry.geodesy.frames`), or refuses
when the model's frame is not stated or the transformation is not available. EGM96's frame is
stated here as ITRF2014 (EPSG:7912), the ITRF realisation that current WGS 84 is aligned with;
the centimetre of that alignment is far below EGM96's own error.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np

__all__ = [
    "EGM96_FRAME_EPSG",
    "OrthometricHeight",
    "orthometric_from_ellipsoidal",
    "HeightError",
    "GeoidModel",
    "EGM96_FALLBACK",
    "egm96_fallback",
    "EGM96_LABEL",
    "geoid_undulation_m",
    "orthometric_height_m",
    "ellipsoidal_height_m",
]

#: Label shown wherever the EGM96 fallback is used (pages, commands, API, PDFs).
EGM96_LABEL = "EGM96 (global model, approximate — not survey grade)"


class HeightError(ValueError):
    """N could not be obtained (grid missing, point outside the grid); ``code`` says why."""

    def __init__(self, message: str, *, code: str):
        super().__init__(message)
        self.code = code


#: The frame EGM96's ellipsoidal heights are taken in: ITRF2014, which WGS 84 (G1762, G2139) is
#: aligned with to about a centimetre (see the module docstring).
EGM96_FRAME_EPSG = 7912


@dataclass(frozen=True)
class GeoidModel:
    """A geoid grid: ``grid`` is what PROJ opens (file name on its search path or absolute path).

    ``frame_epsg``: the geographic 3D frame whose ellipsoidal heights the model's N refers to
    (None: not stated; then no orthometric height is computed from it).
    """

    name: str
    grid: str
    approximate: bool = False
    vertical_datum_epsg: int | None = None
    frame_epsg: int | None = None
    frame_note: str = ""

    @property
    def label(self) -> str:
        if self.approximate:
            return (
                EGM96_LABEL
                if self.name.upper().startswith("EGM96")
                else f"{self.name} (approximate — not survey grade)"
            )
        return self.name

    def as_dict(self) -> dict:
        return {
            "name": self.name,
            "label": self.label,
            "grid": os.path.basename(self.grid),
            "approximate": self.approximate,
            "vertical_datum_epsg": self.vertical_datum_epsg,
            "frame_epsg": self.frame_epsg,
            "frame_note": self.frame_note,
        }


EGM96_FRAME_NOTE = (
    "EGM96 gives N above the WGS 84 ellipsoid as WGS 84 places it; current WGS 84 is aligned with the ITRF "
    "to about a centimetre, so heights are taken in ITRF2014 (EPSG:7912) for it."
)
#: The Debian proj-data EGM96 15′ grid (by file name); EPSG:5773 is the EGM96 height datum.
EGM96_FALLBACK = GeoidModel(
    name="EGM96",
    grid="egm96_15.gtx",
    approximate=True,
    vertical_datum_epsg=5773,
    frame_epsg=EGM96_FRAME_EPSG,
    frame_note=EGM96_FRAME_NOTE,
)


def egm96_fallback(*, dirs=()) -> GeoidModel:
    """The EGM96 fallback with its grid resolved to an absolute path where one is found.

    Looks in ``dirs``, PROJ's search path and Debian's ``/usr/share/proj``.
    """
    from registry.geodesy.projsetup import find_grid

    path = find_grid(EGM96_FALLBACK.grid, dirs=dirs)
    if path is None:
        return EGM96_FALLBACK
    return GeoidModel(
        name="EGM96",
        grid=path,
        approximate=True,
        vertical_datum_epsg=5773,
        frame_epsg=EGM96_FRAME_EPSG,
        frame_note=EGM96_FRAME_NOTE,
    )


@lru_cache(maxsize=32)
def _geoid_operation(grid: str):
    import pyproj
    import pyproj.network

    if pyproj.network.is_network_enabled():
        pyproj.network.set_network_enabled(False)
    if any(c.isspace() for c in grid) or "+" in grid:
        raise HeightError(f"Geoid grid name {grid!r} may not contain spaces or '+'.", code="bad_grid_name")
    pipeline = (
        "+proj=pipeline +step +proj=unitconvert +xy_in=deg +xy_out=rad "
        f"+step +proj=vgridshift +grids={grid} +multiplier=1 "
        "+step +proj=unitconvert +xy_in=rad +xy_out=deg"
    )
    try:
        return pyproj.Transformer.from_pipeline(pipeline)
    except pyproj.exceptions.ProjError as exc:
        raise HeightError(
            f"Geoid grid '{grid}' was not found on PROJ's search path (or is not a valid grid). "
            "Install it into the registry's grid folder.",
            code="grid_missing",
        ) from exc


def geoid_undulation_m(lat_deg, lon_deg, *, model: GeoidModel):
    """Geoid height N (metres) above the ellipsoid at the points, from ``model``'s grid.

    Raises
    ------
    HeightError
        ``grid_missing`` if PROJ cannot open the grid, ``outside_grid`` where the grid has no value.

    Examples
    --------
    >>> round(float(geoid_undulation_m(45.2, -110.6, model=egm96_fallback())), 2)
    -8.54
    """
    import pyproj

    lat = np.asarray(lat_deg, dtype=float)
    lon = np.asarray(lon_deg, dtype=float)
    lat, lon = np.broadcast_arrays(lat, lon)
    if not (np.all(np.isfinite(lat)) and np.all(np.isfinite(lon))) or np.any(np.abs(lat) > 90):
        raise HeightError("Latitude and longitude must be finite, latitude within ±90°.", code="not_finite")
    shape = lat.shape
    op = _geoid_operation(model.grid)
    try:
        _, _, n = op.transform(lon.ravel(), lat.ravel(), np.zeros(lat.size), errcheck=True)
    except pyproj.exceptions.ProjError as exc:
        raise HeightError(f"Some points are outside the geoid grid {model.name}: {exc}", code="outside_grid") from exc
    n = np.asarray(n, dtype=float).reshape(shape)
    if not np.all(np.isfinite(n)) or np.any(np.abs(n) > 200.0):
        raise HeightError(f"Some points are outside the geoid grid {model.name}.", code="outside_grid")
    return n


def orthometric_height_m(h_m, n_m):
    """Orthometric height H = h − N (metres).

    >>> round(float(orthometric_height_m(350.948, 3.748)), 3)
    347.2
    """
    return np.asarray(h_m, dtype=float) - np.asarray(n_m, dtype=float)


def ellipsoidal_height_m(orthometric_m, n_m):
    """Ellipsoidal height h = H + N (metres).

    >>> round(float(ellipsoidal_height_m(744.986, 4.869)), 3)
    749.855
    """
    return np.asarray(orthometric_m, dtype=float) + np.asarray(n_m, dtype=float)


@dataclass
class OrthometricHeight:
    """H = h − N with the height first brought into the model's frame; ``steps``: that frame change."""

    orthometric_height_m: np.ndarray
    geoid_height_m: np.ndarray
    h_model_frame_m: np.ndarray
    model_frame_epsg: int
    steps: list = field(default_factory=list)


def orthometric_from_ellipsoidal(
    lat_deg, lon_deg, h_m, *, frame_epsg: int, epoch_yr: float, model: GeoidModel
) -> OrthometricHeight:
    """Orthometric height from an ellipsoidal height of frame ``frame_epsg`` at ``epoch_yr``.

    If ``frame_epsg`` is not the model's frame, the point is first transformed to the model's frame
    at ``epoch_yr`` (:func:`registry.geodesy.frames.change_frame`: PROJ's time-dependent
    transformations, no ballpark); N is read at the transformed latitude/longitude and subtracted
    from the transformed h.

    Raises
    ------
    HeightError
        ``geoid_frame_unknown`` when the model does not state its frame; ``geoid_frame_change`` when
        the height cannot be brought to that frame; and those of :func:`geoid_undulation_m`.

    Examples
    --------
    NAD83(2011) height in the demo district at 2010.0: EGM96 applies to ITRF2014 heights, which
    there are about 0.63 m lower.

    >>> r = orthometric_from_ellipsoidal(45.2, -110.6, 1500.0, frame_epsg=6319, epoch_yr=2010.0,
    ...                                  model=egm96_fallback())
    >>> round(float(r.h_model_frame_m) - 1500.0, 2), round(float(r.orthometric_height_m), 2)
    (-0.63, 1507.91)
    """
    from registry.geodesy import frames as _frames

    if model.frame_epsg is None:
        raise HeightError(
            f"The geoid model {model.name} does not state which frame its ellipsoidal heights are in, so it "
            "cannot be applied safely (heights of two frames differ by up to metres). The administrator states "
            "it with REGISTRY_GEOID_FRAME.",
            code="geoid_frame_unknown",
        )
    lat, lon, h = (np.asarray(v, dtype=float) for v in (lat_deg, lon_deg, h_m))
    steps = []
    if int(frame_epsg) != int(model.frame_epsg):
        try:
            lat, lon, h, step = _frames.change_frame(
                lat, lon, h, from_epsg=int(frame_epsg), to_epsg=int(model.frame_epsg), epoch_yr=epoch_yr
            )
        except _frames.FrameTransformError as exc:
            raise HeightError(
                f"The height is in EPSG:{frame_epsg} but the geoid model {model.name} applies to heights in "
                f"EPSG:{model.frame_epsg}, and the height cannot be transformed there: {exc}",
                code="geoid_frame_change",
            ) from exc
        steps.append(step)
    n = geoid_undulation_m(lat, lon, model=model)
    return OrthometricHeight(
        orthometric_height_m=orthometric_height_m(h, n),
        geoid_height_m=n,
        h_model_frame_m=np.asarray(h, dtype=float),
        model_frame_epsg=int(model.frame_epsg),
        steps=steps,
    )
