"""The job map: an inline SVG drawn on the server, so that the site, the candidate marks and the
coverage show without any basemap or script.

Projection: UTM (GRS80) of the zone holding the site's reference point, for display only; grid
north is up. Coverage cells are the screening grid's cells (squares on the site's local plane,
rotated against UTM by well under a degree here, drawn unrotated). Cells are coloured by the
best horizontal 95 % figure any usable base reaches there, in five classes relative to the job's
tolerance; cells over tolerance are hatched as well as coloured, so the map reads in black and
white too.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from xml.sax.saxutils import escape

import numpy as np
import pyproj

from registry.geodesy.site import display_utm_zone
from registry.services.screening import ScreeningResult

WIDTH_PX = 760
HEIGHT_PX = 560
PAD_PX = 36
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
        rows.append(LegendRow(CLASS_COLOURS[i], f"{lo:.1f}–{hi:.1f} mm" if i else f"≤ {hi:.1f} mm"))
        lo = hi
    rows.append(LegendRow(CLASS_COLOURS[4], f"> {tol_h_mm:.1f} mm ({OVER_LABEL})", hatched=True))
    return rows


def job_map_svg(result: ScreeningResult) -> str:
    """The SVG markup of the job map (a string to put inline in the page)."""
    s = result.settings
    zone, north = display_utm_zone(s.site.ref_lon_deg, s.site.ref_lat_deg)
    utm = pyproj.Proj(proj="utm", zone=zone, south=not north, ellps="GRS80")
    grid = result.grid
    g_lat, g_lon = result.plane.to_geodetic_deg(grid.e_m, grid.n_m)
    gx, gy = utm(g_lon, g_lat)
    gx, gy = np.atleast_1d(gx), np.atleast_1d(gy)
    rings = [utm(r[:, 0], r[:, 1]) for r in s.site.rings_lonlat_deg]

    chosen = {id(c) for c in result.chosen}
    checks = {id(cm.candidate) for cm in result.check_marks}
    shown = [c for c in result.candidates if not c.excluded or id(c) in chosen]
    excluded = [c for c in result.candidates if c.excluded and c.lat_deg is not None]

    def xy(cands):
        if not cands:
            return np.zeros(0), np.zeros(0)
        x, y = utm(np.array([c.lon_deg for c in cands]), np.array([c.lat_deg for c in cands]))
        return np.atleast_1d(x), np.atleast_1d(y)

    sx, sy = xy(shown)
    ex, ey = xy(excluded)
    # Extent: the site and every usable mark (excluded marks are drawn only where they fall inside).
    xs = np.concatenate([gx, sx] + [np.atleast_1d(r[0]) for r in rings])
    ys = np.concatenate([gy, sy] + [np.atleast_1d(r[1]) for r in rings])
    x0, x1, y0, y1 = xs.min(), xs.max(), ys.min(), ys.max()
    span = max(x1 - x0, y1 - y0, 200.0) * 1.12
    cx, cy = (x0 + x1) / 2, (y0 + y1) / 2
    inner_w, inner_h = WIDTH_PX - 2 * PAD_PX, HEIGHT_PX - 2 * PAD_PX
    scale = min(inner_w, inner_h) / span  # px per metre

    def px(x, y):
        return (WIDTH_PX / 2 + (np.asarray(x) - cx) * scale, HEIGHT_PX / 2 - (np.asarray(y) - cy) * scale)

    out = [
        f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {WIDTH_PX} {HEIGHT_PX}" class="jobmap" role="img" '
        f'aria-labelledby="jobmap-title">',
        f'<title id="jobmap-title">Map of job {escape(s.job_code or "site")}: site, candidate marks and coverage '
        f"(UTM zone {zone}{'N' if north else 'S'}, grid north up)</title>",
        "<defs>"
        '<pattern id="over-hatch" width="6" height="6" patternUnits="userSpaceOnUse" patternTransform="rotate(45)">'
        f'<rect width="6" height="6" fill="{CLASS_COLOURS[4]}"/><line x1="0" y1="0" x2="0" y2="6" stroke="#7a4a33" '
        'stroke-width="1.4"/></pattern></defs>',
        f'<rect x="0" y="0" width="{WIDTH_PX}" height="{HEIGHT_PX}" fill="#fdfdfb" stroke="#c9c5bc"/>',
    ]
    # Coverage cells (or the point).
    best = result.core.best_h95_mm if result.core is not None else np.full(gx.size, np.inf)
    cls = classify(best, s.tol_h_mm)
    px_x, px_y = px(gx, gy)
    if grid.spacing_m > 0:
        size = grid.spacing_m * scale
        out.append('<g class="coverage">')
        for i in np.nonzero(grid.is_cell)[0]:
            fill = "url(#over-hatch)" if cls[i] == 4 else CLASS_COLOURS[cls[i]]
            out.append(
                f'<rect x="{px_x[i] - size / 2:.1f}" y="{px_y[i] - size / 2:.1f}" width="{size + 0.3:.1f}" '
                f'height="{size + 0.3:.1f}" fill="{fill}" data-h95="{best[i]:.1f}"/>'
            )
        out.append("</g>")
        for rx, ry in rings:
            pts = " ".join(f"{a:.1f},{b:.1f}" for a, b in zip(*px(rx, ry), strict=True))
            out.append(f'<polygon points="{pts}" fill="none" stroke="#1d1f21" stroke-width="1.6"/>')
    else:
        fill = "url(#over-hatch)" if cls[0] == 4 else CLASS_COLOURS[cls[0]]
        out.append(
            f'<circle class="site-point" cx="{px_x[0]:.1f}" cy="{px_y[0]:.1f}" r="9" fill="{fill}" stroke="#1d1f21" '
            f'stroke-width="1.6" data-h95="{best[0]:.1f}"/>'
            f'<path d="M{px_x[0] - 13:.1f},{px_y[0]:.1f}h26M{px_x[0]:.1f},{px_y[0] - 13:.1f}v26" stroke="#1d1f21"/>'
        )
    # Excluded marks inside the frame: small grey crosses.
    ex_px, ey_px = px(ex, ey)
    for c, x, y in zip(excluded, ex_px, ey_px, strict=True):
        if id(c) in chosen or not (0 <= x <= WIDTH_PX and 0 <= y <= HEIGHT_PX):
            continue
        out.append(
            f'<g class="mark excluded"><title>{escape(c.mark.code)}: excluded</title>'
            f'<path d="M{x - 4:.1f},{y - 4:.1f}l8,8M{x - 4:.1f},{y + 4:.1f}l8,-8" stroke="#8d8a84" stroke-width="1.5"/>'
            f'<text x="{x + 6:.1f}" y="{y + 4:.1f}" class="lbl muted">{escape(c.mark.code)}</text></g>'
        )
    # Usable marks: circles; chosen bases: triangles; check marks: squares.
    s_px, s_py = px(sx, sy)
    for c, x, y in zip(shown, s_px, s_py, strict=True):
        code = escape(c.mark.code)
        if id(c) in chosen:
            shape = (
                f'<path d="M{x:.1f},{y - 9:.1f}L{x + 8:.1f},{y + 6:.1f}L{x - 8:.1f},{y + 6:.1f}Z" '
                'fill="#1d1f21" stroke="#fff" stroke-width="1"/>'
            )
            role = "base"
        elif id(c) in checks:
            shape = (
                f'<rect x="{x - 6:.1f}" y="{y - 6:.1f}" width="12" height="12" fill="#fff" stroke="#1d1f21" '
                'stroke-width="2"/>'
            )
            role = "check"
        else:
            shape = f'<circle cx="{x:.1f}" cy="{y:.1f}" r="5" fill="#fff" stroke="#24527a" stroke-width="2"/>'
            role = "candidate"
        label = f"{code} ({role})" if role != "candidate" else code
        out.append(
            f'<g class="mark {role}" data-code="{code}"><title>{code}: {role}</title>{shape}'
            f'<text x="{x + 10:.1f}" y="{y - 6:.1f}" class="lbl">{label}</text></g>'
        )
    # Scale bar (bottom left) and north arrow (top right).
    bar_m = _nice_length(0.25 * inner_w / scale)
    bar_px = bar_m * scale
    bx, by = PAD_PX, HEIGHT_PX - 16
    label = f"{bar_m / 1000:g} km" if bar_m >= 1000 else f"{bar_m:g} m"
    out.append(
        f'<g class="scalebar"><rect x="{bx - 4}" y="{by - 22}" width="{bar_px + 70:.1f}" height="28" fill="#fdfdfb" '
        f'opacity="0.85"/><path d="M{bx},{by - 6}v6h{bar_px:.1f}v-6" fill="none" stroke="#1d1f21" stroke-width="1.6"/>'
        f'<text x="{bx + bar_px + 6:.1f}" y="{by}" class="lbl">{label}</text></g>'
    )
    nx, ny = WIDTH_PX - 30, 22
    out.append(
        f'<g class="north"><path d="M{nx},{ny}l7,22l-7,-6l-7,6z" fill="#1d1f21"/>'
        f'<text x="{nx}" y="{ny + 36}" text-anchor="middle" class="lbl">N</text>'
        f'<text x="{nx - 8}" y="{ny + 50}" text-anchor="end" class="lbl muted">grid north, UTM {zone}{"N" if north else "S"}</text></g>'
    )
    out.append("</svg>")
    return "".join(out)
