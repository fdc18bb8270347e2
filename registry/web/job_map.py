"""The job map: an inline SVG drawn on the server, so that the site, the marks that matter and the
coverage show without any basemap or script.

Projection: UTM (GRS80) of the zone holding the site's reference point, for display only; grid
north is up and the meridian convergence at the site is stated beside the north arrow (the angle
from true north to grid north, clockwise positive: grid azimuth = geodetic azimuth − γ; see
:mod:`registry.geodesy.grid`). Coverage cells are the screening grid's cells (squares on the
site's local plane, rotated against UTM by the convergence difference, well under a degree
within a zone, drawn unrotated). Cells are coloured by the best horizontal 95 % figure any usable
base reaches there, in five classes relative to the job's tolerance; cells over tolerance are
hatched as well as coloured, so the map reads in black and white too.

Frame: the site's bounding box grown to take in the chosen bases and the check marks (for a point
site also the nearest few usable marks), then a margin of ``MARGIN_FRACTION`` of the span on each
side, widened to the drawing's aspect ratio. Marks outside the frame are not drawn; the map says how
many. Labels are placed greedily (chosen bases, check marks, then usable marks by rank, then
excluded marks), each at the first of eight positions around its symbol that overlaps no symbol and
no label already placed; a label with no free position is left out (its code stays in the symbol's
tooltip), except for the chosen bases and check marks, which are always labelled.

Interactive panel: :func:`live_map_data` gives the same geometry (site rings, coverage cells merged
per colour class by :func:`registry.geodesy.site.cells_outline_m`, service areas, marks with their
figures in words, and the SVG's frame as a latitude/longitude box) as plain JSON for
``static/registry/jobmap.js`` (Leaflet, vendored), which replaces the SVG when scripts run; the SVG
stays as the fallback and the printout. Each mark's words (:func:`mark_words`) are the SVG's tooltip
and link, and the panel's popup, so a tap on either tells the same.

Basemap: when ``REGISTRY["BASEMAP_URL"]`` holds an XYZ tile template, the tiles covering the drawing
are its bottom layer, faded, loaded by the user's browser (never by the server), placed unrotated
(see :mod:`registry.web.basemap`); the caption names their source and says they are for orientation
only. Empty setting: no basemap, the map is as before.
"""

from __future__ import annotations

import html
import math
from dataclasses import dataclass, field
from xml.sax.saxutils import escape

import numpy as np
import pyproj
from django.conf import settings
from django.urls import reverse

from registry.geodesy.dms import format_signed_dms
from registry.geodesy.site import cells_outline_m, display_utm_zone
from registry.geodesy.webmercator import tile_width_m
from registry.services.screening import Candidate, ScreeningResult
from registry.services.screening.export import service_area_polygons
from registry.services.screening.present import service_shares
from registry.services.screening.rules import REASON_WORDS
from registry.web.basemap import basemap_layer

WIDTH_PX = 760
HEIGHT_PX = 560
PAD_PX = 20
#: Margin added on each side of the frame, as a fraction of its larger span.
MARGIN_FRACTION = 0.125
#: Smallest frame span (m), so a tiny site still shows its surroundings.
MIN_SPAN_M = 400.0
#: For a point site the frame also takes in this many nearest usable marks.
POINT_SITE_NEAREST = 4
#: Label metrics for 11 px DejaVu Sans (a conservative average advance per character).
LABEL_CHAR_PX = 6.9
LABEL_HEIGHT_PX = 12.0
#: Fractions of the tolerance bounding the colour classes (the last class is over tolerance).
CLASS_BOUNDS = (0.5, 0.7, 0.85, 1.0)
#: Our own calm ramp: pale to deeper blue-green inside tolerance, then a warm clay for "over".
CLASS_COLOURS = ("#e4f0ec", "#bfdcd3", "#93c2b5", "#5f9e8f", "#d9a98c")
OVER_LABEL = "over tolerance"


@dataclass
class LegendRow:
    colour: str
    label: str
    hatched: bool = False
    index: int = 0  # the class (0-4): the page draws it with the stylesheet's .swatch-<index>


