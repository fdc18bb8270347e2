"""The vicinity diagram of a sheet: the mark, nearby marks with bearing and distance, north arrow, scale bar.

Drawn from the registry alone (no external tiles), in a local east/north plane centred on the mark:
each nearby mark at (d·sin α, d·cos α), with d and α the geodesic distance and azimuth from the mark
(GRS80, through :mod:`registry.selectors.nearby`). Over a couple of kilometres this azimuthal
equidistant picture differs from any map projection by far less than the drawing's line width.
"""

from __future__ import annotations

import math

from reportlab.graphics.shapes import Circle, Drawing, Line, Polygon, Rect, String

from registry.reports.layout import GREY, INK, RULE, register_fonts

__all__ = ["nice_length_m", "vicinity_drawing"]


def nice_length_m(target_m: float) -> float:
    """The largest 1, 2 or 5 × 10ⁿ metres not above ``target_m`` (scale-bar length).

    >>> nice_length_m(740), nice_length_m(1999), nice_length_m(60)
    (500.0, 1000.0, 50.0)
    """
    if target_m <= 0:
        return 1.0
    exp = math.floor(math.log10(target_m))
    for m in (5, 2, 1):
        value = m * 10.0**exp
        if value <= target_m:
            return float(value)
    return float(10.0 ** (exp - 1) * 5)


def _symbol(d: Drawing, x: float, y: float, *, main: bool, usable: bool) -> None:
    if main:
        d.add(Circle(x, y, 5.2, strokeColor=INK, strokeWidth=1.1, fillColor=None))
        d.add(Polygon([x - 3.2, y - 2.0, x + 3.2, y - 2.0, x, y + 3.6], fillColor=INK, strokeColor=None))
    else:
        d.add(
            Polygon(
                [x - 2.9, y - 1.9, x + 2.9, y - 1.9, x, y + 3.2],
                fillColor=INK if usable else None,
                strokeColor=INK,
                strokeWidth=0.7,
            )
        )


def _overlaps(a, b) -> bool:
    return not (a[2] <= b[0] or b[2] <= a[0] or a[3] <= b[1] or b[3] <= a[1])


def _place(x, y, w, h, taken, width, height):
    """A label box (x1, y1, x2, y2) beside (x, y) that overlaps nothing taken and stays inside, or None."""
    for dx, dy in (
        (5, -2.5),
        (-5 - w, -2.5),
        (5, 4),
        (-5 - w, 4),
        (5, -9),
        (-5 - w, -9),
        (-w / 2, 6),
        (-w / 2, -12),
        (5, 10),
        (-5 - w, 10),
        (5, -15),
        (-5 - w, -15),
    ):
        box = (x + dx, y + dy - 1.5, x + dx + w, y + dy + h - 1.5)
        if box[0] < 2 or box[2] > width - 2 or box[1] < 14 or box[3] > height - 2:
            continue
        if not any(_overlaps(box, t) for t in taken):
            return box
    return None


def vicinity_drawing(code: str, nearby, *, width: float, height: float) -> Drawing:
    """A drawing ``width`` × ``height`` points of the mark ``code`` and ``nearby`` marks (NearbyMarkRow)."""
    from reportlab.pdfbase.pdfmetrics import stringWidth

    register_fonts()
    d = Drawing(width, height)
    d.add(Rect(0, 0, width, height, strokeColor=RULE, strokeWidth=0.6, fillColor=None))
    pad_x, pad_top, pad_bottom = 70.0, 16.0, 22.0
    es = [0.0] + [n.east_m for n in nearby]
    ns = [0.0] + [n.north_m for n in nearby]
    span_e = max(max(es) - min(es), 200.0)
    span_n = max(max(ns) - min(ns), 200.0)
    scale = min((width - 2 * pad_x) / span_e, (height - pad_top - pad_bottom) / span_n)
    mid_e, mid_n = (max(es) + min(es)) / 2, (max(ns) + min(ns)) / 2
    cx = width / 2 - mid_e * scale
    cy = pad_bottom + (height - pad_top - pad_bottom) / 2 - mid_n * scale
    points = [(cx + n.east_m * scale, cy + n.north_m * scale, n) for n in nearby]
    taken = [(x - 4, y - 3, x + 4, y + 4) for x, y, _ in points] + [(cx - 6, cy - 6, cx + 6, cy + 6)]
    main_w = stringWidth(code, "Doc-Bold", 7.5)
    main_box = _place(cx + 2, cy + 4, main_w, 8, taken, width, height) or (cx + 7, cy + 5, cx + 7 + main_w, cy + 13)
    taken.append(main_box)
    for x, y, n in points:
        d.add(Line(cx, cy, x, y, strokeColor=RULE, strokeWidth=0.5))
        _symbol(d, x, y, main=False, usable=n.status == "active")
    for x, y, n in sorted(points, key=lambda p: p[2].distance_m):
        for label in (f"{n.code}  {n.distance_m:,.0f} m at {n.azimuth_deg:05.1f}°".replace(",", " "), n.code):
            w = stringWidth(label, "Doc", 6.2)
            box = _place(x, y, w, 7, taken, width, height)
            if box is not None:
                taken.append(box)
                d.add(String(box[0], box[1] + 1.5, label, fontName="Doc", fontSize=6.2, fillColor=INK))
                break
    _symbol(d, cx, cy, main=True, usable=True)
    d.add(String(main_box[0], main_box[1] + 1.5, code, fontName="Doc-Bold", fontSize=7.5, fillColor=INK))
    # north arrow: up the page is geodetic north at the mark
    nx, ny = width - 14, height - 30
    d.add(Polygon([nx - 4, ny, nx + 4, ny, nx, ny + 14], fillColor=INK, strokeColor=None))
    d.add(String(nx, ny + 17, "N", fontName="Doc-Bold", fontSize=7, fillColor=INK, textAnchor="middle"))
    # scale bar
    bar_m = nice_length_m((width * 0.3) / scale)
    bar = bar_m * scale
    bx, by = 8, 8
    d.add(Line(bx, by, bx + bar, by, strokeColor=INK, strokeWidth=1.2))
    d.add(Line(bx, by - 2, bx, by + 2, strokeColor=INK, strokeWidth=0.8))
    d.add(Line(bx + bar, by - 2, bx + bar, by + 2, strokeColor=INK, strokeWidth=0.8))
    text = f"{bar_m:g} m" if bar_m < 1000 else f"{bar_m / 1000:g} km"
    d.add(String(bx + bar + 4, by - 2.2, text, fontName="Doc", fontSize=6.3, fillColor=GREY))
    # legend
    lx = width - 78
    _symbol(d, lx, 10, main=False, usable=True)
    d.add(String(lx + 5, 7.8, "in use", fontName="Doc", fontSize=6, fillColor=GREY))
    _symbol(d, lx + 36, 10, main=False, usable=False)
    d.add(String(lx + 41, 7.8, "not in use", fontName="Doc", fontSize=6, fillColor=GREY))
    if not nearby:
        d.add(
            String(
                width / 2,
                20,
                "No other mark within 2 km",
                fontName="Doc",
                fontSize=6.5,
                fillColor=GREY,
                textAnchor="middle",
            )
        )
    return d
