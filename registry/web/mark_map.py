"""The map panel of the mark list and "marks near a point": marks by usability, on a plain background.

Two renderings of the same data:

* a server-drawn SVG (works without JavaScript, and is what a printout shows): marks in a local
  equirectangular projection about the centre of the drawing (x = Δλ·cos φ0, y = Δφ, on a sphere of
  the GRS80 mean radius — adequate for a panel a few kilometres to a few hundred kilometres across; the
  map is for orientation, never for locating a mark), with a graticule and a scale bar;
* the data for the interactive map (``registry/web/static/registry/markmap.js`` with Leaflet vendored
  from npm), embedded as a JSON data block (not a script: the strict CSP holds). With
  ``REGISTRY_BASEMAP_URL`` empty the interactive map draws on a plain background with a scale bar and a
  graticule; with it set, the tiles go underneath.

Usability is the one rule of :mod:`registry.services.usability`: a word first (the label, and the
symbol's shape: a filled circle for usable, a crossed ring for not for use), colour second.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

from django.conf import settings
from django.utils.html import escape

#: GRS80 mean radius R1 = (2a + b)/3, m (Moritz 1980, Geodetic Reference System 1980).
MEAN_RADIUS_M = 6_371_008.7714
WIDTH_PX, HEIGHT_PX, PAD_PX = 640, 380, 28
_NICE = (1, 2, 5)


@dataclass
class MapPoint:
    code: str
    lat_deg: float
    lon_deg: float
    usable: bool
    label: str
    reason: str = ""
    url: str = ""


@dataclass
class MarkMap:
    points: list[MapPoint]
    centre: tuple[float, float] | None = None  # a search point (lat, lon), drawn as a cross
    radius_m: float | None = None  # the search radius around it
    svg: str = ""
    data: dict[str, Any] = field(default_factory=dict)


#: Height of a graticule label (10 px type) and the width of one of its characters, generously.
LABEL_PX = 10
LABEL_CHAR_PX = 6.5
#: The same for a mark's code beside its symbol (11 px type).
CODE_CHAR_PX = 7.0


def label_width_px(text: str) -> float:
    """The width a graticule label takes at most (10 px sans-serif, about 0.55 em a character)."""
    return len(text) * LABEL_CHAR_PX


def nice_step(value: float) -> float:
    """The largest 1, 2 or 5 × 10ⁿ not above ``value`` (for scale bars and graticules).

    >>> nice_step(740.0), nice_step(0.0031)
    (500.0, 0.002)
    """
    if value <= 0 or not math.isfinite(value):
        raise ValueError("a positive finite value")
    exp = math.floor(math.log10(value))
    best = 10.0**exp
    for k in _NICE:
        if k * 10.0**exp <= value:
            best = k * 10.0**exp
    return float(f"{best:.12g}")


def _bounds(points: list[MapPoint], centre, radius_m) -> tuple[float, float, float, float]:
    lats = [p.lat_deg for p in points]
    lons = [p.lon_deg for p in points]
    if centre is not None:
        lats.append(centre[0])
        lons.append(centre[1])
        if radius_m:
            dlat = math.degrees(radius_m / MEAN_RADIUS_M)
            dlon = dlat / max(math.cos(math.radians(centre[0])), 0.01)
            lats += [centre[0] - dlat, centre[0] + dlat]
            lons += [centre[1] - dlon, centre[1] + dlon]
    south, north, west, east = min(lats), max(lats), min(lons), max(lons)
    # at least about 500 m across, so that one mark alone still gets a sensible scale
    min_deg = math.degrees(500.0 / MEAN_RADIUS_M)
    if north - south < min_deg:
        mid = (north + south) / 2
        south, north = mid - min_deg / 2, mid + min_deg / 2
    if east - west < min_deg:
        mid = (east + west) / 2
        west, east = mid - min_deg / 2, mid + min_deg / 2
    return south, north, west, east


def draw_svg(m: MarkMap) -> str:
    """The panel as inline SVG (presentation attributes only: no style attributes, CSP-safe)."""
    if not m.points and m.centre is None:
        return ""
    south, north, west, east = _bounds(m.points, m.centre, m.radius_m)
    lat0 = math.radians((south + north) / 2)
    coslat = max(math.cos(lat0), 0.01)
    span_x_m = math.radians(east - west) * coslat * MEAN_RADIUS_M
    span_y_m = math.radians(north - south) * MEAN_RADIUS_M
    inner_w, inner_h = WIDTH_PX - 2 * PAD_PX, HEIGHT_PX - 2 * PAD_PX
    px_per_m = min(inner_w / span_x_m, inner_h / span_y_m)
    cx_deg, cy_deg = (west + east) / 2, (south + north) / 2

    def xy(lat: float, lon: float) -> tuple[float, float]:
        x = WIDTH_PX / 2 + math.radians(lon - cx_deg) * coslat * MEAN_RADIUS_M * px_per_m
        y = HEIGHT_PX / 2 - math.radians(lat - cy_deg) * MEAN_RADIUS_M * px_per_m
        return round(x, 1), round(y, 1)

    out = [
        f'<svg class="markmap-svg" viewBox="0 0 {WIDTH_PX} {HEIGHT_PX}" role="img" '
        f'aria-labelledby="markmap-title" xmlns="http://www.w3.org/2000/svg">',
        f'<title id="markmap-title">Map of {len(m.points)} mark{"s" if len(m.points) != 1 else ""}: '
        "filled circles usable, crossed rings not for use</title>",
        f'<rect x="0" y="0" width="{WIDTH_PX}" height="{HEIGHT_PX}" fill="#f4f2ec"/>',
    ]
    # graticule: about four lines each way, at a nice step in degrees, labelled in degrees and minutes
    half_w_deg = (WIDTH_PX / 2) / (px_per_m * coslat * MEAN_RADIUS_M) * 180 / math.pi
    half_h_deg = (HEIGHT_PX / 2) / (px_per_m * MEAN_RADIUS_M) * 180 / math.pi
    step = nice_step(max(2 * half_h_deg, 2 * half_w_deg) / 4 * 60) / 60  # in minutes of arc, as degrees
    lat_line = math.floor((cy_deg - half_h_deg) / step) * step
    while lat_line <= cy_deg + half_h_deg:
        _, y = xy(lat_line, cx_deg)
        if 0 <= y <= HEIGHT_PX:
            out.append(
                f'<line class="grat" x1="0" y1="{y}" x2="{WIDTH_PX}" y2="{y}" stroke="#c9c4b8" stroke-width="0.8"/>'
            )
            # labelled only clear of the top edge and of the longitude labels' row along the bottom
            if LABEL_PX <= y - 3 <= HEIGHT_PX - 4 - LABEL_PX - 2:
                out.append(
                    f'<text class="grat-label" x="4" y="{y - 3}" font-size="10" fill="#5b6066">'
                    f"{_dm(lat_line, 'NS')}</text>"
                )
        lat_line += step
    lon_line = math.floor((cx_deg - half_w_deg) / step) * step
    while lon_line <= cx_deg + half_w_deg:
        x, _ = xy(cy_deg, lon_line)
        if 0 <= x <= WIDTH_PX:
            out.append(
                f'<line class="grat" x1="{x}" y1="0" x2="{x}" y2="{HEIGHT_PX}" stroke="#c9c4b8" stroke-width="0.8"/>'
            )
            text = _dm(lon_line, "EW")
            if x + 3 + label_width_px(text) <= WIDTH_PX:  # not run off the right edge
                out.append(
                    f'<text class="grat-label" x="{x + 3}" y="{HEIGHT_PX - 4}" font-size="10" fill="#5b6066">'
                    f"{text}</text>"
                )
        lon_line += step
    if m.centre is not None:
        x, y = xy(*m.centre)
        if m.radius_m:
            r = m.radius_m * px_per_m
            out.append(
                f'<circle cx="{x}" cy="{y}" r="{r:.1f}" fill="none" stroke="#24527a" stroke-width="1.2" '
                'stroke-dasharray="5 4"/>'
            )
        out.append(
            f'<path d="M{x - 7} {y}H{x + 7}M{x} {y - 7}V{y + 7}" stroke="#24527a" stroke-width="2"/>'
            f'<text x="{x + 9}" y="{y - 8}" font-size="11" fill="#24527a">search point</text>'
        )
    label_all = len(m.points) <= 25
    for p in m.points:
        x, y = xy(p.lat_deg, p.lon_deg)
        words = f"{p.code}: {p.label}" + (f" ({p.reason})" if p.reason else "")
        if p.usable:
            shape = f'<circle cx="{x}" cy="{y}" r="5" fill="#2f5d34" stroke="#fff" stroke-width="1.2"/>'
        else:
            shape = (
                f'<circle cx="{x}" cy="{y}" r="6" fill="#fff" stroke="#8b1d1d" stroke-width="2"/>'
                f'<path d="M{x - 4} {y - 4}L{x + 4} {y + 4}M{x - 4} {y + 4}L{x + 4} {y - 4}" stroke="#8b1d1d" '
                'stroke-width="1.6"/>'
            )
        label = ""
        if label_all:  # beside the symbol, on its left where the right would run off the map
            if x + 8 + len(p.code) * CODE_CHAR_PX <= WIDTH_PX:
                label = f'<text x="{x + 8}" y="{y + 4}" font-size="11" fill="#1d1f21">{escape(p.code)}</text>'
            else:
                label = (
                    f'<text x="{x - 8}" y="{y + 4}" font-size="11" text-anchor="end" fill="#1d1f21">'
                    f"{escape(p.code)}</text>"
                )
        link_open = f'<a href="{escape(p.url)}">' if p.url else ""
        link_close = "</a>" if p.url else ""
        out.append(f"{link_open}<g><title>{escape(words)}</title>{shape}{label}</g>{link_close}")
    # scale bar: a nice length about a fifth of the width, bottom right
    bar_m = nice_step(WIDTH_PX / 5 / px_per_m)
    bar_px = bar_m * px_per_m
    x1, y1 = WIDTH_PX - PAD_PX - bar_px, HEIGHT_PX - 22
    text = f"{bar_m / 1000:g} km" if bar_m >= 1000 else f"{bar_m:g} m"
    out.append(
        f'<g class="scalebar"><rect x="{x1 - 6:.1f}" y="{y1 - 16}" width="{bar_px + 12:.1f}" height="26" fill="#fff" '
        f'fill-opacity="0.85"/><path d="M{x1:.1f} {y1 - 4}V{y1 + 4}H{x1 + bar_px:.1f}V{y1 - 4}" fill="none" '
        f'stroke="#1d1f21" stroke-width="1.5"/><text x="{x1 + bar_px / 2:.1f}" y="{y1 - 5}" font-size="11" '
        f'text-anchor="middle" fill="#1d1f21">{text}</text></g>'
    )
    out.append(
        f'<path d="M{WIDTH_PX - 16} 34V12M{WIDTH_PX - 21} 19L{WIDTH_PX - 16} 12L{WIDTH_PX - 11} 19" stroke="#1d1f21" '
        f'fill="none" stroke-width="1.5"/><text x="{WIDTH_PX - 16}" y="46" font-size="11" text-anchor="middle" '
        'fill="#1d1f21">N</text>'
    )
    out.append("</svg>")
    return "".join(out)


def _dm(value_deg: float, hemispheres: str) -> str:
    hemi = hemispheres[0] if value_deg >= 0 else hemispheres[1]
    total_min = round(abs(value_deg) * 60, 3)
    d, mnt = divmod(total_min, 60)
    return f"{int(d)}°{mnt:g}′ {hemi}"


def build_map(points: list[MapPoint], *, centre=None, radius_m=None) -> MarkMap:
    """The panel for ``points`` (and a search point with its radius): SVG and the interactive map's data."""
    m = MarkMap(points=points, centre=centre, radius_m=radius_m)
    m.svg = draw_svg(m)
    basemap = (settings.REGISTRY.get("BASEMAP_URL") or "").strip()
    m.data = {
        "points": [
            {
                "code": p.code,
                "lat": p.lat_deg,
                "lon": p.lon_deg,
                "usable": p.usable,
                "label": p.label,
                "reason": p.reason,
                "url": p.url,
            }
            for p in points
        ],
        "centre": list(centre) if centre else None,
        "radius_m": radius_m,
        "basemap": basemap,
        "attribution": (settings.REGISTRY.get("BASEMAP_ATTRIBUTION") or "").strip(),
    }
    return m


def points_from_marks(marks, url_for) -> list[MapPoint]:
    """Map points of marks that carry ``usability`` and a search location (others have no place to draw)."""
    out = []
    for mk in marks:
        if mk.search_lat_deg is None or mk.search_lon_deg is None:
            continue
        u = mk.usability
        out.append(
            MapPoint(
                code=mk.code,
                lat_deg=mk.search_lat_deg,
                lon_deg=mk.search_lon_deg,
                usable=u.usable,
                label=u.label,
                reason=u.reason,
                url=url_for(mk.code),
            )
        )
    return out