@dataclass
class JobMap:
    """The SVG and what the caption needs to say about it."""

    svg: str
    zone_label: str
    convergence_deg: float
    span_m: float
    drawn_marks: int
    outside_usable: int
    outside_excluded: int
    unlabelled: int
    labelled_codes: list[str] = field(default_factory=list)
    #: Basemap tiles drawn (0: no basemap), their zoom, source host, attribution text, and how far
    #: (m) tile content may sit off because tiles are not rotated by the convergence.
    basemap_tiles: int = 0
    basemap_zoom: int | None = None
    basemap_host: str = ""
    basemap_attribution: str = ""
    basemap_offset_m: float = 0.0
    #: The frame's corners as (lat, lon) degrees, for the interactive panel to open on the same view.
    frame_corners_deg: list[tuple[float, float]] = field(default_factory=list)

    @property
    def outside_total(self) -> int:
        return self.outside_usable + self.outside_excluded

    @property
    def convergence_text(self) -> str:
        return format_signed_dms(self.convergence_deg, decimals=2)


#: Dash patterns of the service-area outlines, one per chosen base (told apart in black and white).
SERVICE_DASHES = ("9 4", "2 3", "12 3 2 3", "5 5", "1 2", "14 6")


def _nice_length(target_m: float) -> float:
    """A round scale-bar length (1, 2 or 5 × 10ⁿ m) not above ``target_m``.

    >>> _nice_length(1740.0), _nice_length(95.0)
    (1000.0, 50.0)
    """
    p = 10 ** math.floor(math.log10(target_m))
    for f in (5, 2, 1):
        if f * p <= target_m:
            return float(f * p)
    return float(p)


def classify(best_h95_mm: np.ndarray, tol_h_mm: float) -> np.ndarray:
    """Colour class per cell: 0..3 inside tolerance (by fraction of it), 4 over tolerance or unreachable."""
    ratio = np.asarray(best_h95_mm, dtype=float) / tol_h_mm
    cls = np.searchsorted(np.array(CLASS_BOUNDS), ratio, side="left")
    return np.where(np.isfinite(ratio), np.minimum(cls, 4), 4)


def legend_rows(tol_h_mm: float) -> list[LegendRow]:
    rows = []
    lo = 0.0
    for i, f in enumerate(CLASS_BOUNDS):
        hi = f * tol_h_mm
        rows.append(LegendRow(CLASS_COLOURS[i], f"{lo:.1f}–{hi:.1f} mm" if i else f"≤ {hi:.1f} mm", index=i))
        lo = hi
    rows.append(LegendRow(CLASS_COLOURS[4], f"> {tol_h_mm:.1f} mm ({OVER_LABEL})", hatched=True, index=4))
    return rows


# ----------------------------------------------------------------------------- frame


def map_frame_m(
    site_x_m: np.ndarray,
    site_y_m: np.ndarray,
    keep_x_m: np.ndarray,
    keep_y_m: np.ndarray,
    *,
    width_px: float,
    height_px: float,
    margin_fraction: float = MARGIN_FRACTION,
    min_span_m: float = MIN_SPAN_M,
) -> tuple[float, float, float, float]:
    """The map's extent (x0, y0, x1, y1) in projected metres.

    The bounding box of the site points and the points to keep, a margin of ``margin_fraction`` of
    the larger span on each side, and the shorter side widened (about the centre) so that the box has
    the drawing's aspect ratio ``width_px / height_px`` (one scale for both axes).

    >>> x0, y0, x1, y1 = map_frame_m(np.array([0.0, 1000.0]), np.array([0.0, 500.0]), np.zeros(0), np.zeros(0),
    ...                              width_px=800, height_px=400, margin_fraction=0.1)
    >>> round(x1 - x0), round(y1 - y0), round((x0 + x1) / 2), round((y0 + y1) / 2)
    (1400, 700, 500, 250)
    """
    xs = np.concatenate([np.ravel(site_x_m), np.ravel(keep_x_m)])
    ys = np.concatenate([np.ravel(site_y_m), np.ravel(keep_y_m)])
    x0, x1, y0, y1 = float(xs.min()), float(xs.max()), float(ys.min()), float(ys.max())
    span = max(x1 - x0, y1 - y0, min_span_m)
    w = max(x1 - x0, min_span_m) + 2 * margin_fraction * span
    h = max(y1 - y0, min_span_m) + 2 * margin_fraction * span
    aspect = width_px / height_px
    if w / h < aspect:
        w = h * aspect
    else:
        h = w / aspect
    cx, cy = (x0 + x1) / 2, (y0 + y1) / 2
    return cx - w / 2, cy - h / 2, cx + w / 2, cy + h / 2


