"""The optional basemap under the job map: ``<image>`` elements for XYZ tiles, loaded by the browser.

The server never fetches a tile; it only writes their addresses (from ``REGISTRY["BASEMAP_URL"]``,
a template with ``{z}``, ``{x}`` and ``{y}``) into the SVG. Tile numbering: see
:mod:`registry.geodesy.webmercator`.

Placement: each tile's four corners are projected (lon/lat → the map's UTM → SVG pixels) and the
image is drawn axis-aligned in the box whose left edge is the mean of its west corners, right edge
the mean of its east corners, and so on. Neighbouring tiles therefore share their edges exactly (no
seams), and each box is padded by ``OVERLAP_PX`` so the small jogs where four tiles meet leave no
pinholes. The images are NOT rotated by the meridian convergence (the angle between UTM grid north
and true north; up to 3°·sin φ at a UTM zone's edge, well under 1° near its central meridian), nor
corrected for the small scale difference between Mercator and UTM inside one tile: tile content can
sit a few pixels off. The basemap is for orientation only; a mark is never located from it.
"""

from __future__ import annotations

import html
from collections.abc import Callable
from dataclasses import dataclass
from urllib.parse import urlsplit

import numpy as np

from registry.geodesy.webmercator import MAX_ZOOM, lonlat_from_tile_xy, tile_xy_from_lonlat, zoom_for_tile_px

#: At most this many tiles in one map (the zoom goes down until the frame needs no more).
MAX_TILES = 64
#: Opacity of the basemap layer, so the coverage colours and symbols stay readable.
BASEMAP_OPACITY = 0.5
#: Each tile box is grown by this much on every side (px) so that tiles overlap slightly.
OVERLAP_PX = 0.5
PLACEHOLDERS = ("{z}", "{x}", "{y}")


def basemap_url_problems(url: str) -> list[str]:
    """What is wrong with a tile URL template (empty list: usable). An empty template is usable (no basemap).

    >>> basemap_url_problems("https://tiles.example.org/{z}/{x}/{y}.png")
    []
    >>> basemap_url_problems("ftp://tiles.example.org/{z}/{x}.png")
    ['the scheme must be https or http, not ftp', 'it lacks {y}']
    """
    url = (url or "").strip()
    if not url:
        return []
    problems = []
    parts = urlsplit(url)
    if parts.scheme.lower() not in ("https", "http"):
        problems.append(f"the scheme must be https or http, not {parts.scheme or 'none'}")
    elif not parts.netloc:
        problems.append("it names no host")
    if any(ch.isspace() for ch in url):
        problems.append("it contains white space")
    problems += [f"it lacks {p}" for p in PLACEHOLDERS if p not in url]
    return problems


def tile_href(template: str, zoom: int, x: int, y: int) -> str:
    """The address of tile (z, x, y), x wrapped onto 0 … 2**z − 1 (not escaped)."""
    n = 2**zoom
    return template.replace("{z}", str(zoom)).replace("{x}", str(x % n)).replace("{y}", str(y))


@dataclass
class BasemapLayer:
    svg: str
    zoom: int
    tiles: int
    host: str


