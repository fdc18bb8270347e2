"""The documents' shared look: fonts, styles, the page frame ("page N of M"), QR code, signature block.

Our own calm, print-like layout: black text on white, one grey for rules and labels, DejaVu Sans (its
digits are tabular, so numbers line up in columns), numbers right-aligned. Every page carries the
office's name, the document's kind, code, revision and issue date in its heading and "page N of M" in its
foot. The signature block is an empty box on the signature page; at signing, the visible signature is
placed in that box (``registry.reports.signing``), and where it is (page, box) is recorded when the PDF
is built.
"""

from __future__ import annotations

import io
import os
import zlib
from dataclasses import dataclass, field
from functools import lru_cache

from reportlab.lib import colors
from reportlab.lib.enums import TA_LEFT
from reportlab.lib.pagesizes import A4, LETTER
from reportlab.lib.rl_accel import escapePDF, fp_str
from reportlab.lib.styles import ParagraphStyle
from reportlab.lib.units import mm
from reportlab.pdfbase import pdfdoc, pdfmetrics
from reportlab.pdfbase.ttfonts import TTFont
from reportlab.pdfgen import canvas as rl_canvas
from reportlab.platypus import Flowable, Paragraph, Table, TableStyle
from reportlab.platypus.doctemplate import BaseDocTemplate, PageTemplate
from reportlab.platypus.frames import Frame

#: zlib level of the PDFs' page and font streams. reportlab uses zlib's default (6); level 1 takes about
#: half the time on a sheet (its two embedded font subsets and pages: ~1 ms less per sheet) for files
#: about 6 % larger. Any level decodes the same (FlateDecode).
PDF_STREAM_ZLIB_LEVEL = 1


class _FlateStreams(pdfdoc.PDFStreamFilterZCompress):
    """reportlab's Flate filter at :data:`PDF_STREAM_ZLIB_LEVEL` (installed below for this process's PDFs)."""

    def encode(self, text):
        if isinstance(text, str):
            text = text.encode("utf8")
        return zlib.compress(text, PDF_STREAM_ZLIB_LEVEL)


pdfdoc.PDFZCompress = _FlateStreams()

FONT_DIRS = ("/usr/share/fonts/truetype/dejavu", "/usr/share/fonts/dejavu")
FONT_FILES = {
    "Doc": "DejaVuSans.ttf",
    "Doc-Bold": "DejaVuSans-Bold.ttf",
    "Doc-Mono": "DejaVuSansMono.ttf",
}
INK = colors.black
GREY = colors.Color(0.42, 0.42, 0.42)
RULE = colors.Color(0.72, 0.72, 0.72)
SHADE = colors.Color(0.94, 0.94, 0.94)
MARGIN = 16 * mm

#: Cautions printed on every document (plain words; the issue's list).
CAUTIONS = (
    "Verify a position on site before using it: occupy the mark and take a check shot on a second trusted mark, "
    "and compare the result with the published coordinates in the same frame and at the same epoch.",
    "A mark may have been disturbed since it was last visited; the recovery history shows when it was last "
    "found and in what condition.",
    "Accuracies are stated at 95 % confidence: the true position lies within the stated figure of the published "
    "one in about 19 cases out of 20; it can lie further away.",
    "Use for boundary, engineering or construction work is subject to local regulations and licensed "
    "professional practice. A licensed surveyor decides whether a mark and its figures are fit for a purpose.",
)


class FontMissing(RuntimeError):
    """The report fonts are not installed (system check registry.E030 says so at start)."""


def font_path(name: str) -> str | None:
    for d in FONT_DIRS:
        path = os.path.join(d, name)
        if os.path.isfile(path):
            return path
    return None


@lru_cache(maxsize=1)
def register_fonts() -> None:
    for alias, filename in FONT_FILES.items():
        path = font_path(filename)
        if path is None:
            raise FontMissing(
                f"Font {filename} not found in {', '.join(FONT_DIRS)} (Debian package fonts-dejavu-core)."
            )
        pdfmetrics.registerFont(TTFont(alias, path))
    from reportlab.pdfbase.pdfmetrics import registerFontFamily

    registerFontFamily("Doc", normal="Doc", bold="Doc-Bold", italic="Doc", boldItalic="Doc-Bold")


def page_size(name: str):
    return LETTER if str(name).lower() == "letter" else A4


