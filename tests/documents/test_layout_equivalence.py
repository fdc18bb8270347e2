"""The sheets' own fast layout pieces place the same text at the same points as reportlab's own Table
and ``canvas.drawString``, which serve as the reference here (the PDFs are read back with pypdf).

``registry.reports.layout.PlainRows`` (label/value blocks, shaded boxes, side-by-side columns) and
``draw_text`` replace those reportlab calls for speed only; a change in what a reader sees is a bug.
"""

from __future__ import annotations

import io

import pytest
from pypdf import PdfReader
from reportlab.lib.pagesizes import A4
from reportlab.lib.units import mm
from reportlab.platypus import Flowable, Paragraph, SimpleDocTemplate, Spacer, Table, TableStyle

from registry.reports import layout as L


def _placed_text(content: bytes) -> list[tuple[str, float, float]]:
    """Every piece of text with the page point where it starts (text matrix, then the current transform)."""
    out: list[tuple[str, float, float]] = []

    def visit(text, cm, tm, font_dict, font_size):
        if text.strip():
            x = tm[4] * cm[0] + tm[5] * cm[2] + cm[4]
            y = tm[4] * cm[1] + tm[5] * cm[3] + cm[5]
            out.append((text.strip(), round(x, 2), round(y, 2)))

    for page in PdfReader(io.BytesIO(content)).pages:
        page.extract_text(visitor_text=visit)
    return out


def _pdf(story: list) -> bytes:
    buf = io.BytesIO()
    SimpleDocTemplate(buf, pagesize=A4, leftMargin=L.MARGIN, rightMargin=L.MARGIN).build(story)
    return buf.getvalue()


def _reference_facts_table(rows, widths, styles_by_col=("label", "cell", "grey")):
    """What facts_table built before: a reportlab Table with the plain style and a font per column."""
    data = [[L.fit(v, styles_by_col[i], widths[i] - 4) for i, v in enumerate(row)] for row in rows]
    t = Table(data, colWidths=list(widths))
    cmds = list(L.PLAIN)
    for i in range(len(widths)):
        cmds += L._font_cmds(styles_by_col[i], (i, i))
    t.setStyle(TableStyle(cmds))
    return t


ROWS = [
    ("Latitude", "45°12′36.68781″ N", "45.210191058°"),
    ("Grid", "NAD83(2011) / UTM zone 12N (EPSG:6341), a name long enough to wrap in its column", ""),
    ("Receiver / antenna", "receiver R-01\nantenna A-01", "two lines"),
    ("Velocity", "none known", "valid at its epoch"),
]
WIDTHS = (0.30 * 240, 0.40 * 240, 0.30 * 240)


@pytest.fixture(autouse=True)
def _fonts():
    L.register_fonts()


def test_facts_block_matches_reportlab_table():
    ours = L.facts_table(ROWS, WIDTHS)
    assert isinstance(ours, L.PlainRows)
    reference = _reference_facts_table(ROWS, WIDTHS)
    assert ours.wrap(500, 800)[1] == pytest.approx(reference.wrap(500, 800)[1])
    placed = _placed_text(_pdf([Spacer(1, 20), ours]))
    assert len(placed) >= 12 and placed == _placed_text(_pdf([Spacer(1, 20), reference]))


