"""Draw the job page's map (``registry.web.job_map``) in a PDF, from the very same SVG.

The job map is an SVG the server draws from the screening result; the control report paints that
same geometry with reportlab's canvas, so the report's coverage map and the page's are one drawing.
Only what ``job_map`` emits is understood: ``rect``, ``circle``, ``polygon``, ``path`` (M, L, H, V, Z
and their relative forms), ``text`` (with ``text-anchor`` and the label classes), the site clip path
and the "over tolerance" hatch pattern; the optional basemap (``image``, loaded by browsers) is left
out, as a document carries nothing fetched from elsewhere.
"""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET

from reportlab.lib import colors
from reportlab.platypus import Flowable

SVG_NS = "{http://www.w3.org/2000/svg}"
_NUMBER = re.compile(r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?")
_TOKEN = re.compile(r"[MmLlHhVvZz]|[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?")
HATCH_FILL = "#d9a98c"
HATCH_LINE = "#7a4a33"


def path_points(d: str) -> list[list[tuple[float, float]]]:
    """Subpaths of an SVG path (M, L, H, V, Z, absolute and relative) as lists of points.

    >>> path_points("M1,2l3,0v4h-3z")
    [[(1.0, 2.0), (4.0, 2.0), (4.0, 6.0), (1.0, 6.0), (1.0, 2.0)]]
    """
    tokens = _TOKEN.findall(d)
    subpaths: list[list[tuple[float, float]]] = []
    x = y = 0.0
    cmd = ""
    i = 0
    current: list[tuple[float, float]] = []
    while i < len(tokens):
        t = tokens[i]
        if t.isalpha():
            cmd = t
            i += 1
            if cmd in "Zz":
                if current:
                    current.append(current[0])
                    x, y = current[0]
                    subpaths.append(current)
                    current = []
            continue
        if cmd in "Mm":
            dx, dy = float(tokens[i]), float(tokens[i + 1])
            i += 2
            x, y = (x + dx, y + dy) if cmd == "m" else (dx, dy)
            if current:
                subpaths.append(current)
            current = [(x, y)]
            cmd = "l" if cmd == "m" else "L"
        elif cmd in "Ll":
            dx, dy = float(tokens[i]), float(tokens[i + 1])
            i += 2
            x, y = (x + dx, y + dy) if cmd == "l" else (dx, dy)
            current.append((x, y))
        elif cmd in "Hh":
            v = float(tokens[i])
            i += 1
            x = x + v if cmd == "h" else v
            current.append((x, y))
        elif cmd in "Vv":
            v = float(tokens[i])
            i += 1
            y = y + v if cmd == "v" else v
            current.append((x, y))
        else:
            i += 1
    if current:
        subpaths.append(current)
    return subpaths


def _colour(value: str | None):
    if not value or value == "none":
        return None
    if value.startswith("#") and len(value) == 4:  # #rgb → #rrggbb
        value = "#" + "".join(ch * 2 for ch in value[1:])
    try:
        return colors.HexColor(value) if value.startswith("#") else colors.toColor(value)
    except ValueError:
        return None


def _f(el, name: str, default: float = 0.0) -> float:
    try:
        return float(el.get(name, default))
    except (TypeError, ValueError):
        return default


class SvgMap(Flowable):
    """The job map SVG painted at ``width`` points wide (aspect kept)."""

    def __init__(self, svg: str, width: float):
        super().__init__()
        self.root = ET.fromstring(svg)
        vb = [float(v) for v in self.root.get("viewBox", "0 0 760 560").split()]
        self.vb_w, self.vb_h = vb[2], vb[3]
        self.width = width
        self.scale = width / self.vb_w
        self.height = self.vb_h * self.scale
        self.clip: list[list[tuple[float, float]]] | None = None
        for el in self.root.iter(f"{SVG_NS}clipPath"):
            p = el.find(f"{SVG_NS}path")
            if p is not None:
                self.clip = path_points(p.get("d", ""))

    # SVG user units (y down) → flowable points (y up)
    def _xy(self, x: float, y: float) -> tuple[float, float]:
        return x * self.scale, self.height - y * self.scale

    def _path(self, subpaths, *, close: bool):
        p = self.canv.beginPath()
        for sp in subpaths:
            if not sp:
                continue
            p.moveTo(*self._xy(*sp[0]))
            for pt in sp[1:]:
                p.lineTo(*self._xy(*pt))
            if close:
                p.close()
        return p

    def _style(self, el, default_fill=None, default_stroke=None):
        fill = el.get("fill", default_fill)
        stroke = _colour(el.get("stroke", default_stroke))
        width = _f(el, "stroke-width", 1.0) * self.scale
        opacity = _f(el, "opacity", 1.0)
        return fill, stroke, width, opacity

    def _paint(self, path, fill_value, stroke, width, opacity=1.0, bbox=None):
        c = self.canv
        c.saveState()
        if opacity < 1.0:
            c.setFillAlpha(opacity)
            c.setStrokeAlpha(opacity)
        do_fill = False
        if fill_value and fill_value.startswith("url(") and bbox is not None:
            self._hatch(bbox)
        elif _colour(fill_value) is not None:
            c.setFillColor(_colour(fill_value))
            do_fill = True
        if stroke is not None:
            c.setStrokeColor(stroke)
            c.setLineWidth(width)
        c.drawPath(path, stroke=1 if stroke is not None else 0, fill=1 if do_fill else 0)
        c.restoreState()

    def _hatch(self, bbox):
        """The "over tolerance" fill: clay with 45° lines, as the page's SVG pattern."""
        c = self.canv
        x1, y1, x2, y2 = bbox
        c.saveState()
        p = c.beginPath()
        p.rect(x1, y1, x2 - x1, y2 - y1)
        c.clipPath(p, stroke=0, fill=0)
        c.setFillColor(colors.HexColor(HATCH_FILL))
        c.rect(x1, y1, x2 - x1, y2 - y1, stroke=0, fill=1)
        c.setStrokeColor(colors.HexColor(HATCH_LINE))
        c.setLineWidth(1.4 * self.scale)
        step = 6 * self.scale
        span = (x2 - x1) + (y2 - y1)
        k = -span
        while k < span:
            c.line(x1 + k, y1, x1 + k + (y2 - y1), y2)
            k += step
        c.restoreState()

    def _element(self, el, clipped: bool = False):
        tag = el.tag.replace(SVG_NS, "")
        if tag in ("title", "style", "defs", "clipPath", "image", "pattern"):
            return
        if tag == "g":
            clip = el.get("clip-path", "").startswith("url(") and self.clip is not None
            c = self.canv
            if clip:
                c.saveState()
                c.clipPath(self._path(self.clip, close=True), stroke=0, fill=0)
            for child in el:
                self._element(child, clipped or clip)
            if clip:
                c.restoreState()
            return
        if tag == "rect":
            x, y, w, h = _f(el, "x"), _f(el, "y"), _f(el, "width"), _f(el, "height")
            fill, stroke, width, opacity = self._style(el, default_fill="#000000")
            sub = [[(x, y), (x + w, y), (x + w, y + h), (x, y + h)]]
            x1, y2 = self._xy(x, y)
            x2, y1 = self._xy(x + w, y + h)
            self._paint(self._path(sub, close=True), fill, stroke, width, opacity, bbox=(x1, y1, x2, y2))
        elif tag == "circle":
            cx, cy, r = _f(el, "cx"), _f(el, "cy"), _f(el, "r")
            fill, stroke, width, opacity = self._style(el, default_fill="#000000")
            px, py = self._xy(cx, cy)
            p = self.canv.beginPath()
            p.circle(px, py, r * self.scale)
            self._paint(
                p,
                fill,
                stroke,
                width,
                opacity,
                bbox=(px - r * self.scale, py - r * self.scale, px + r * self.scale, py + r * self.scale),
            )
        elif tag == "polygon":
            nums = [float(v) for v in _NUMBER.findall(el.get("points", ""))]
            pts = list(zip(nums[0::2], nums[1::2], strict=False))
            fill, stroke, width, opacity = self._style(el, default_fill="#000000")
            self._paint(self._path([pts], close=True), fill, stroke, width, opacity)
        elif tag == "path":
            d = el.get("d", "")
            closed = "z" in d.lower()
            fill, stroke, width, opacity = self._style(el, default_fill="#000000" if closed else "none")
            self._paint(self._path(path_points(d), close=closed), fill, stroke, width, opacity)
        elif tag == "text":
            self._text(el)

    def _text(self, el):
        c = self.canv
        text = "".join(el.itertext())
        klass = el.get("class", "")
        x, y = self._xy(_f(el, "x"), _f(el, "y"))
        size = 11 * self.scale
        font = "Doc-Bold" if "strong" in klass else "Doc"
        ink = colors.HexColor("#77736c") if "muted" in klass else colors.HexColor("#1d1f21")
        anchor = el.get("text-anchor", "start")
        w = c.stringWidth(text, font, size)
        dx = {"middle": -w / 2, "end": -w}.get(anchor, 0.0)
        # a white halo first, as the page's paint-order stroke, then the text itself
        c.saveState()
        c.setStrokeColor(colors.white)
        c.setLineWidth(2.2 * self.scale)
        t = c.beginText()
        t.setFont(font, size)
        t.setTextRenderMode(1)
        t.setTextOrigin(x + dx, y)
        t.textOut(text)
        c.drawText(t)
        c.restoreState()
        c.saveState()
        c.setFillColor(ink)
        c.setFont(font, size)
        c.drawString(x + dx, y, text)
        c.restoreState()

    def draw(self):
        for el in self.root:
            self._element(el)