@lru_cache(maxsize=1)
def styles() -> dict[str, ParagraphStyle]:
    register_fonts()
    base = ParagraphStyle("body", fontName="Doc", fontSize=8.4, leading=10.6, textColor=INK, alignment=TA_LEFT)
    return {
        "body": base,
        "small": ParagraphStyle("small", parent=base, fontSize=7.2, leading=9.0),
        "grey": ParagraphStyle("grey", parent=base, fontSize=7.2, leading=9.0, textColor=GREY),
        "label": ParagraphStyle("label", parent=base, fontSize=7.4, leading=9.2, textColor=GREY),
        "cell": ParagraphStyle("cell", parent=base, fontSize=7.8, leading=9.6),
        "title": ParagraphStyle("title", parent=base, fontName="Doc-Bold", fontSize=15, leading=19),
        "subtitle": ParagraphStyle("subtitle", parent=base, fontSize=9.5, leading=12.5, textColor=GREY),
        "h2": ParagraphStyle(
            "h2", parent=base, fontName="Doc-Bold", fontSize=10, leading=13, spaceBefore=7, spaceAfter=3
        ),
        "h3": ParagraphStyle("h3", parent=base, fontName="Doc-Bold", fontSize=8.8, leading=11, spaceBefore=3),
        "h3grey": ParagraphStyle(
            "h3grey", parent=base, fontName="Doc-Bold", fontSize=8.8, leading=11, spaceBefore=3, textColor=GREY
        ),
        "alarm": ParagraphStyle("alarm", parent=base, fontName="Doc-Bold", fontSize=11, leading=14.5),
        "caution": ParagraphStyle("caution", parent=base, fontSize=7.6, leading=9.6, leftIndent=8, bulletIndent=0),
    }


def draw_text(c, x: float, y: float, text: str, font_name: str, size: float, leading: float | None = None) -> None:
    """Draw one line of ``text`` with its baseline at (x, y) in a TrueType font (the report fonts).

    The same PDF text operators ``canvas.drawString`` writes for a TrueType font (text matrix, the
    font subset, ``Tj``), written directly: drawString also builds a text object and measures the
    string, which on a sheet's few hundred strings cost more than the text itself. The fill colour is
    the canvas's (``setFillColor`` before).
    """
    if not text:
        return
    font = pdfmetrics.getFont(font_name)
    doc = c._doc
    size_lead = f"{fp_str(size)} Tf {fp_str(size * 1.2 if leading is None else leading)} TL"
    parts = [f"BT 1 0 0 1 {fp_str(x, y)} Tm"]
    current = -1
    for subset, chunk in font.splitString(text, doc):
        if subset != current:
            parts.append(f"{font.getSubsetInternalName(subset, doc)} {size_lead}")
            current = subset
        parts.append(f"({escapePDF(chunk)}) Tj")
    parts.append("T* ET")  # as drawString ends its line (text extraction reads it as a line break)
    c._code.append(" ".join(parts))


def draw_right(c, x: float, y: float, text: str, font_name: str, size: float) -> None:
    """:func:`draw_text` ending at ``x`` (as ``canvas.drawRightString``)."""
    draw_text(c, x - pdfmetrics.stringWidth(text, font_name, size), y, text, font_name, size)


def esc(text: str) -> str:
    """Escape text for a reportlab Paragraph."""
    return str(text).replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")


class TextLine(Flowable):
    """One line of text in one or more styled segments: what a Paragraph does for a heading, without
    parsing and line breaking (sheets print dozens of them; see benchmarks/bench_documents.py)."""

    def __init__(self, segments: list[tuple[str, ParagraphStyle]], style: ParagraphStyle):
        super().__init__()
        self.segments = segments
        self.style = style
        self.spaceBefore = style.spaceBefore
        self.spaceAfter = style.spaceAfter

    def wrap(self, avail_width, avail_height):
        self.width = avail_width
        self.height = self.style.leading
        return self.width, self.height

    def draw(self):
        c = self.canv
        x = 0.0
        baseline = self.style.leading - self.style.fontSize
        last = len(self.segments) - 1
        for i, (text, st) in enumerate(self.segments):
            c.setFillColor(st.textColor)
            draw_text(c, x, baseline, text, st.fontName, st.fontSize)
            if i < last:
                x += pdfmetrics.stringWidth(text, st.fontName, st.fontSize)


