"""The station description sheet of one mark (reportlab; our own layout, see ``layout``).

Order on the page: the warning line when the mark must not be used; the mark's code, name and status
with the QR code that opens this document's public verification page; its description; each published
position (frame, epoch, geographic and ECEF coordinates, grid coordinates and factors, heights, velocity,
network accuracy with the FGDC-STD-007.2-1998 statement and class); the recorded orthometric heights; the
access description, the vicinity diagram and up to two photos; the recovery (visit) and occupation
histories, most recent first; the cautions; the signature block.
"""

from __future__ import annotations

import datetime as dt
import os

from reportlab.lib.units import mm
from reportlab.platypus import Image, KeepTogether, Spacer, Table, TableStyle

from registry.reports import layout as L
from registry.reports.vicinity import vicinity_drawing
from registry.selectors.sheets import PositionBlock, SheetContent

__all__ = ["closing", "render_sheet", "sheet_story"]


def _position_flowables(block: PositionBlock, width: float) -> list:
    half = (width - 8) / 2
    left = L.facts_table([(r.label, r.value, r.note) for r in block.rows], (0.30 * half, 0.40 * half, 0.30 * half))
    if block.grid_rows:
        right = L.facts_table(
            [(r.label, r.value, r.note) for r in block.grid_rows], (0.29 * half, 0.36 * half, 0.35 * half)
        )
    else:
        right = L.para("No grid coordinates for this position.", "grey")
    pair = L.columns([left, right], [half + 8, half])
    head = L.segments([(block.title + " ", "h3"), ("· coordinate epoch ", "h3grey"), (block.epoch, "h3")], "h3")
    lines = list(block.accuracy_lines)
    lines += [r.label + ": " + r.value + (f" ({r.note})" if r.note else "") for r in block.height_rows]
    cells = [[L.fit(line, "cell", width - 10)] for line in lines] + [
        [L.fit(w, "grey", width - 10)] for w in block.warnings
    ]
    # string cells take the "cell" style (a wrapped warning keeps its own grey)
    box = L.PlainRows(
        cells, [width], [L.styles()["cell"]], pad=(5, 6, 1.2, 1.2), first_top=3.5, last_bottom=3.5, background=L.SHADE
    )
    return [KeepTogether([head, Spacer(1, 2), pair, Spacer(1, 3), box]), Spacer(1, 6)]


def _photo(att, max_w: float, max_h: float):
    path = att.file.path if att.file else ""
    if not path or not os.path.isfile(path):
        return None
    try:
        from reportlab.lib.utils import ImageReader

        iw, ih = ImageReader(path).getSize()
    except (OSError, ValueError):
        return None
    ratio = min(max_w / iw, max_h / ih)
    return Image(path, width=iw * ratio, height=ih * ratio)