def basemap_layer(
    template: str,
    *,
    to_px: Callable[[np.ndarray, np.ndarray], tuple[np.ndarray, np.ndarray]],
    outline_lon_deg: np.ndarray,
    outline_lat_deg: np.ndarray,
    ref_lon_deg: float,
    ref_lat_deg: float,
    px_per_m: float,
    width_px: float,
    height_px: float,
    max_tiles: int | None = None,
) -> BasemapLayer | None:
    """The tiles covering a drawing, as an SVG group (None when the template is empty or invalid).

    Parameters
    ----------
    template : str
        XYZ tile URL template (validated with :func:`basemap_url_problems`).
    to_px : callable
        (lon_deg, lat_deg) arrays (WGS 84 nominally, EPSG:4326) → (x_px, y_px) on the drawing.
    outline_lon_deg, outline_lat_deg : ndarray
        Points along the edge of the drawing (deg); the tiles cover their bounding box.
    ref_lon_deg, ref_lat_deg : float
        A point of the map (deg): longitudes are unwrapped around it, and the zoom is chosen there.
    px_per_m : float
        Drawing scale (pixels per metre on the ground).
    width_px, height_px : float
        Size of the drawing; tiles entirely outside it are left out.
    max_tiles : int, optional
        Cap on the number of tiles (default ``MAX_TILES``, read at call time).
    """
    max_tiles = MAX_TILES if max_tiles is None else max_tiles
    template = (template or "").strip()
    if not template or basemap_url_problems(template):
        return None
    lon = ref_lon_deg + (np.asarray(outline_lon_deg, dtype=float) - ref_lon_deg + 180.0) % 360.0 - 180.0
    lat = np.asarray(outline_lat_deg, dtype=float)
    zoom = zoom_for_tile_px(ref_lat_deg, px_per_m, max_zoom=MAX_ZOOM)
    while True:
        boxes = _tile_boxes(zoom, lon, lat, to_px, width_px, height_px)
        if len(boxes[0]) <= max_tiles or zoom == 0:
            break
        zoom -= 1
    tx, ty, left, top, right, bottom = boxes
    order = np.lexsort((tx, ty))  # row by row, west to east
    images = []
    for i in order[:max_tiles]:
        href = html.escape(tile_href(template, zoom, int(tx[i]), int(ty[i])), quote=True)
        images.append(
            f'<image href="{href}" x="{left[i]:.1f}" y="{top[i]:.1f}" width="{right[i] - left[i]:.1f}" '
            f'height="{bottom[i] - top[i]:.1f}" preserveAspectRatio="none" data-tile="{zoom}/{int(tx[i])}/{int(ty[i])}"/>'
        )
    svg = (
        f'<clipPath id="basemap-clip"><rect x="0" y="0" width="{width_px}" height="{height_px}"/></clipPath>'
        f'<g class="basemap" opacity="{BASEMAP_OPACITY}" clip-path="url(#basemap-clip)" aria-hidden="true">'
        + "".join(images)
        + "</g>"
    )
    return BasemapLayer(svg=svg, zoom=zoom, tiles=len(images), host=urlsplit(template).hostname or "")


def _tile_boxes(zoom, lon, lat, to_px, width_px, height_px):
    """Tile numbers and pixel boxes (left, top, right, bottom) of the tiles meeting the drawing."""
    fx, fy = tile_xy_from_lonlat(lon, lat, zoom)
    n = 2**zoom
    xs = np.arange(int(np.floor(fx.min())), int(np.floor(fx.max())) + 1)
    ys = np.arange(max(int(np.floor(fy.min())), 0), min(int(np.floor(fy.max())), n - 1) + 1)
    tx, ty = (a.ravel() for a in np.meshgrid(xs, ys))
    # Corners: north-west (x, y), north-east (x+1, y), south-west (x, y+1), south-east (x+1, y+1).
    px = {}
    for name, dx, dy in (("nw", 0, 0), ("ne", 1, 0), ("sw", 0, 1), ("se", 1, 1)):
        c_lon, c_lat = lonlat_from_tile_xy(tx + dx, ty + dy, zoom)
        px[name] = to_px(c_lon, c_lat)
    left = (px["nw"][0] + px["sw"][0]) / 2 - OVERLAP_PX
    right = (px["ne"][0] + px["se"][0]) / 2 + OVERLAP_PX
    top = (px["nw"][1] + px["ne"][1]) / 2 - OVERLAP_PX
    bottom = (px["sw"][1] + px["se"][1]) / 2 + OVERLAP_PX
    meets = (right > 0) & (left < width_px) & (bottom > 0) & (top < height_px)
    return tx[meets], ty[meets], left[meets], top[meets], right[meets], bottom[meets]