#: Line breaks of fixed texts, by (text, style, bullet, widths): the same cautions and explanations are
#: broken into the same lines on every document, so they are measured once per process.
_BREAKS: dict[tuple, object] = {}


#: Parsed fragments of fixed texts, by (text, style, bullet).
_PARSED: dict[tuple, tuple] = {}


class StaticParagraph(Paragraph):
    """A Paragraph of fixed wording (cautions, explanations printed on every document) whose markup is
    parsed and whose lines are broken once per process (per width) and reused; drawn exactly as a
    Paragraph."""

    def __init__(self, text: str, style: ParagraphStyle, bulletText: str | None = None):
        key = (text, style.name, bulletText)
        parsed = _PARSED.get(key)
        if parsed is None:
            super().__init__(text, style, bulletText=bulletText)
            if len(_PARSED) < 256 and self.style is style:
                _PARSED[key] = (self.text, self.frags)
            return
        super().__init__(None, style, bulletText=bulletText, frags=[f.clone() for f in parsed[1]])
        self.text = parsed[0]

    def breakLines(self, width):
        key = (self.text, self.style.name, self.bulletText, tuple(width) if isinstance(width, list) else width)
        found = _BREAKS.get(key)
        if found is None:
            found = super().breakLines(width)
            if found.kind != 0 or len(_BREAKS) >= 256:  # only simple, one-style paragraphs; bounded
                return found
            _BREAKS[key] = found
        return found.clone(lines=[(extra, list(words)) for extra, words in found.lines])


def static_para(text: str, style: str = "body", **kwargs) -> StaticParagraph:
    """A :class:`StaticParagraph` of fixed ``text`` (not user data) in ``style``."""
    return StaticParagraph(esc(text), styles()[style], **kwargs)


def _fits(text: str, st: ParagraphStyle, width: float) -> bool:
    return "\n" not in text and pdfmetrics.stringWidth(text, st.fontName, st.fontSize) <= width


#: Usable width of the narrowest page (Letter is wider than A4), for one-line decisions made before layout.
LINE_WIDTH = A4[0] - 2 * MARGIN


def para(text: str, style: str = "body", width: float | None = None):
    """``text`` in ``style``: one drawn line when it fits on one (of ``width``, default the text column),
    else a wrapping Paragraph."""
    st = styles()[style]
    text = "" if text is None else str(text)
    if text and _fits(text, st, (width or LINE_WIDTH) - 2):
        return TextLine([(text, st)], st)
    return Paragraph(esc(text).replace("\n", "<br/>"), st)


def segments(parts: list[tuple[str, str]], style: str):
    """A one-line heading in several styles (``parts`` of (text, style name)); wraps when too long."""
    st = styles()[style]
    segs = [(t, styles()[name]) for t, name in parts]
    total = sum(pdfmetrics.stringWidth(t, s.fontName, s.fontSize) for t, s in segs)
    if total <= LINE_WIDTH - 2:
        return TextLine(segs, st)
    return Paragraph("".join(esc(t) for t, _ in parts), st)


def fit(text: str, style: str, width: float):
    """``text`` as a plain string when each of its lines fits in ``width`` points (fast), else a Paragraph."""
    text = "" if text is None else str(text)
    st = styles()[style]
    if all(pdfmetrics.stringWidth(line, st.fontName, st.fontSize) <= width for line in text.split("\n")):
        return text
    return Paragraph(esc(text).replace("\n", "<br/>"), st)


def _font_cmds(style_name: str, cols: tuple[int, int], rows: tuple[int, int] = (0, -1)) -> list:
    st = styles()[style_name]
    (c0, c1), (r0, r1) = cols, rows
    return [
        ("FONT", (c0, r0), (c1, r1), st.fontName, st.fontSize, st.leading),
        ("TEXTCOLOR", (c0, r0), (c1, r1), st.textColor),
    ]


PLAIN = [
    ("VALIGN", (0, 0), (-1, -1), "TOP"),
    ("LEFTPADDING", (0, 0), (-1, -1), 0),
    ("RIGHTPADDING", (0, 0), (-1, -1), 4),
    ("TOPPADDING", (0, 0), (-1, -1), 1.2),
    ("BOTTOMPADDING", (0, 0), (-1, -1), 1.2),
]