# ----------------------------------------------------------------------------- labels


@dataclass(frozen=True)
class Box:
    x0: float
    y0: float
    x1: float
    y1: float

    def overlaps(self, other: Box) -> bool:
        return self.x0 < other.x1 and other.x0 < self.x1 and self.y0 < other.y1 and other.y0 < self.y1

    def inside(self, width: float, height: float) -> bool:
        return self.x0 >= 0 and self.y0 >= 0 and self.x1 <= width and self.y1 <= height


#: Label positions around a symbol, tried in this order: (dx, dy, text-anchor) of the text's
#: baseline point from the symbol centre.
_SLOTS = (
    (9.0, -6.0, "start"),  # upper right
    (9.0, 13.0, "start"),  # lower right
    (-9.0, -6.0, "end"),  # upper left
    (-9.0, 13.0, "end"),  # lower left
    (0.0, -11.0, "middle"),  # above
    (0.0, 21.0, "middle"),  # below
    (11.0, 4.0, "start"),  # right
    (-11.0, 4.0, "end"),  # left
)


def label_box(x: float, y: float, text: str, slot: tuple[float, float, str]) -> Box:
    """The box a label occupies when placed in ``slot`` around a symbol at (x, y) (pixels)."""
    dx, dy, anchor = slot
    w = LABEL_CHAR_PX * len(text)
    bx = x + dx
    left = bx if anchor == "start" else (bx - w if anchor == "end" else bx - w / 2)
    base = y + dy
    return Box(left, base - LABEL_HEIGHT_PX + 2, left + w, base + 3)


def place_labels(
    items: list[tuple[float, float, str, bool]],
    obstacles: list[Box],
    *,
    width_px: float,
    height_px: float,
) -> list[tuple[int, float, float, str] | None]:
    """Greedy placement without overlaps, in the order given.

    ``items`` are (x, y, text, must_label). Returns, per item, (slot index, text x, text y, anchor)
    or None when the label is left out. A must-label item takes its first slot inside the drawing
    even if it overlaps (it is never dropped).

    >>> placed = place_labels([(100, 100, "A-1", False), (104, 100, "B-2", False)], [], width_px=300, height_px=300)
    >>> placed[0][0], placed[1] is not None and placed[1][0] != 0
    (0, True)
    """
    taken = list(obstacles)
    out: list[tuple[int, float, float, str] | None] = []
    for x, y, text, must in items:
        chosen = None
        first_inside = None
        for i, slot in enumerate(_SLOTS):
            box = label_box(x, y, text, slot)
            if not box.inside(width_px, height_px):
                continue
            if first_inside is None:
                first_inside = (i, box)
            if not any(box.overlaps(t) for t in taken):
                chosen = (i, box)
                break
        if chosen is None and must:
            chosen = first_inside or (0, label_box(x, y, text, _SLOTS[0]))
        if chosen is None:
            out.append(None)
            continue
        i, box = chosen
        taken.append(box)
        dx, dy, anchor = _SLOTS[i]
        out.append((i, x + dx, y + dy, anchor))
    return out


# ----------------------------------------------------------------------------- drawing


def _rings_path(px, rings) -> str:
    """SVG path data of the site's rings (exterior and holes; even-odd fill)."""
    parts = []
    for rx, ry in rings:
        x, y = px(rx, ry)
        parts.append("M" + "L".join(f"{a:.1f},{b:.1f}" for a, b in zip(x, y, strict=True)) + "Z")
    return "".join(parts)


def _symbol_box(x: float, y: float, r: float = 7.0) -> Box:
    return Box(x - r, y - r, x + r, y + r)


ROLE_WORDS = {
    "base": "chosen base",
    "check": "check mark",
    "candidate": "usable, not chosen",
    "excluded": "excluded",
}


