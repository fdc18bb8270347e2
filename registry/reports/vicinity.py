"""The vicinity diagram of a sheet: the mark, nearby marks with bearing and distance, north arrow, scale bar.

Drawn from the registry alone (no external tiles), in a local east/north plane centred on the mark:
each nearby mark at (d·sin α, d·cos α), with d and α the geodesic distance and azimuth from the mark
(GRS80, through :mod:`registry.selectors.nearby`). Over a couple of kilometres this azimuthal
equidistant picture differs from any map projection by far less than the drawing's line width.
"""

from __future__ import annotations

import math

from reportlab.pdfbase.pdfmetrics import stringWidth
from reportlab.platypus import Flowable

from registry.reports.layout import GREY, INK, RULE, draw_text, register_fonts

__all__ = ["VicinityDiagram", "nice_length_m", "vicinity_drawing"]


class _Ops:
    """The diagram's drawing operations, in order, in points from its lower-left corner."""

    def __init__(self):
        self.ops: list[tuple] = []

    def rect(self, x, y, w, h, *, stroke, width):
        self.ops.append(("rect", x, y, w, h, stroke, width))

    def line(self, x1, y1, x2, y2, *, stroke, width):
        self.ops.append(("line", x1, y1, x2, y2, stroke, width))

    def circle(self, x, y, r, *, stroke, width):
        self.ops.append(("circle", x, y, r, stroke, width))

    def polygon(self, points, *, fill=None, stroke=None, width=1.0):
        self.ops.append(("polygon", points, fill, stroke, width))

    def text(self, x, y, text, *, font, size, color, anchor="start"):
        if anchor == "middle":
            x -= stringWidth(text, font, size) / 2
        self.ops.append(("text", x, y, text, font, size, color))


class VicinityDiagram(Flowable):
    """The diagram as a flowable drawn straight on the page canvas (the same lines, symbols and labels
    a reportlab ``Drawing`` of shapes gave, without building and validating a shape per element)."""

    def __init__(self, ops: _Ops, width: float, height: float):
        super().__init__()
        self.ops = ops.ops
        self.width, self.height = width, height

    def wrap(self, avail_width, avail_height):
        return self.width, self.height

    def draw(self):
        c = self.canv
        c.setLineCap(0)
        c.setLineJoin(0)
        for op in self.ops:
            kind = op[0]
            if kind == "text":
                _, x, y, text, font, size, color = op
                c.setFillColor(color)
                draw_text(c, x, y, text, font, size)
            elif kind == "line":
                _, x1, y1, x2, y2, stroke, width = op
                c.setStrokeColor(stroke)
                c.setLineWidth(width)
                c.line(x1, y1, x2, y2)
            elif kind == "polygon":
                _, pts, fill, stroke, width = op
                path = c.beginPath()
                path.moveTo(pts[0], pts[1])
                for i in range(2, len(pts), 2):
                    path.lineTo(pts[i], pts[i + 1])
                path.close()
                if fill is not None:
                    c.setFillColor(fill)
                if stroke is not None:
                    c.setStrokeColor(stroke)
                    c.setLineWidth(width)
                c.drawPath(path, stroke=int(stroke is not None), fill=int(fill is not None))
            elif kind == "circle":
                _, x, y, r, stroke, width = op
                c.setStrokeColor(stroke)
                c.setLineWidth(width)
                c.circle(x, y, r, stroke=1, fill=0)
            else:  # rect
                _, x, y, w, h, stroke, width = op
                c.setStrokeColor(stroke)
                c.setLineWidth(width)
                c.rect(x, y, w, h, stroke=1, fill=0)


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


def _symbol(d: _Ops, x: float, y: float, *, main: bool, usable: bool) -> None:
    if main:
        d.circle(x, y, 5.2, stroke=INK, width=1.1)
        d.polygon([x - 3.2, y - 2.0, x + 3.2, y - 2.0, x, y + 3.6], fill=INK)
    else:
        d.polygon([x - 2.9, y - 1.9, x + 2.9, y - 1.9, x, y + 3.2], fill=INK if usable else None, stroke=INK, width=0.7)


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


def vicinity_drawing(code: str, nearby, *, width: float, height: float) -> VicinityDiagram:
    """A diagram ``width`` × ``height`` points of the mark ``code`` and ``nearby`` marks (NearbyMarkRow)."""
    register_fonts()
    d = _Ops()
    d.rect(0, 0, width, height, stroke=RULE, width=0.6)
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
        d.line(cx, cy, x, y, stroke=RULE, width=0.5)
        _symbol(d, x, y, main=False, usable=n.status == "active")
    for x, y, n in sorted(points, key=lambda p: p[2].distance_m):
        for label in (f"{n.code}  {n.distance_m:,.0f} m at {n.azimuth_deg:05.1f}°".replace(",", " "), n.code):
            w = stringWidth(label, "Doc", 6.2)
            box = _place(x, y, w, 7, taken, width, height)
            if box is not None:
                taken.append(box)
                d.text(box[0], box[1] + 1.5, label, font="Doc", size=6.2, color=INK)
                break
    _symbol(d, cx, cy, main=True, usable=True)
    d.text(main_box[0], main_box[1] + 1.5, code, font="Doc-Bold", size=7.5, color=INK)
    # north arrow: up the page is geodetic north at the mark
    nx, ny = width - 14, height - 30
    d.polygon([nx - 4, ny, nx + 4, ny, nx, ny + 14], fill=INK)
    d.text(nx, ny + 17, "N", font="Doc-Bold", size=7, color=INK, anchor="middle")
    # scale bar
    bar_m = nice_length_m((width * 0.3) / scale)
    bar = bar_m * scale
    bx, by = 8, 8
    d.line(bx, by, bx + bar, by, stroke=INK, width=1.2)
    d.line(bx, by - 2, bx, by + 2, stroke=INK, width=0.8)
    d.line(bx + bar, by - 2, bx + bar, by + 2, stroke=INK, width=0.8)
    text = f"{bar_m:g} m" if bar_m < 1000 else f"{bar_m / 1000:g} km"
    d.text(bx + bar + 4, by - 2.2, text, font="Doc", size=6.3, color=GREY)
    # legend
    lx = width - 78
    _symbol(d, lx, 10, main=False, usable=True)
    d.text(lx + 5, 7.8, "in use", font="Doc", size=6, color=GREY)
    _symbol(d, lx + 36, 10, main=False, usable=False)
    d.text(lx + 41, 7.8, "not in use", font="Doc", size=6, color=GREY)
    if not nearby:
        d.text(width / 2, 20, "No other mark within 2 km", font="Doc", size=6.5, color=GREY, anchor="middle")
    return VicinityDiagram(d, width, height)