class PlainRows(Flowable):
    """Rows in fixed columns, laid out and drawn exactly as a reportlab ``Table`` with ``VALIGN TOP``,
    left-aligned cells and constant padding lays them out and draws them, without the Table's per-cell
    style machinery (which cost more than the text itself on a sheet; see benchmarks/bench_documents.py).
    It does not split across pages: used for short blocks and side-by-side columns.

    A cell is a string (drawn in its column's style: row height = lines × leading + padding, baseline =
    row top − top padding − font size), a flowable, or a list of flowables (stacked with their space
    before and after, as a Table stacks a cell's flowables).

    ``col_styles``: one ParagraphStyle per column (font, size, leading, colour of string cells); ``pad``:
    left, right, top, bottom padding; ``first_top``/``last_bottom``: the first row's top and the last
    row's bottom padding when different; ``background``: a fill behind the whole block.
    """

    def __init__(
        self,
        rows: list[list],
        widths: list[float],
        col_styles: list[ParagraphStyle],
        *,
        pad: tuple[float, float, float, float] = (0.0, 4.0, 1.2, 1.2),
        first_top: float | None = None,
        last_bottom: float | None = None,
        background=None,
    ):
        super().__init__()
        self.hAlign = "CENTER"  # as a Table
        self.rows = [[v if isinstance(v, str | list | tuple) else [v] for v in row] for row in rows]
        self.widths = list(widths)
        self.col_styles = col_styles
        self.background = background
        left, right, top, bottom = pad
        n = len(rows)
        self.tops = [top] * n
        if n and first_top is not None:
            self.tops[0] = first_top
        bottoms = [bottom] * n
        if n and last_bottom is not None:
            bottoms[-1] = last_bottom
        self.heights: dict[int, list[float]] = {}  # id of a flowable cell -> its flowables' heights
        self.row_heights = []
        for i, row in enumerate(self.rows):
            h = 0.0
            for v, st, w in zip(row, col_styles, self.widths, strict=True):
                if isinstance(v, str):
                    t = st.leading * (v.count("\n") + 1)
                else:
                    t = self._stack(v, w - left - right)
                h = max(h, t + self.tops[i] + bottoms[i])
            self.row_heights.append(h)
        xs, x = [], left
        for w in self.widths:
            xs.append(x)
            x += w
        self.xs = xs
        self.width = sum(self.widths)
        self.height = sum(self.row_heights)

    def _stack(self, items, avail_width: float) -> float:
        """Wrap a cell's flowables; their total height as reportlab's Table counts it."""
        if not items:
            return 0.0
        hs, total, sa = [], 0.0, 0.0
        for f in items:
            _w, h = f.wrapOn(None, avail_width, 72000)
            sb, sa = f.getSpaceBefore(), f.getSpaceAfter()
            hs.append(h)
            total += h + sb + sa
        self.heights[id(items)] = hs
        return total - items[0].getSpaceBefore() - sa

    def wrap(self, avail_width, avail_height):
        return self.width, self.height

    def draw(self):
        c = self.canv
        if self.background is not None:
            c.setFillColor(self.background)
            c.rect(0, 0, self.width, self.height, stroke=0, fill=1)
        color = None
        y_top = self.height
        for row, rh, top in zip(self.rows, self.row_heights, self.tops, strict=True):
            for v, st, x in zip(row, self.col_styles, self.xs, strict=True):
                if not v:
                    continue
                if not isinstance(v, str):
                    y = y_top - top + v[0].getSpaceBefore()
                    for f, h in zip(v, self.heights[id(v)], strict=True):
                        y -= f.getSpaceBefore() + h
                        f.drawOn(c, x, y)
                        y -= f.getSpaceAfter()
                    color = None  # a flowable may have changed it
                    continue
                if st.textColor is not color:
                    color = st.textColor
                    c.setFillColor(color)
                y = y_top - top - st.fontSize
                for line in v.split("\n"):
                    draw_text(c, x, y, line, st.fontName, st.fontSize, st.leading)
                    y -= st.leading
            y_top -= rh


def columns(cells: list, widths: list[float]) -> PlainRows:
    """Flowables side by side (one row of cells, each a flowable or a list of them), tops aligned, with
    the plain padding (:data:`PLAIN`)."""
    st = styles()["body"]
    return PlainRows([cells], widths, [st] * len(widths))