def _fmt_m(value: float) -> str:
    return "—" if value is None or not math.isfinite(value) else f"{value:,.1f}".replace(",", "\u2009")


def mark_words(result: ScreeningResult, c: Candidate, role: str, shares: dict[str, float]) -> list[str]:
    """What a tap on a mark's symbol tells: its role, distances and 95 % figures, or why it is excluded.

    Words for surveyors (no codes): distances in metres to 0.1, figures in mm to 0.1 (finding and
    planning precision; the tables below the map give the rest).
    """
    point = result.settings.site.is_point
    lines = [ROLE_WORDS[role]]
    if point:
        lines.append(f"{_fmt_m(c.distance_m)} m from the site point")
    else:
        lines.append(
            f"{_fmt_m(c.distance_m)} m to the nearest site point, {_fmt_m(c.max_distance_m)} m to the farthest"
        )
    if role == "excluded":
        lines.append("Not used: " + "; ".join(REASON_WORDS[r] for r in c.reasons))
        return lines
    if role == "check":
        cm = next(cm for cm in result.check_marks if cm.candidate is c)
        for a in cm.allowances:
            lines.append(
                f"Check from {a['base']}: allowance H 95 % {a['horizontal_95_mm']:.1f} mm, "
                f"V 95 % {a['vertical_95_mm']:.1f} mm"
            )
        if not cm.allowances:
            lines.append("No chosen base within the maximum baseline")
        return lines
    if math.isfinite(c.h95_mm):
        where = "at the site point" if point else "worst over the site"
        lines.append(f"H 95 % {c.h95_mm:.1f} mm, V 95 % {c.v95_mm:.1f} mm ({where})")
    if role == "base" and c.mark.code in shares:
        lines.append(f"Serves {shares[c.mark.code]:.1f} % of the site")
    elif role == "candidate" and c.rank:
        lines.append(f"Ranked {c.rank} of the usable marks")
    return lines


def _role(result: ScreeningResult, c: Candidate) -> str:
    if any(c is b for b in result.chosen):
        return "base"
    if any(c is cm.candidate for cm in result.check_marks):
        return "check"
    return "excluded" if c.excluded else "candidate"


def _ring_latlon(lat, lon) -> list[list[float]]:
    return [[round(float(a), 8), round(float(b), 8)] for a, b in zip(lat, lon, strict=True)]


