"""What a station description sheet prints, gathered and computed (no drawing here).

Every number comes from the geodesy core: geographic, ECEF and grid coordinates with the point scale
factor, convergence, elevation and combined factors (:func:`registry.geodesy.convert.convert_point` on the
published position itself, same frame and epoch: nothing is transformed), network accuracy from the
stored covariance (:func:`registry.geodesy.accuracy.network_accuracy_95_m`, FGDC-STD-007.2-1998, with
:func:`~registry.geodesy.accuracy.accuracy_class` and the wording of
:func:`registry.geodesy.statements.fgdc_statement_lines`), orthometric heights from the mark's height
records, and H = h − N with the office's geoid model, the height first taken into the frame the model is
tied to by the geodesy core (the EGM96 fallback is labelled approximate). Numbers are formatted here, once, the way the
pages print them (``registry.web.templatetags.registry_format``), so the PDF and the tests read the
same strings.

A mark in a state that must not be used (destroyed, retired, suspect, or whose last visit found it
disturbed, destroyed or missing with no position published since) gets ``withheld``: the sheet says so in
its first line and prints no coordinates.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass, field

import numpy as np
from django.conf import settings
from django.db import connection

from registry.formatting import (
    format_deg9,
    format_frame,
    format_lat_dms,
    format_lon_dms,
    format_m3,
)
from registry.geodesy import accuracy as acc
from registry.geodesy import statements
from registry.geodesy.convert import ConversionError, convert_point
from registry.geodesy.dms import format_signed_dms
from registry.geodesy.frames import FrameTransformError, format_epoch, frame_info
from registry.geodesy.heights import GeoidModel
from registry.models import (
    Attachment,
    AttachmentKind,
    Finding,
    HeightRecord,
    Mark,
    MarkStatus,
    Occupation,
    Position,
    PositionState,
    Visit,
)
from registry.selectors.conversion import configured_geoid

#: Rows of the recovery (visit) and occupation tables; the total count is printed beside.
HISTORY_ROWS = 6
#: Nearby marks drawn in the vicinity diagram.
VICINITY_MARKS = 6
VICINITY_RADIUS_M = 2_000.0
#: Photos on a sheet.
MAX_PHOTOS = 2

#: Visit findings after which the mark awaits re-positioning (unless a position was published since).
_UNUSABLE_FINDINGS = {
    Finding.DISTURBED: "disturbed",
    Finding.DESTROYED: "found destroyed",
    Finding.SEARCHED_NOT_FOUND: "searched for and not found",
}


@dataclass
class Row:
    label: str
    value: str
    note: str = ""


@dataclass
class PositionBlock:
    """One published position, every number formatted."""

    title: str  # "NAD83(2011) (EPSG:6319), plate-fixed"
    epoch: str
    rows: list[Row]
    grid_rows: list[Row]
    height_rows: list[Row]
    accuracy_lines: list[str]
    horizontal_95_m: float
    vertical_95_m: float
    horizontal_class: str
    vertical_class: str
    warnings: list[str] = field(default_factory=list)
    # Raw values, for the tests (read back against the geodesy core) and the JSON summary.
    frame_epsg: int = 0
    lat_deg: float = 0.0
    lon_deg: float = 0.0
    h_m: float = 0.0


@dataclass
class NearbyMarkRow:
    code: str
    status: str
    distance_m: float
    azimuth_deg: float
    east_m: float
    north_m: float


@dataclass
class SheetContent:
    mark: Mark
    status_words: str
    withheld: str  # empty when the coordinates may be printed; else the first line of the sheet
    description: list[Row]
    access: str
    positions: list[PositionBlock]
    heights: list[Row]
    nearby: list[NearbyMarkRow]
    photos: list[Attachment]
    visits: list[Visit]
    visit_count: int
    occupations: list[Occupation]
    occupation_count: int
    covered_mark_ids: list[int]
    notes: list[str] = field(default_factory=list)


def _status_words(mark: Mark) -> str:
    if mark.status == MarkStatus.SUSPECT:
        return "suspect, awaiting re-observation"
    return {
        MarkStatus.ACTIVE: "in use",
        MarkStatus.RETIRED: "retired, no longer maintained",
        MarkStatus.DESTROYED: "destroyed",
    }.get(mark.status, str(mark.get_status_display()))


def withheld_reason(mark: Mark, last_visit: Visit | None, last_published_at: dt.datetime | None) -> str:
    """The first line of a sheet whose coordinates must not be used, or "" when they may be printed."""
    if mark.status == MarkStatus.DESTROYED:
        return f"MARK DESTROYED: mark {mark.code} no longer exists. Do not use; no coordinates are given."
    if mark.status == "suspect":
        return (
            f"MARK SUSPECT, AWAITING RE-OBSERVATION: do not use mark {mark.code}; no coordinates are given as current."
        )
    if mark.status == MarkStatus.RETIRED:
        return (
            f"MARK RETIRED: mark {mark.code} is no longer maintained by the office; "
            "no coordinates are given as current."
        )
    if last_visit is not None and last_visit.finding in _UNUSABLE_FINDINGS:
        published_since = last_published_at is not None and last_published_at.date() > last_visit.visited_on
        if not published_since:
            return (
                f"MARK {_UNUSABLE_FINDINGS[last_visit.finding].upper()} ON {last_visit.visited_on:%Y-%m-%d}, "
                f"AWAITING RE-POSITIONING: do not use mark {mark.code}; no coordinates are given as current."
            )
    return ""


def sheet_frames() -> list[int] | None:
    """The frames a sheet prints (``REGISTRY["SHEET_FRAMES"]``), or None for every published position."""
    raw = settings.REGISTRY.get("SHEET_FRAMES") or ""
    codes = [int(c) for c in str(raw).replace(" ", "").split(",") if c.strip().isdigit()]
    return codes or None


def _office_grid():
    raw = str(settings.REGISTRY.get("GRID_EPSG") or "").strip().upper().removeprefix("EPSG:")
    return int(raw) if raw.isdigit() else "utm"


def _cov(p: Position) -> np.ndarray:
    return np.array(
        [
            [p.cov_ee_m2, p.cov_en_m2, p.cov_eu_m2],
            [p.cov_en_m2, p.cov_nn_m2, p.cov_nu_m2],
            [p.cov_eu_m2, p.cov_nu_m2, p.cov_uu_m2],
        ]
    )


def position_block(p: Position, *, grid, geoid: GeoidModel | None) -> PositionBlock:
    """Compute and format one published position (same frame and epoch: nothing is transformed)."""
    info = frame_info(p.frame_epsg)
    warnings: list[str] = []
    try:
        c = convert_point(
            frame_epsg=p.frame_epsg,
            epoch_yr=p.epoch_yr,
            lat=p.lat_deg,
            lon=p.lon_deg,
            h_m=p.h_m,
            grid=grid,
            grid_explicit=False,
            geoid=geoid,
        )
    except ConversionError as exc:
        raise FrameTransformError(str(exc), code=exc.code) from exc
    rows = [
        Row("Latitude", format_lat_dms(c.lat_deg), f"{format_deg9(c.lat_deg)}°"),
        Row("Longitude", format_lon_dms(c.lon_deg), f"{format_deg9(c.lon_deg)}°"),
        Row("Ellipsoidal height", f"{format_m3(c.h_m)} m", f"on {info.ellipsoid.name}"),
        Row("ECEF X", f"{c.x_m:.4f} m", ""),
        Row("ECEF Y", f"{c.y_m:.4f} m", ""),
        Row("ECEF Z", f"{c.z_m:.4f} m", ""),
    ]
    grid_rows: list[Row] = []
    # the conversion fills the grid figures together, or none of them
    if c.grid is not None and c.easting_m is not None and c.northing_m is not None and c.convergence_deg is not None:
        code = f"EPSG:{c.grid.epsg}" if c.grid.epsg else "no EPSG code"
        grid_rows = [
            Row("Grid", f"{c.grid.name} ({code})", ""),
            Row("Easting", f"{format_m3(c.easting_m)} m", ""),
            Row("Northing", f"{format_m3(c.northing_m)} m", ""),
            Row("Point scale factor", f"{c.scale_factor:.8f}", ""),
            Row("Convergence γ", format_signed_dms(c.convergence_deg, decimals=2), ""),
            Row("Elevation factor", f"{c.elevation_factor:.8f}", "R/(R+h), h ellipsoidal"),
            Row("Combined factor", f"{c.combined_factor:.8f}", "grid = ground × factor"),
        ]
    else:
        warnings.extend(w for w in c.warnings if w.startswith("No grid"))
    height_rows: list[Row] = []
    if c.orthometric_height_m is not None and c.geoid is not None:
        note = f"N = {c.geoid_height_m:.3f} m from {c.geoid.label}"
        if c.geoid_steps and c.geoid.frame_epsg:
            note += f", with h taken in EPSG:{c.geoid.frame_epsg} ({c.h_geoid_frame_m:.3f} m), the model's frame"
        height_rows.append(Row("Orthometric height H = h − N", f"{format_m3(c.orthometric_height_m)} m", note))
    if p.has_velocity:
        vel = f"E {p.vel_e_m_yr * 1000:+.1f}  N {p.vel_n_m_yr * 1000:+.1f}  U {p.vel_u_m_yr * 1000:+.1f}"
        rows.append(Row("Velocity", vel, "mm/yr"))
    else:
        rows.append(Row("Velocity", "none known", "valid at its epoch"))
    h95, v95 = acc.network_accuracy_95_m(_cov(p))
    h95, v95 = float(h95), float(v95)
    h_class, v_class = str(acc.accuracy_class(h95)), str(acc.accuracy_class(v95))  # scalars in, names out
    lines = statements.fgdc_statement_lines(h95, h_class, v95, v_class)
    return PositionBlock(
        title=f"{format_frame(p.frame_epsg)}, {info.kind}",
        epoch=format_epoch(p.epoch_yr),
        rows=rows,
        grid_rows=grid_rows,
        height_rows=height_rows,
        accuracy_lines=lines,
        horizontal_95_m=h95,
        vertical_95_m=v95,
        horizontal_class=h_class,
        vertical_class=v_class,
        warnings=warnings,
        frame_epsg=p.frame_epsg,
        lat_deg=c.lat_deg,
        lon_deg=c.lon_deg,
        h_m=c.h_m,
    )


def _height_rows(records: list[HeightRecord]) -> list[Row]:
    rows = []
    for h in records:
        if h.method == "levelled":
            how = "levelled"
        else:
            how = f"from ellipsoidal height with geoid model {h.geoid_model}"
        note = f"{how}; σ {h.sigma_m * 1000:.1f} mm"
        if h.epoch_yr is not None:
            note += f"; epoch {h.epoch_yr:.3f}"
        if h.source:
            note += f"; {h.source}"
        rows.append(Row(f"Orthometric height, {format_frame(h.datum_epsg)}", f"{format_m3(h.height_m)} m", note))
    return rows


def _nearby(mark: Mark) -> list[NearbyMarkRow]:
    from registry.selectors.nearby import marks_near

    if mark.search_lat_deg is None:
        return []
    found = marks_near(
        lat_deg=mark.search_lat_deg,
        lon_deg=mark.search_lon_deg,
        radius_m=VICINITY_RADIUS_M,
        limit=VICINITY_MARKS + 1,
    )
    out = []
    for n in found:
        if n.mark.pk == mark.pk or n.azimuth_deg is None:
            continue
        az = np.radians(n.azimuth_deg)
        out.append(
            NearbyMarkRow(
                code=n.mark.code,
                status=n.mark.status,
                distance_m=n.distance_m,
                azimuth_deg=n.azimuth_deg,
                east_m=float(n.distance_m * np.sin(az)),
                north_m=float(n.distance_m * np.cos(az)),
            )
        )
    return out[:VICINITY_MARKS]


def _rows(model, where_order: str, params: list, *, with_total: bool = False) -> list:
    """Instances of ``model`` from one plain SQL query over its table (``WHERE`` + ``ORDER BY`` text, with
    ``%s`` parameters), through Django's raw querysets (its converters apply, its router picks the
    database). A sheet makes five such reads; building them as ORM querysets cost about three times
    the queries themselves (see benchmarks/bench_documents.py). ``with_total``: each row also carries
    ``total_rows``, the count of every row the ``WHERE`` matches (a window count, before any ``LIMIT``).
    The SQL is portable (SQLite ≥ 3.25 and PostgreSQL); column names here are the models' own.
    """
    table = connection.ops.quote_name(model._meta.db_table)
    total = ", COUNT(*) OVER () AS total_rows" if with_total else ""
    return list(model.objects.raw(f"SELECT *{total} FROM {table} WHERE {where_order}", params))  # noqa: S611


def sheet_content(mark: Mark, *, with_nearby: bool = True) -> SheetContent:
    """Gather and compute everything a sheet of ``mark`` prints (a fixed number of queries)."""
    published = _rows(
        Position,
        "mark_id = %s AND state = %s ORDER BY frame_epsg, decided_at DESC, id DESC",
        [mark.pk, PositionState.PUBLISHED],
    )
    last_published_at = max((p.decided_at for p in published if p.decided_at), default=None)
    # The most recent rows with the total beside them (a window count is taken over every row of the
    # mark, before the limit).
    visits = _rows(
        Visit,
        f"mark_id = %s ORDER BY visited_on DESC, created_at DESC, id DESC LIMIT {HISTORY_ROWS}",
        [mark.pk],
        with_total=True,
    )
    visit_count = visits[0].total_rows if visits else 0
    occupations = _rows(
        Occupation, f"mark_id = %s ORDER BY start_utc DESC, id DESC LIMIT {HISTORY_ROWS}", [mark.pk], with_total=True
    )
    occupation_count = occupations[0].total_rows if occupations else 0
    withheld = withheld_reason(mark, visits[0] if visits else None, last_published_at)

    description = [
        Row("Status", _status_words(mark)),
        Row("Name", mark.name or "—"),
        Row("Monument", mark.get_monument_display()),
        Row("How it is set", mark.monument_detail or "—"),
        Row("Marking as inscribed", mark.marking or "—"),
        Row("Expected stability", mark.get_stability_display()),
        Row("Sky view", mark.get_sky_view_display()),
        Row("Keeper", mark.keeper or "—"),
    ]
    positions: list[PositionBlock] = []
    heights: list[Row] = []
    notes: list[str] = []
    if not withheld:
        wanted = sheet_frames()
        chosen = [p for p in published if wanted is None or p.frame_epsg in wanted]
        if wanted is not None:
            chosen.sort(key=lambda p: wanted.index(p.frame_epsg))
        geoid, note = configured_geoid()
        if note:
            notes.append(note)
        grid = _office_grid()
        positions = [position_block(p, grid=grid, geoid=geoid) for p in chosen]
        if not positions:
            notes.append("The mark has no published position in the frames this office issues.")
        heights = _height_rows(
            _rows(HeightRecord, "mark_id = %s AND current = %s ORDER BY datum_epsg, created_at DESC", [mark.pk, True])
        )
    photos = _rows(
        Attachment,
        f"mark_id = %s AND kind = %s ORDER BY uploaded_at DESC, id DESC LIMIT {MAX_PHOTOS}",
        [mark.pk, AttachmentKind.PHOTO],
    )
    return SheetContent(
        mark=mark,
        status_words=_status_words(mark),
        withheld=withheld,
        description=description,
        access=mark.access_directions or "",
        positions=positions,
        heights=heights,
        nearby=_nearby(mark) if with_nearby else [],
        photos=photos,
        visits=visits,
        visit_count=visit_count,
        occupations=occupations,
        occupation_count=occupation_count,
        covered_mark_ids=[mark.pk],
        notes=notes,
    )