def facts_table(rows: list[tuple[str, ...]], widths: tuple[float, ...], *, styles_by_col=("label", "cell", "grey")):
    """Rows of label / value [/ note]: labels grey, values wrapped only when they must."""
    data = [[fit(v, styles_by_col[i], widths[i] - 4) for i, v in enumerate(row)] for row in rows]
    st = styles()
    return PlainRows(data, list(widths), [st[styles_by_col[i]] for i in range(len(widths))])


def grid_table(header: list[str], rows: list[list[str]], widths: list[float], *, numeric: set[int] = frozenset()):
    """A ruled table with a header row; columns in ``numeric`` right-aligned."""
    body = [[fit(v, "cell", widths[i] - 5) for i, v in enumerate(r)] for r in rows]
    head = [fit(h, "label", widths[i] - 5) for i, h in enumerate(header)]
    t = Table([head, *body], colWidths=widths, repeatRows=1)
    cmds = [
        ("VALIGN", (0, 0), (-1, -1), "TOP"),
        ("LINEBELOW", (0, 0), (-1, 0), 0.6, INK),
        ("LINEBELOW", (0, 1), (-1, -1), 0.25, RULE),
        ("LEFTPADDING", (0, 0), (-1, -1), 2),
        ("RIGHTPADDING", (0, 0), (-1, -1), 3),
        ("TOPPADDING", (0, 0), (-1, -1), 1.5),
        ("BOTTOMPADDING", (0, 0), (-1, -1), 1.5),
        *_font_cmds("label", (0, -1), (0, 0)),
        *_font_cmds("cell", (0, -1), (1, -1)),
    ]
    for i in numeric:
        cmds.append(("ALIGN", (i, 0), (i, -1), "RIGHT"))
    t.setStyle(TableStyle(cmds))
    return t


# --------------------------------------------------------------------------------------------------
# QR code (segno), drawn as vector squares
# --------------------------------------------------------------------------------------------------


#: QR data mask pattern (ISO/IEC 18004:2015 §7.8). Fixed instead of chosen by segno's penalty scoring,
#: which is pure Python and costs ~3 ms per code (a tenth of a sheet's budget); the mask only balances
#: dark and light modules, any of the eight decodes, and the tests decode every code with zxing-cpp.
QR_MASK = 2


class QrCode(Flowable):
    """A QR code (segno, error correction M) of ``text``, ``size`` points square, quiet zone included."""

    def __init__(self, text: str, size: float):
        super().__init__()
        import segno

        self.text = text
        self.qr = segno.make(text, error="m", micro=False, mask=QR_MASK)
        self.size = size
        self.width = self.height = size

    def draw(self):
        rows = [list(r) for r in self.qr.matrix_iter(scale=1, border=4)]
        n = len(rows)
        cell = self.size / n
        c = self.canv
        c.setFillColor(INK)
        c.setStrokeColor(INK)
        # One path of rectangles (each run of dark modules in a row), filled once.
        path = c.beginPath()
        for i, row in enumerate(rows):
            j = 0
            while j < n:
                if row[j]:
                    k = j
                    while k < n and row[k]:
                        k += 1
                    path.rect(j * cell, self.size - (i + 1) * cell, (k - j) * cell, cell)
                    j = k
                else:
                    j += 1
        c.drawPath(path, stroke=0, fill=1)


# --------------------------------------------------------------------------------------------------
# Signature block: an empty box whose page and position are recorded for the signing step
# --------------------------------------------------------------------------------------------------


class SignatureBox(Flowable):
    """The box the visible signature goes into; records (page index, x1, y1, x2, y2) when drawn."""

    def __init__(self, width: float, height: float, record: dict):
        super().__init__()
        self.width, self.height = width, height
        self.record = record

    def draw(self):
        c = self.canv
        c.setStrokeColor(GREY)
        c.setLineWidth(0.6)
        c.setDash(2, 2)
        c.rect(0, 0, self.width, self.height, stroke=1, fill=0)
        c.setDash()
        c.setFont("Doc", 7)
        c.setFillColor(GREY)
        c.drawString(4, self.height - 10, "Signature of the licensed surveyor (electronic, applied by the registry)")
        x1, y1 = c.absolutePosition(0, 0)
        self.record.update(
            page=c.getPageNumber() - 1,
            box=[round(x1, 2), round(y1, 2), round(x1 + self.width, 2), round(y1 + self.height, 2)],
        )