def live_map_data(result: ScreeningResult, job_map: JobMap) -> dict:
    """The interactive panel's data (JSON): the SVG's geometry in latitude/longitude (degrees, 8 places).

    ``site``: rings; ``coverage``: per colour class (0-4, 4 over tolerance), polygons with holes, each
    the union of that class's cells (cells are squares on the site's local plane, as in the SVG, and the
    panel clips them to the site outline as the SVG does); ``point``: a point site with its class;
    ``areas``: each chosen base's service area (more than one base); ``marks``: code, role, words and
    link; ``frame``: the SVG frame's corners.
    """
    s = result.settings
    grid = result.grid
    best = result.core.best_h95_mm if result.core is not None else np.full(grid.e_m.size, np.inf)
    cls = classify(best, s.tol_h_mm)
    site = [_ring_latlon(r[:, 1], r[:, 0]) for r in s.site.rings_lonlat_deg]
    coverage = []
    point = None
    if grid.spacing_m > 0:
        for k in range(len(CLASS_COLOURS)):
            mask = grid.is_cell & (cls == k)
            if not mask.any():
                continue
            polys = []
            for poly in cells_outline_m(grid.e_m[mask], grid.n_m[mask], grid.spacing_m):
                rings = []
                for ring in poly:
                    lat, lon = result.plane.to_geodetic_deg(ring[:, 0], ring[:, 1])
                    rings.append(_ring_latlon(lat, lon))
                polys.append(rings)
            coverage.append({"class": k, "colour": CLASS_COLOURS[k], "polygons": polys})
    else:
        lat, lon = result.plane.to_geodetic_deg(grid.e_m[:1], grid.n_m[:1])
        h95 = float(best[0])
        point = {
            "lat": round(float(lat[0]), 8),
            "lon": round(float(lon[0]), 8),
            "class": int(cls[0]),
            "colour": CLASS_COLOURS[int(cls[0])],
            "words": (
                f"Site point: best H 95 % {h95:.1f} mm from any usable base"
                if math.isfinite(h95)
                else "Site point: no usable base reaches it"
            ),
        }
    shares = {d["base"]: d["share"] * 100 for d in service_shares(result)}
    areas = []
    for k, (code, polys) in enumerate(service_area_polygons(result).items()):
        areas.append(
            {
                "base": code,
                "dash": SERVICE_DASHES[k % len(SERVICE_DASHES)],
                "words": f"Part of the site served from {code}" + (f": {shares[code]:.1f} %" if code in shares else ""),
                "polygons": [[_ring_latlon(r[:, 1], r[:, 0]) for r in poly] for poly in polys],
            }
        )
    marks = []
    for c in result.candidates:
        if c.lat_deg is None or c.lon_deg is None:
            continue
        role = _role(result, c)
        marks.append(
            {
                "code": c.mark.code,
                "lat": round(c.lat_deg, 8),
                "lon": round(c.lon_deg, 8),
                "role": role,
                "words": mark_words(result, c, role, shares),
                "url": reverse("web:mark-detail", args=[c.mark.code]),
            }
        )
    order = {"excluded": 0, "candidate": 1, "check": 2, "base": 3}  # the important ones drawn last, on top
    marks.sort(key=lambda m: order[m["role"]])
    reg = settings.REGISTRY
    return {
        "site": site,
        "coverage": coverage,
        "hatch_class": len(CLASS_COLOURS) - 1,
        "point": point,
        "areas": areas,
        "marks": marks,
        "frame": [[round(a, 8), round(b, 8)] for a, b in job_map.frame_corners_deg],
        "basemap": (reg.get("BASEMAP_URL") or "").strip(),
        "attribution": (reg.get("BASEMAP_ATTRIBUTION") or "").strip(),
    }