def sheet_story(
    content: SheetContent,
    *,
    width: float,
    verify_url: str | None,
    include_photos: bool = True,
    title_prefix: str = "",
) -> list:
    """The sheet's flowables (without cautions and signature): a sheet's body, or an appendix of a report.

    ``verify_url`` None: no QR code (in a report the report's own QR code and signature cover the appendix).
    """
    mark = content.mark
    story: list = []

    if content.withheld:
        banner = Table([[L.para(content.withheld, "alarm")]], colWidths=[width])
        banner.setStyle(
            TableStyle(
                [
                    ("BOX", (0, 0), (-1, -1), 1.6, L.INK),
                    ("BACKGROUND", (0, 0), (-1, -1), L.SHADE),
                    ("LEFTPADDING", (0, 0), (-1, -1), 7),
                    ("TOPPADDING", (0, 0), (-1, -1), 5),
                    ("BOTTOMPADDING", (0, 0), (-1, -1), 6),
                ]
            )
        )
        story += [banner, Spacer(1, 6)]

    qr_size = 27 * mm if verify_url else 0.0
    title_cell = [
        L.para(f"{title_prefix}Mark {mark.code}", "title"),
        L.para(f"Status: {content.status_words}", "subtitle"),
        Spacer(1, 5),
        L.facts_table([(r.label, r.value) for r in content.description[1:]], (30 * mm, width - qr_size - 36 * mm)),
    ]
    if verify_url:
        qr_cell = [L.QrCode(verify_url, qr_size), L.static_para("Scan to verify this document", "grey")]
        top = L.columns([title_cell, qr_cell], [width - qr_size - 4, qr_size + 4])
    else:
        top = L.columns([title_cell], [width])
    story += [top, Spacer(1, 4)]

    if not content.withheld:
        story.append(L.para("Published positions", "h2"))
        if content.positions:
            story.append(
                L.static_para(
                    "Each position is given in its own frame at its own coordinate epoch, as published; "
                    "nothing on this sheet has been transformed. Latitude and longitude are on the frame's "
                    "ellipsoid; accuracies are network accuracies at 95 % confidence from the published covariance. "
                    "Convergence γ follows the PROJ sign: grid azimuth = geodetic azimuth − γ.",
                    "grey",
                )
            )
            story.append(Spacer(1, 3))
        for block in content.positions:
            story += _position_flowables(block, width)
        for note in content.notes:
            story.append(L.para(note, "grey"))
        if content.heights:
            story.append(
                KeepTogether(
                    [
                        L.para("Recorded orthometric heights", "h3"),
                        L.grid_table(
                            ["Datum", "Height", "How it was obtained"],
                            [[r.label.split(", ", 1)[1], r.value, r.note] for r in content.heights],
                            [0.30 * width, 0.16 * width, 0.54 * width],
                            numeric={1},
                        ),
                    ]
                )
            )

    access = [
        L.para("Access and vicinity", "h2"),
        L.para(content.access or "No access description recorded.", "body"),
        Spacer(1, 4),
    ]
    diag_w = 0.5 * width
    diagram = vicinity_drawing(mark.code, content.nearby, width=diag_w, height=62 * mm)
    photos = []
    if include_photos:
        for att in content.photos:
            img = _photo(att, 0.48 * width, 29 * mm)
            if img is not None:
                photos += [img, L.para(att.caption or att.original_name, "grey", width=0.48 * width), Spacer(1, 2)]
    side = photos or [L.para("No photo on record.", "grey")]
    vic = L.columns([diagram, side], [diag_w + 6, width - diag_w - 6])
    story.append(
        KeepTogether(
            [
                *access,
                vic,
                L.para(
                    "Diagram: distances and azimuths (clockwise from north) from this mark, geodesic; drawn from the "
                    "registry, not to be used for staking.",
                    "grey",
                ),
            ]
        )
    )

    story.append(L.para("Recovery history", "h2"))
    if content.visits:
        story.append(
            L.grid_table(
                ["Date", "Finding", "By", "Notes"],
                [
                    [f"{v.visited_on:%Y-%m-%d}", v.get_finding_display(), v.visitor or "—", v.notes or "—"]
                    for v in content.visits
                ],
                [0.13 * width, 0.14 * width, 0.17 * width, 0.56 * width],
            )
        )
        if content.visit_count > len(content.visits):
            story.append(L.para(f"The {len(content.visits)} most recent of {content.visit_count} visits.", "grey"))
    else:
        story.append(L.para("No visit recorded.", "grey"))

    story.append(L.para("Occupation history", "h2"))
    if content.occupations:
        rows = []
        for o in content.occupations:
            ant = "—" if o.antenna_height_arp_m is None else f"{o.antenna_height_arp_m:.3f} m to ARP"
            rows.append(
                [
                    f"{o.start_utc:%Y-%m-%d}",
                    o.get_method_display(),
                    f"{(o.end_utc - o.start_utc).total_seconds() / 3600:.1f} h",
                    f"{o.receiver or '—'}\n{o.antenna or '—'}",
                    ant,
                    o.observer or "—",
                ]
            )
        story.append(
            L.grid_table(
                ["Start (UTC)", "Method", "Duration", "Receiver / antenna", "Antenna height", "Observer"],
                rows,
                [0.13 * width, 0.13 * width, 0.09 * width, 0.35 * width, 0.14 * width, 0.16 * width],
                numeric={2},
            )
        )
        if content.occupation_count > len(content.occupations):
            story.append(
                L.para(f"The {len(content.occupations)} most recent of {content.occupation_count} occupations.", "grey")
            )
    else:
        story.append(L.para("No occupation recorded.", "grey"))

    return story


def render_sheet(
    content: SheetContent,
    *,
    code: str,
    revision: int,
    issued: dt.date,
    size_name: str,
    office: str,
    logo_path: str,
    verify_url: str,
    include_photos: bool = True,
) -> L.BuiltPdf:
    """The sheet's PDF bytes with its page count and where the signature goes."""
    width = L.page_size(size_name)[0] - 2 * L.MARGIN
    story = sheet_story(content, width=width, verify_url=verify_url, include_photos=include_photos)
    story += closing(width, record := {})
    heading = L.DocumentHeading(
        office=office,
        kind_title="Station description sheet",
        subject=f"Mark {content.mark.code}",
        code=code,
        revision=revision,
        issued=issued.isoformat(),
        logo_path=logo_path,
    )
    return L.build_pdf(
        story, heading, size_name=size_name, title=f"Station description sheet {content.mark.code}", record=record
    )


def closing(width: float, record: dict, *, extra: list | None = None) -> list:
    """Cautions and the signature block, kept together."""
    cautions = [L.para("Cautions", "h2")]
    cautions += [L.static_para(text, "caution", bulletText="•") for text in L.CAUTIONS]
    sig = L.SignatureBox(width * 0.55, 24 * mm, record)
    left = [
        L.para("Signature", "h3"),
        L.static_para(
            "This document is valid only with the electronic signature of a licensed surveyor in the box beside: "
            "their name, licence number and jurisdiction, and the date of signing. Check it with the QR code or "
            "the verification page.",
            "grey",
        ),
    ]
    block = L.columns([left, sig], [width * 0.45 - 6, width * 0.55 + 6])
    return [Spacer(1, 6), KeepTogether([*cautions, *(extra or []), Spacer(1, 6), block])]