# --------------------------------------------------------------------------------------------------
# The page frame
# --------------------------------------------------------------------------------------------------


@dataclass
class DocumentHeading:
    office: str
    kind_title: str  # "Station description sheet"
    subject: str  # "Mark CR104"
    code: str
    revision: int
    issued: str  # ISO date
    logo_path: str = ""
    footer_note: str = "Verify control on site before use; see the cautions in this document."
    extra: dict = field(default_factory=dict)


def _numbered_canvas(heading: DocumentHeading):
    class NumberedCanvas(rl_canvas.Canvas):
        """Defers each page so that the heading and foot can say "page N of M"."""

        def __init__(self, *args, **kwargs):
            super().__init__(*args, **kwargs)
            self._saved: list[dict] = []

        def showPage(self):
            self._saved.append(dict(self.__dict__))
            self._startPage()

        def save(self):
            total = len(self._saved)
            heading.extra["page_count"] = total
            for state in self._saved:
                self.__dict__.update(state)
                _draw_frame(self, heading, self._pageNumber, total)
                super().showPage()
            super().save()

    return NumberedCanvas


def _draw_frame(c, h: DocumentHeading, page: int, total: int) -> None:
    width, height = c._pagesize
    top = height - 10 * mm
    x0, x1 = MARGIN, width - MARGIN
    c.saveState()
    logo_w = 0.0
    if h.logo_path and os.path.isfile(h.logo_path):
        try:
            c.drawImage(
                h.logo_path, x0, top - 9 * mm, width=14 * mm, height=9 * mm, preserveAspectRatio=True, mask="auto"
            )
            logo_w = 16 * mm
        except OSError:
            logo_w = 0.0
    c.setFillColor(INK)
    draw_text(c, x0 + logo_w, top - 3.5 * mm, h.office[:90], "Doc-Bold", 9.5)
    c.setFillColor(GREY)
    draw_text(c, x0 + logo_w, top - 7.5 * mm, f"{h.kind_title} · {h.subject}", "Doc", 8)
    c.setFillColor(INK)
    draw_right(c, x1, top - 3.5 * mm, f"Document {h.code} · revision {h.revision}", "Doc", 8)
    c.setFillColor(GREY)
    draw_right(c, x1, top - 7.5 * mm, f"Issued {h.issued} · page {page} of {total}", "Doc", 8)
    c.setStrokeColor(INK)
    c.setLineWidth(0.6)
    c.line(x0, top - 10 * mm, x1, top - 10 * mm)
    # foot
    c.setStrokeColor(RULE)
    c.setLineWidth(0.4)
    c.line(x0, 12 * mm, x1, 12 * mm)
    c.setFillColor(GREY)
    draw_text(c, x0, 8.5 * mm, h.footer_note, "Doc", 7)
    draw_right(c, x1, 8.5 * mm, f"{h.code} rev. {h.revision} · page {page} of {total}", "Doc", 7)
    c.restoreState()


@dataclass
class BuiltPdf:
    content: bytes
    page_count: int
    signature_page: int
    signature_box: list[float]


def build_pdf(flowables: list, heading: DocumentHeading, *, size_name: str, title: str, record: dict) -> BuiltPdf:
    """Lay out ``flowables`` in the document frame; ``record`` is the dict a :class:`SignatureBox` fills."""
    register_fonts()
    buf = io.BytesIO()
    size = page_size(size_name)
    doc = BaseDocTemplate(
        buf,
        pagesize=size,
        leftMargin=MARGIN,
        rightMargin=MARGIN,
        topMargin=24 * mm,
        bottomMargin=16 * mm,
        title=title,
        author=heading.office,
        subject=f"Document {heading.code}, revision {heading.revision}",
        creator="Control-mark registry",
        keywords=[heading.code],
    )
    frame = Frame(doc.leftMargin, doc.bottomMargin, doc.width, doc.height, id="body", leftPadding=0, rightPadding=0)
    doc.addPageTemplates([PageTemplate(id="page", frames=[frame])])
    doc.build(flowables, canvasmaker=_numbered_canvas(heading))
    if "box" not in record:
        raise RuntimeError("The signature block was not placed.")
    return BuiltPdf(
        content=buf.getvalue(),
        page_count=heading.extra["page_count"],
        signature_page=record["page"],
        signature_box=record["box"],
    )
