"""The control report of one job (reportlab; our own layout, see ``layout``).

Contents, in order: cover page; purpose and scope; the deliverable (frame, epoch, grid, units, height
system, stated once); the control used; the base screening (its statement, every error-budget term of
the ranked candidates, the coverage map drawn from the job page's own map geometry, the check marks and
their allowances, base service areas where the screening gives them); check-point results (the NSSDA or
ASPRS Edition 2 statement of an uploaded residual file, from ``registry.geodesy.statements``); methods and
equipment from the occupation records; limitations and cautions; the signature page; the station
description sheets of the marks used, as an appendix.

The screening is the job page's own (``registry.services.screening.job_screen``), printed from its
presentation (``ScreeningResult.as_dict``: the same figures, rounding and words as the page and the API)
and its map (``registry.web.job_map.build_job_map``).
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Callable

from django.conf import settings
from django.utils import timezone
from reportlab.lib.units import mm
from reportlab.platypus import KeepTogether, PageBreak, Spacer, Table, TableStyle

from registry.geodesy.frames import format_epoch, frame_info
from registry.models import Job, Mark, Occupation
from registry.reports import layout as L
from registry.reports.sheet import closing, sheet_story
from registry.reports.svgmap import SvgMap

#: Most sheets in the appendix ("candidates" option: every usable candidate by rank, up to this many).
MAX_APPENDIX = 250
#: Rows of the ranked-candidates table (all usable ones up to this, then the excluded ones counted).
MAX_RANKED_ROWS = 30


def _grid_words(job: Job) -> str:
    if job.grid_epsg:
        from registry.formatting import format_frame

        return format_frame(job.grid_epsg)
    return "the UTM zone of the site, chosen automatically"


def _marks_used(result, presented: dict, options: dict) -> list[Mark]:
    used = [c.mark for c in result.chosen] + [cm.candidate.mark for cm in result.check_marks]
    if options.get("appendix") == "candidates":
        used += [c.mark for c in result.usable_candidates]
    seen, out = set(), []
    for m in used:
        if m.pk not in seen:
            seen.add(m.pk)
            out.append(m)
    return out[:MAX_APPENDIX]


def _table(header, rows, widths, numeric=frozenset()):
    return L.grid_table(header, rows, widths, numeric=set(numeric))


def _fmt(v, nd=1, unit=""):
    return "—" if v is None else f"{v:.{nd}f}{unit}"


def build_report_pdf(
    *,
    job: Job,
    actor,
    code: str,
    revision: int,
    options: dict,
    verify_url: str,
    progress: Callable[[float, str], None] | None = None,
    issued: dt.date | None = None,
):
    """The report's PDF and the ids of the marks it prints (for the out-of-date hook)."""
    from registry.geodesy import statements
    from registry.selectors.sheets import sheet_content
    from registry.services.screening import BUDGET_TERM_DESCRIPTIONS, job_screen
    from registry.web.job_map import build_job_map, legend_rows

    def step(fraction: float, text: str) -> None:
        if progress is not None:
            progress(fraction, text)

    size_name = options.get("page_size") or settings.REGISTRY.get("PAGE_SIZE", "A4")
    width = L.page_size(size_name)[0] - 2 * L.MARGIN
    st = L.styles()
    issued = issued or timezone.now().date()
    step(0.02, "screening the candidate bases")
    result = job_screen(actor=actor, code=job.code)
    presented = result.as_dict()
    s = result.settings
    fi = frame_info(s.frame_epsg)
    step(0.10, "drawing the coverage map")
    job_map = build_job_map(result)
    story: list = []

    # ---- cover page
    story += [
        Spacer(1, 30 * mm),
        L.Paragraph("Control report", st["title"]),
        L.para(f"Job {job.code} · {job.name}", "subtitle"),
        Spacer(1, 8 * mm),
        L.facts_table(
            [
                ("Client", job.client or "—"),
                ("Prepared by", settings.REGISTRY.get("OFFICE_NAME", "")),
                ("Document", f"{code}, revision {revision}"),
                ("Issued", issued.isoformat()),
                ("Deliverable", f"{fi.label} at epoch {format_epoch(s.epoch_yr)}"),
                ("Tolerances", f"{s.tol_h_mm:.1f} mm horizontal, {s.tol_v_mm:.1f} mm vertical, at 95 %"),
            ],
            (32 * mm, width - 32 * mm),
        ),
        Spacer(1, 8 * mm),
        L.para("Summary", "h2"),
        L.para(presented["statement"], "body"),
        Spacer(1, 10 * mm),
        L.QrCode(verify_url, 30 * mm),
        L.para(f"Verify this report: scan the code or open {verify_url}", "grey"),
        PageBreak(),
    ]

    # ---- purpose and scope
    site = presented["site"]
    site_words = (
        f"a point at {site['reference_lat_deg']:.6f}°, {site['reference_lon_deg']:.6f}°"
        if site["kind"] == "point"
        else f"a polygon of {site['area_m2'] / 10000:.2f} ha, evaluated on {site['grid_cells']} cells of "
        f"{site['grid_spacing_m']:.1f} m and {site['boundary_samples']} boundary points"
    )
    story += [
        L.para("1. Purpose and scope", "h2"),
        L.para(
            f"This report states the survey control for job {job.code} ({job.name}) and how it was chosen: which "
            "registered marks serve as RTK bases and check marks, the error each base is expected to give over the "
            f"site, and the accuracy of the marks themselves. The site is {site_words}. The screening was computed "
            f"on {presented['as_of']} from the registry's records.",
            "body",
        ),
        L.para("2. Deliverable", "h2"),
        L.facts_table(
            [
                ("Frame", f"{fi.label}, {fi.kind}"),
                ("Coordinate epoch", format_epoch(s.epoch_yr)),
                ("Grid", _grid_words(job)),
                ("Units", "metres (accuracies in millimetres)"),
                (
                    "Height system",
                    "ellipsoidal heights in the frame above; orthometric heights only where a mark's sheet states "
                    "them, with their datum and source",
                ),
                ("Accuracy", "95 % confidence: horizontal as the radius of a circle, vertical as a linear value"),
            ],
            (34 * mm, width - 34 * mm),
        ),
    ]

    # ---- control used
    cand_by_code = {c["code"]: c for c in presented["candidates"]}
    used_rows = []
    for code_ in presented["chosen_bases"]:
        c = cand_by_code[code_]
        p = c["position"] or {}
        used_rows.append(
            [
                code_,
                "base",
                f"EPSG:{p.get('frame_epsg', '—')} @ {p.get('epoch_yr', 0):.3f}" if p else "—",
                _fmt(c["distance_m"] / 1000 if c["distance_m"] is not None else None, 2, " km"),
                _fmt(c["horizontal_95_mm"]),
                _fmt(c["vertical_95_mm"]),
                c["coverage_words"],
            ]
        )
    for cm in presented["check_marks"]:
        c = cand_by_code[cm["code"]]
        p = c["position"] or {}
        used_rows.append(
            [
                cm["code"],
                "check mark",
                f"EPSG:{p.get('frame_epsg', '—')} @ {p.get('epoch_yr', 0):.3f}" if p else "—",
                _fmt(cm["distance_m"] / 1000 if cm["distance_m"] is not None else None, 2, " km"),
                "",
                "",
                "",
            ]
        )
    story += [L.para("3. Control used", "h2")]
    if used_rows:
        story.append(
            _table(
                ["Mark", "Role", "Position used (frame @ epoch)", "From site", "H 95 (mm)", "V 95 (mm)", "Coverage"],
                used_rows,
                [0.12 * width, 0.11 * width, 0.27 * width, 0.11 * width, 0.1 * width, 0.1 * width, 0.19 * width],
                numeric={3, 4, 5},
            )
        )
        story.append(
            L.para(
                "H 95 and V 95: the rover's expected error at the farthest part of the site from that base, at 95 %. "
                "Each mark's published coordinates are on its sheet in the appendix.",
                "grey",
            )
        )
        areas = getattr(result, "service_areas", None)
        if areas:
            story.append(L.para("Service areas: " + "; ".join(str(a) for a in areas), "body"))
        elif len(presented["chosen_bases"]) > 1:
            story.append(
                L.para(
                    "Two bases are needed: survey each part of the site from the base that gives it the smaller "
                    "error (the coverage map shows where the pair meets the tolerance).",
                    "body",
                )
            )
    else:
        story.append(L.para("No base can be proposed for this site (see the screening below).", "body"))

    # ---- screening
    step(0.15, "writing the screening tables")
    story += [L.para("4. Base screening", "h2"), L.para(presented["statement"], "body"), Spacer(1, 3)]
    st_set = presented["settings"]
    story.append(
        L.para(
            f"Error model: {st_set['rtk_h_fixed_mm']:.1f} mm + {st_set['rtk_h_ppm']:.1f} ppm horizontal "
            f"({'2D RMS' if st_set['rtk_h_meaning'] == 'drms' else 'per axis'}), {st_set['rtk_v_fixed_mm']:.1f} mm + "
            f"{st_set['rtk_v_ppm']:.1f} ppm vertical, {st_set['rtk_combination']}; setup {st_set['setup_h_mm']:.1f} mm "
            f"per axis and {st_set['setup_v_mm']:.1f} mm in height (1σ); unmodelled motion "
            f"{st_set['assumed_rate_mm_yr']:.1f} mm/yr in a dynamic frame, {st_set['assumed_rate_plate_fixed_mm_yr']:.1f} "
            f"mm/yr in a plate-fixed one (where a mark has no velocity); longest baseline {st_set['max_baseline_m'] / 1000:.1f} km; "
            f"a good visit within {st_set['recovery_years']:.0f} years.",
            "small",
        )
    )
    terms = [t for t, _ in BUDGET_TERM_DESCRIPTIONS]
    story.append(
        L.para(
            "Budget terms (1σ, mm; horizontal per axis / vertical): "
            + "; ".join(f"{t}: {d}" for t, d in BUDGET_TERM_DESCRIPTIONS)
            + ". They add in quadrature; 95 % figures are 2.4477·σ horizontal (circle) and 1.96·σ vertical.",
            "grey",
        )
    )
    usable = [c for c in presented["candidates"] if not c["excluded"]]
    rows = []
    for c in usable[:MAX_RANKED_ROWS]:
        b = {t["term"]: t for t in (c["budget"] or [])}
        rows.append(
            [
                str(c["rank"]),
                c["code"],
                _fmt(c["distance_m"] / 1000 if c["distance_m"] is not None else None, 2),
                *[f"{_fmt(b[t]['h_mm'])} / {_fmt(b[t]['v_mm'])}" if t in b else "—" for t in terms],
                f"{_fmt(c['horizontal_95_mm'])} / {_fmt(c['vertical_95_mm'])}",
                _fmt(c["margin_mm"]),
                c["coverage_words"],
            ]
        )
    if rows:
        w = width
        story.append(
            _table(
                ["#", "Mark", "km", *[f"{t} H/V" for t in terms], "95 % H/V", "Margin", "Coverage"],
                rows,
                # the budget terms share what the fixed columns leave (0.46 of the width)
                [0.04 * w, 0.1 * w, 0.06 * w, *[0.46 * w / len(terms)] * len(terms), 0.12 * w, 0.08 * w, 0.14 * w],
                numeric={0, 2, *range(3, 3 + len(terms) + 2)},
            )
        )
    excluded = [c for c in presented["candidates"] if c["excluded"]]
    if len(usable) > MAX_RANKED_ROWS or excluded:
        story.append(
            L.para(
                f"{len(usable)} usable candidates ({min(len(usable), MAX_RANKED_ROWS)} listed); {len(excluded)} marks "
                "excluded by the screening rules (no published position, last visit disturbed, too far, ...).",
                "grey",
            )
        )
    # coverage map
    step(0.2, "placing the coverage map")
    legend = "  ".join(f"{r.label}{' (hatched)' if r.hatched else ''}" for r in legend_rows(s.tol_h_mm))
    story.append(
        KeepTogether(
            [
                L.para("Coverage map", "h3"),
                SvgMap(job_map.svg, width),
                L.para(
                    "Each cell shows the best horizontal 95 % figure any usable base reaches there (pale: well inside "
                    f"the tolerance; hatched: over it). Classes: {legend}. Triangles: chosen bases; squares: check "
                    f"marks; circles: other usable marks; crosses: excluded marks. UTM zone {job_map.zone_label}, grid "
                    f"north up, convergence at the site {job_map.convergence_text}. Drawn from the same geometry as the "
                    "job page's map; for planning, not for locating marks.",
                    "grey",
                ),
            ]
        )
    )
    # check marks
    story.append(L.para("Check marks and allowances", "h3"))
    if presented["check_marks"]:
        rows = []
        for cm in presented["check_marks"]:
            for a in cm["allowances"]:
                rows.append(
                    [
                        cm["code"],
                        a["base"],
                        _fmt(a["baseline_m"], 0, " m"),
                        _fmt(a["horizontal_95_mm"]),
                        _fmt(a["vertical_95_mm"]),
                    ]
                )
        story.append(
            _table(
                ["Check mark", "From base", "Baseline", "Allowed H (mm)", "Allowed V (mm)"],
                rows,
                [0.2 * width, 0.2 * width, 0.2 * width, 0.2 * width, 0.2 * width],
                numeric={2, 3, 4},
            )
        )
        story.append(
            L.para(
                "A check shot on the check mark from that base may differ from its published position by up to the "
                "allowance (95 %); a larger difference means something is wrong (wrong mark, disturbed mark, antenna "
                "height, frame or epoch): stop and investigate.",
                "grey",
            )
        )
    else:
        story.append(L.para("No check mark could be suggested; check in on another trusted mark nonetheless.", "body"))
    for w_ in presented["warnings"]:
        story.append(L.para(w_, "grey"))

    # ---- check-point results
    story.append(L.para("5. Check-point results", "h2"))
    residual_text = options.get("residuals_csv")
    if residual_text:
        table = statements.parse_residuals_csv(residual_text)
        report = statements.accuracy_report(style=options.get("statement_style", "nssda"), residuals=table)
        story.append(
            L.para(f"Standard: {report['standard']}; {report.get('n_checkpoints', table.n)} check points.", "body")
        )
        box = Table([[L.para(line, "cell")] for line in report["statement_lines"]], colWidths=[width])
        box.setStyle(TableStyle([("BACKGROUND", (0, 0), (-1, -1), L.SHADE), ("LEFTPADDING", (0, 0), (-1, -1), 6)]))
        story.append(box)
        axes = report.get("axes") or {}
        if axes:
            story.append(
                _table(
                    ["Axis", "n", "Mean (m)", "Std. dev. (m)", "RMSE (m)", "Largest |residual| (m)"],
                    [
                        [
                            {"x": "east (x)", "y": "north (y)", "z": "up (z)"}[k],
                            str(a["n"]),
                            f"{a['mean_m']:+.4f}",
                            f"{a['std_m']:.4f}",
                            f"{a['rmse_m']:.4f}",
                            f"{a['max_abs_m']:.4f}",
                        ]
                        for k, a in axes.items()
                    ],
                    [0.18 * width, 0.08 * width, 0.16 * width, 0.18 * width, 0.16 * width, 0.24 * width],
                    numeric={1, 2, 3, 4, 5},
                )
            )
        for f in report["findings"]:
            story.append(L.para(f["message"], "small"))
    else:
        story.append(L.para("No check-point residuals were supplied with this report.", "body"))

    # ---- methods and equipment
    marks_used = _marks_used(result, presented, options)
    occ = list(
        Occupation.objects.filter(mark__in=marks_used[:20]).select_related("mark").order_by("mark__code", "-start_utc")
    )
    story.append(L.para("6. Methods and equipment", "h2"))
    if occ:
        rows = [
            [
                o.mark.code,
                f"{o.start_utc:%Y-%m-%d}",
                o.get_method_display(),
                f"{o.receiver or '—'}\n{o.antenna or '—'}",
                o.observer or "—",
            ]
            for o in occ[:40]
        ]
        story.append(
            _table(
                ["Mark", "Date", "Method", "Receiver / antenna", "Observer"],
                rows,
                [0.13 * width, 0.13 * width, 0.15 * width, 0.41 * width, 0.18 * width],
            )
        )
        story.append(L.para("From the registry's occupation records of the bases and check marks.", "grey"))
    else:
        story.append(L.para("The registry holds no occupation records for the marks used.", "body"))

    # ---- limitations, cautions, signature
    story.append(L.para("7. Limitations", "h2"))
    story += [L.Paragraph(L.esc(c), st["caution"], bulletText="•") for c in presented["cautions"]]
    story.append(PageBreak())
    story.append(L.para("8. Certification", "h2"))
    story.append(
        L.para(
            f"I have examined the control stated in this report for job {job.code} and the records it is drawn from.",
            "body",
        )
    )
    story += closing(width, record := {})

    # ---- appendix: sheets of the marks used
    if marks_used:
        story += [PageBreak(), L.para("Appendix: station description sheets of the marks used", "h2")]
        n = len(marks_used)
        for i, m in enumerate(marks_used, start=1):
            step(0.25 + 0.7 * (i - 1) / n, f"appendix sheet {i} of {n} (mark {m.code})")
            content = sheet_content(m)
            if i > 1:
                story.append(PageBreak())
            story += sheet_story(content, width=width, verify_url=None, title_prefix=f"A.{i} ")
    step(0.96, "laying out the pages")
    heading = L.DocumentHeading(
        office=settings.REGISTRY.get("OFFICE_NAME", ""),
        kind_title="Control report",
        subject=f"Job {job.code}",
        code=code,
        revision=revision,
        issued=issued.isoformat(),
        logo_path=settings.REGISTRY.get("OFFICE_LOGO", ""),
    )
    built = L.build_pdf(story, heading, size_name=size_name, title=f"Control report {job.code}", record=record)
    return built, [m.pk for m in marks_used]