def test_shaded_box_matches_reportlab_table():
    width = 400.0
    lines = ["Horizontal network accuracy 0.022 m at the 95% confidence level", "a second line", "x " * 80]

    def cells():
        return [[L.fit(line, "cell", width - 10)] for line in lines]

    ours = L.PlainRows(
        cells(), [width], [L.styles()["cell"]], pad=(5, 6, 1.2, 1.2), first_top=3.5, last_bottom=3.5, background=L.SHADE
    )
    reference = Table(cells(), colWidths=[width])
    reference.setStyle(
        TableStyle(
            [
                ("BACKGROUND", (0, 0), (-1, -1), L.SHADE),
                ("LEFTPADDING", (0, 0), (-1, -1), 5),
                ("TOPPADDING", (0, 0), (-1, -1), 1.2),
                ("BOTTOMPADDING", (0, 0), (-1, -1), 1.2),
                ("TOPPADDING", (0, 0), (-1, 0), 3.5),
                ("BOTTOMPADDING", (0, -1), (-1, -1), 3.5),
                *L._font_cmds("cell", (0, 0)),
            ]
        )
    )
    assert ours.wrap(500, 800)[1] == pytest.approx(reference.wrap(500, 800)[1])
    placed = _placed_text(_pdf([ours, Spacer(1, 5), L.para("after the box")]))
    assert placed == _placed_text(_pdf([reference, Spacer(1, 5), L.para("after the box")]))


def test_columns_match_a_one_row_reportlab_table():
    def cells():
        left = [
            L.para("Mark CR-100", "title"),
            L.para("Status: in use", "subtitle"),
            Spacer(1, 5),
            L.facts_table([r[:2] for r in ROWS[:2]], (30 * mm, 60 * mm)),
        ]
        # a first flowable with space before it, and one in the middle
        right = [L.para("h3 heading", "h3"), L.static_para("Scan to verify this document", "grey"), L.para("h3", "h3")]
        return left, right

    widths = [140 * mm, 30 * mm]
    left, right = cells()
    ours = L.columns([left, right], widths)
    left, right = cells()
    reference = Table([[left, right]], colWidths=widths)
    reference.setStyle(TableStyle(L.PLAIN))
    placed = _placed_text(_pdf([ours, L.para("next")]))
    assert len(placed) >= 6 and placed == _placed_text(_pdf([reference, L.para("next")]))


class _Strings(Flowable):
    """Draws a few strings either with reportlab's canvas calls or with layout.draw_text/draw_right."""

    def __init__(self, fast: bool):
        super().__init__()
        self.fast = fast
        self.width, self.height = 300, 60

    def draw(self):
        c = self.canv
        texts = [("Doc", 8.0, "Document S-7K4Q-MX2C · revision 2"), ("Doc-Bold", 9.5, "Survey office (ü, °, ″, −)")]
        for i, (font, size, text) in enumerate(texts):
            if self.fast:
                L.draw_text(c, 10, 10 + 20 * i, text, font, size)
                L.draw_right(c, 290, 10 + 20 * i, text[:12], font, size)
            else:
                c.setFont(font, size)
                c.drawString(10, 10 + 20 * i, text)
                c.drawRightString(290, 10 + 20 * i, text[:12])


def test_draw_text_places_what_draw_string_places():
    placed = _placed_text(_pdf([_Strings(fast=True)]))
    assert len(placed) == 4 and placed == _placed_text(_pdf([_Strings(fast=False)]))
    # and the text reads back the same, line by line
    text_fast = PdfReader(io.BytesIO(_pdf([_Strings(fast=True)]))).pages[0].extract_text()
    text_ref = PdfReader(io.BytesIO(_pdf([_Strings(fast=False)]))).pages[0].extract_text()
    assert text_fast == text_ref and "Survey office (ü, °, ″, −)" in text_fast


def test_static_paragraph_breaks_like_a_paragraph_every_time():
    text = L.CAUTIONS[0]
    ref = Paragraph(L.esc(text), L.styles()["caution"], bulletText="•")
    first = L.static_para(text, "caution", bulletText="•")
    again = L.static_para(text, "caution", bulletText="•")  # from the caches
    for p in (ref, first, again):
        p.wrap(300, 800)
    assert [ln[1] for ln in first.blPara.lines] == [ln[1] for ln in ref.blPara.lines]
    assert [ln[1] for ln in again.blPara.lines] == [ln[1] for ln in ref.blPara.lines]
    assert _placed_text(_pdf([again])) == _placed_text(
        _pdf([Paragraph(L.esc(text), L.styles()["caution"], bulletText="•")])
    )