def build_job_map(result: ScreeningResult) -> JobMap:
    """Draw the job map for a screening result."""
    s = result.settings
    zone, north = display_utm_zone(s.site.ref_lon_deg, s.site.ref_lat_deg)
    zone_label = f"{zone}{'N' if north else 'S'}"
    utm = pyproj.Proj(proj="utm", zone=zone, south=not north, ellps="GRS80")
    convergence_deg = float(
        utm.get_factors(s.site.ref_lon_deg, s.site.ref_lat_deg, errcheck=False).meridian_convergence
    )
    grid = result.grid
    g_lat, g_lon = result.plane.to_geodetic_deg(grid.e_m, grid.n_m)
    gx, gy = utm(g_lon, g_lat)
    gx, gy = np.atleast_1d(gx), np.atleast_1d(gy)
    rings = [tuple(np.atleast_1d(v) for v in utm(r[:, 0], r[:, 1])) for r in s.site.rings_lonlat_deg]

    chosen_ids = {id(c) for c in result.chosen}
    check_ids = {id(cm.candidate) for cm in result.check_marks}
    placed = [c for c in result.candidates if c.lat_deg is not None and c.lon_deg is not None]
    if placed:
        mx, my = utm(np.array([c.lon_deg for c in placed]), np.array([c.lat_deg for c in placed]))
        mx, my = np.atleast_1d(mx), np.atleast_1d(my)
    else:
        mx = my = np.zeros(0)
    pos = {id(c): (float(mx[i]), float(my[i])) for i, c in enumerate(placed)}

    keep: list[Candidate] = [c for c in placed if id(c) in chosen_ids or id(c) in check_ids]
    if s.site.is_point:
        nearest = sorted((c for c in placed if not c.excluded), key=lambda c: c.distance_m)[:POINT_SITE_NEAREST]
        keep += [c for c in nearest if c not in keep]
    kx = np.array([pos[id(c)][0] for c in keep])
    ky = np.array([pos[id(c)][1] for c in keep])
    site_x = np.concatenate([gx] + [r[0] for r in rings])
    site_y = np.concatenate([gy] + [r[1] for r in rings])
    inner_w, inner_h = WIDTH_PX - 2 * PAD_PX, HEIGHT_PX - 2 * PAD_PX
    x0, y0, x1, y1 = map_frame_m(site_x, site_y, kx, ky, width_px=inner_w, height_px=inner_h)
    scale = inner_w / (x1 - x0)  # px per metre (the same both ways: the frame has the drawing's aspect)

    def px(x, y):
        return PAD_PX + (np.asarray(x) - x0) * scale, PAD_PX + (y1 - np.asarray(y)) * scale

    out = [
        f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {WIDTH_PX} {HEIGHT_PX}" class="jobmap" role="img" '
        f'aria-labelledby="jobmap-title">',
        f'<title id="jobmap-title">Map of job {escape(s.job_code or "site")}: site, bases, check marks and coverage '
        f"(UTM zone {zone_label}, grid north up)</title>",
        # label styles are in registry.css (svg.jobmap .lbl): no inline style element under the page CSP
        "<defs>"
        '<pattern id="over-hatch" width="6" height="6" patternUnits="userSpaceOnUse" patternTransform="rotate(45)">'
        f'<rect width="6" height="6" fill="{CLASS_COLOURS[4]}"/><line x1="0" y1="0" x2="0" y2="6" stroke="#7a4a33" '
        'stroke-width="1.4"/></pattern></defs>',
        f'<rect x="0" y="0" width="{WIDTH_PX}" height="{HEIGHT_PX}" fill="#fdfdfb" stroke="#c9c5bc"/>',
    ]
    # Optional basemap, the bottom layer above the paper. Tiles are placed by their projected corners
    # and NOT rotated by the meridian convergence (under 1° near a zone's central meridian, up to
    # 3°·sin φ at its edge): orientation only (registry.web.basemap).
    reg = settings.REGISTRY
    edge = np.linspace(0.0, 1.0, 17)
    out_px = np.concatenate([edge * WIDTH_PX, np.full(17, WIDTH_PX), edge[::-1] * WIDTH_PX, np.zeros(17)])
    out_py = np.concatenate([np.zeros(17), edge * HEIGHT_PX, np.full(17, HEIGHT_PX), edge[::-1] * HEIGHT_PX])
    o_lon, o_lat = utm(x0 + (out_px - PAD_PX) / scale, y1 - (out_py - PAD_PX) / scale, inverse=True)
    basemap = basemap_layer(
        reg.get("BASEMAP_URL", ""),
        to_px=lambda lon, lat: px(*utm(lon, lat)),
        outline_lon_deg=np.asarray(o_lon),
        outline_lat_deg=np.asarray(o_lat),
        ref_lon_deg=s.site.ref_lon_deg,
        ref_lat_deg=s.site.ref_lat_deg,
        px_per_m=scale,
        width_px=WIDTH_PX,
        height_px=HEIGHT_PX,
    )
    if basemap is not None:
        out.append(basemap.svg)
    obstacles: list[Box] = []
    # Coverage cells (or the point).
    best = result.core.best_h95_mm if result.core is not None else np.full(gx.size, np.inf)
    cls = classify(best, s.tol_h_mm)
    px_x, px_y = px(gx, gy)
    if grid.spacing_m > 0:
        size = grid.spacing_m * scale
        # Cells are squares around points inside the site: clip them to the site's outline.
        out.append(f'<clipPath id="site-clip"><path clip-rule="evenodd" d="{_rings_path(px, rings)}"/></clipPath>')
        out.append('<g class="coverage" clip-path="url(#site-clip)">')
        for i in np.nonzero(grid.is_cell)[0]:
            fill = "url(#over-hatch)" if cls[i] == 4 else CLASS_COLOURS[cls[i]]
            out.append(
                f'<rect x="{px_x[i] - size / 2:.1f}" y="{px_y[i] - size / 2:.1f}" width="{size + 0.3:.1f}" '
                f'height="{size + 0.3:.1f}" fill="{fill}" data-h95="{best[i]:.1f}"/>'
            )
        out.append("</g>")
        for rx, ry in rings:
            pts = " ".join(f"{a:.1f},{b:.1f}" for a, b in zip(*px(rx, ry), strict=True))
            out.append(f'<polygon class="site" points="{pts}" fill="none" stroke="#1d1f21" stroke-width="1.8"/>')
        # One outline per chosen base: the part of the site it serves (registry.services.screening.export).
        for k, (code, polys) in enumerate(service_area_polygons(result).items()):
            dash = SERVICE_DASHES[k % len(SERVICE_DASHES)]
            d = "".join(
                "M" + "L".join(f"{a:.1f},{b:.1f}" for a, b in zip(*px(*utm(ring[:, 0], ring[:, 1])), strict=True)) + "Z"
                for poly in polys
                for ring in poly
            )
            out.append(
                f'<path class="service-area" data-base="{escape(code)}" d="{d}" fill="none" stroke="#2f3b52" '
                f'stroke-width="2.2" stroke-dasharray="{dash}" fill-rule="evenodd"><title>Served from '
                f"{escape(code)}</title></path>"
            )
    else:
        fill = "url(#over-hatch)" if cls[0] == 4 else CLASS_COLOURS[cls[0]]
        out.append(
            f'<g class="site"><circle class="site-point" cx="{px_x[0]:.1f}" cy="{px_y[0]:.1f}" r="10" fill="{fill}" '
            f'stroke="#1d1f21" stroke-width="1.8" data-h95="{best[0]:.1f}"/>'
            f'<path d="M{px_x[0] - 15:.1f},{px_y[0]:.1f}h30M{px_x[0]:.1f},{px_y[0] - 15:.1f}v30" stroke="#1d1f21"/></g>'
        )
        obstacles.append(_symbol_box(float(px_x[0]), float(px_y[0]), 15.0))
    # The fixed furniture: scale bar (bottom left) and north arrow (top right).
    bar_m = _nice_length(0.25 * inner_w / scale)
    bar_px = bar_m * scale
    bx, by = PAD_PX + 4, HEIGHT_PX - 14
    bar_label = f"{bar_m / 1000:g} km" if bar_m >= 1000 else f"{bar_m:g} m"
    scalebar = (
        f'<g class="scalebar"><path d="M{bx},{by - 6}v6h{bar_px:.1f}v-6" fill="none" stroke="#1d1f21" stroke-width="1.6"/>'
        f'<text x="{bx + bar_px + 6:.1f}" y="{by}" class="lbl">{bar_label}</text></g>'
    )
    obstacles.append(Box(bx - 6, by - 20, bx + bar_px + 58, by + 8))
    nx, ny = WIDTH_PX - 22, 14
    conv = format_signed_dms(convergence_deg, decimals=2)
    north_arrow = (
        f'<g class="north"><path d="M{nx},{ny}l7,22l-7,-6l-7,6z" fill="#1d1f21"/>'
        f'<text x="{nx}" y="{ny + 34}" text-anchor="middle" class="lbl">N</text>'
        f'<text x="{nx - 14}" y="{ny + 10}" text-anchor="end" class="lbl muted">grid north, UTM {zone_label}</text>'
        f'<text x="{nx - 14}" y="{ny + 24}" text-anchor="end" class="lbl muted">convergence {conv}</text></g>'
    )
    obstacles.append(Box(nx - 190, ny - 8, nx + 16, ny + 54))

    # Marks: which are inside the frame, their symbols, then their labels.
    def inside(c: Candidate) -> bool:
        x, y = pos[id(c)]
        return x0 <= x <= x1 and y0 <= y <= y1

    def role_of(c: Candidate) -> str:
        if id(c) in chosen_ids:
            return "base"
        if id(c) in check_ids:
            return "check"
        return "excluded" if c.excluded else "candidate"

    order = {"base": 0, "check": 1, "candidate": 2, "excluded": 3}
    shares = {d["base"]: d["share"] * 100 for d in service_shares(result)}
    drawn = [c for c in placed if inside(c) or id(c) in chosen_ids or id(c) in check_ids]
    outside = [c for c in placed if c not in drawn]
    drawn.sort(key=lambda c: (order[role_of(c)], c.rank))
    marks_svg: list[str] = []
    label_items: list[tuple[float, float, str, bool]] = []
    for c in reversed(drawn):  # most important drawn last, so on top
        x, y = (float(v) for v in px(*pos[id(c)]))
        role = role_of(c)
        code = html.escape(c.mark.code, quote=True)  # also used inside attributes (data-code="...")
        if role == "base":
            shape = (
                f'<path d="M{x:.1f},{y - 10:.1f}L{x + 9:.1f},{y + 7:.1f}L{x - 9:.1f},{y + 7:.1f}Z" '
                'fill="#1d1f21" stroke="#fff" stroke-width="1.2"/>'
            )
        elif role == "check":
            shape = (
                f'<rect x="{x - 6:.1f}" y="{y - 6:.1f}" width="12" height="12" fill="#fff" stroke="#1d1f21" '
                'stroke-width="2.2"/>'
            )
        elif role == "candidate":
            shape = f'<circle cx="{x:.1f}" cy="{y:.1f}" r="5" fill="#fff" stroke="#24527a" stroke-width="2"/>'
        else:
            shape = (
                f'<path d="M{x - 3.5:.1f},{y - 3.5:.1f}l7,7M{x - 3.5:.1f},{y + 3.5:.1f}l7,-7" stroke="#9a968f" '
                'stroke-width="1.3" opacity="0.75"/>'
            )
        # the same words as the interactive panel's popup; the symbol links to the mark's page
        tip = escape(f"{c.mark.code}: " + "; ".join(mark_words(result, c, role, shares)))
        href = html.escape(reverse("web:mark-detail", args=[c.mark.code]), quote=True)
        marks_svg.append(
            f'<a href="{href}"><g class="mark {role}" data-code="{code}"><title>{tip}</title>{shape}</g></a>'
        )
        obstacles.append(_symbol_box(x, y, 9.0 if role in ("base", "check") else 5.5))
    for c in drawn:
        x, y = (float(v) for v in px(*pos[id(c)]))
        role = role_of(c)
        text = f"{c.mark.code} ({role})" if role in ("base", "check") else c.mark.code
        label_items.append((x, y, text, role in ("base", "check")))
    placements = place_labels(label_items, obstacles, width_px=WIDTH_PX, height_px=HEIGHT_PX)
    labels_svg: list[str] = []
    labelled: list[str] = []
    unlabelled = 0
    for c, item, p in zip(drawn, label_items, placements, strict=True):
        if p is None:
            unlabelled += 1
            continue
        _, tx, ty, anchor = p
        role = role_of(c)
        klass = "lbl strong" if role in ("base", "check") else ("lbl muted" if role == "excluded" else "lbl")
        labels_svg.append(
            f'<text x="{tx:.1f}" y="{ty:.1f}" text-anchor="{anchor}" class="{klass}" data-for="{html.escape(c.mark.code)}">'
            f"{escape(item[2])}</text>"
        )
        labelled.append(c.mark.code)
    out.append('<g class="marks">' + "".join(marks_svg) + "</g>")
    out.append('<g class="labels">' + "".join(labels_svg) + "</g>")
    out.append(scalebar)
    out.append(north_arrow)
    out.append("</svg>")
    c_lon, c_lat = utm(np.array([x0, x1, x1, x0]), np.array([y0, y0, y1, y1]), inverse=True)
    return JobMap(
        svg="".join(out),
        zone_label=zone_label,
        convergence_deg=convergence_deg,
        span_m=x1 - x0,
        drawn_marks=len(drawn),
        outside_usable=sum(1 for c in outside if not c.excluded),
        outside_excluded=sum(1 for c in outside if c.excluded),
        unlabelled=unlabelled,
        labelled_codes=labelled,
        frame_corners_deg=[(float(a), float(b)) for a, b in zip(c_lat, c_lon, strict=True)],
        basemap_tiles=basemap.tiles if basemap else 0,
        basemap_zoom=basemap.zoom if basemap else None,
        basemap_host=basemap.host if basemap else "",
        basemap_attribution=(reg.get("BASEMAP_ATTRIBUTION") or "").strip() if basemap else "",
        # Half a tile's diagonal turned by the convergence: the farthest tile content can sit off.
        basemap_offset_m=(
            float(tile_width_m(s.site.ref_lat_deg, basemap.zoom)) / math.sqrt(2) * abs(math.radians(convergence_deg))
            if basemap
            else 0.0
        ),
    )
