"""What a mark row is in our import/export files, how it is validated, and how numbers are written.

Both file formats (CSV, ``marks_csv``; GeoJSON, ``marks_geojson``) carry the same record: a mark's
description fields, its edit ``version`` and, optionally, one published position of it with that
position's ``position_revision``. A mark with published positions in several frames takes one record
per frame (the mark's fields repeated); a mark without any takes one record without a position. This
module holds the field list, the per-row validation (every problem of a row is reported, with a
machine-readable code), the rules between rows of one mark, and the number formatting used by the
exporters.

``version`` and ``position_revision`` are what an ``--update`` import checks against the registry
(optimistic concurrency, ``registry.services.imports``): ``version`` is the mark's edit version
(``Mark.version``); ``position_revision`` counts the positions of the mark in that frame that have ever
been published (published, superseded or withdrawn), so it moves whenever a new position is published
in that frame.

Numbers are written so that they read back to the *same* binary float (shortest exact decimal, with a
minimum number of decimals for readability: latitude/longitude 9, metres 4, covariance as Python's
``repr``). That is what makes ``export → import → export`` byte-identical.

Frames are EPSG codes of geographic 3D CRSs, checked against the EPSG database shipped with PROJ
(through pyproj): latitude/longitude in degrees, ellipsoidal height in metres. The covariance is in the
local east/north/up frame at the point, in m² (as in ``registry.models.Position``).
"""

from __future__ import annotations

import datetime as dt
import math
from dataclasses import dataclass, field
from typing import Any

from registry.geodesy.accuracy import sigma_from_variance_m
from registry.models.marks import CODE_VALIDATOR, DESCRIPTION_FIELDS, MarkStatus, MonumentKind, SkyView, Stability
from registry.services import position_rules as rules
from registry.vocabulary import OLD_MARK_FIELDS, old_name_clashes

# --- The record -------------------------------------------------------------------------------------

#: Why and since when a mark is suspect (written with status ``suspect``, empty otherwise).
SUSPECT_FIELDS: tuple[str, ...] = ("suspect_since", "suspect_reason")
#: Mark fields, in file order: the description block in its display order, then status. ``code`` is
#: required; the others default like the model.
MARK_FIELDS: tuple[str, ...] = ("code", "name", *DESCRIPTION_FIELDS, "status", *SUSPECT_FIELDS, "notes")
MARK_TEXT_MAX = {
    "name": 120,
    "access_directions": None,
    "monument_detail": 200,
    "marking": 120,
    "keeper": 120,
    "suspect_reason": 200,
    "notes": None,
}
MARK_CHOICES: dict[str, tuple[str, ...]] = {
    "monument": tuple(MonumentKind.values),
    "stability": tuple(Stability.values),
    "sky_view": tuple(SkyView.values),
    "status": tuple(MarkStatus.values),
}
#: Earlier column (property) names accepted on import for one more release (``registry.vocabulary``).
OLD_COLUMNS: dict[str, str] = dict(OLD_MARK_FIELDS)

#: Concurrency columns (whole numbers): the mark's edit version, the position's revision in its frame.
VERSION_FIELD = "version"
REVISION_FIELD = "position_revision"
INTEGER_FIELDS: frozenset[str] = frozenset({"frame_epsg", VERSION_FIELD, REVISION_FIELD})

#: Position coordinates. In CSV they are columns; in GeoJSON they are the Point's coordinates.
COORD_FIELDS: tuple[str, ...] = ("lat_deg", "lon_deg", "h_m")
SIGMA_FIELDS: tuple[str, ...] = ("sigma_e_mm", "sigma_n_mm", "sigma_u_mm")
COV_FIELDS: tuple[str, ...] = ("cov_ee_m2", "cov_en_m2", "cov_eu_m2", "cov_nn_m2", "cov_nu_m2", "cov_uu_m2")
COV_DIAGONAL: tuple[str, ...] = ("cov_ee_m2", "cov_nn_m2", "cov_uu_m2")
VEL_FIELDS: tuple[str, ...] = ("vel_e_m_yr", "vel_n_m_yr", "vel_u_m_yr")
VEL_SIGMA_FIELDS: tuple[str, ...] = ("vel_sigma_e_m_yr", "vel_sigma_n_m_yr", "vel_sigma_u_m_yr")
#: Position fields other than the coordinates, in file order.
POSITION_PROPERTY_FIELDS: tuple[str, ...] = (
    ("frame_epsg", "epoch_yr") + SIGMA_FIELDS + COV_FIELDS + VEL_FIELDS + VEL_SIGMA_FIELDS + ("source", REVISION_FIELD)
)
#: CSV columns in file order.
CSV_COLUMNS: tuple[str, ...] = (
    MARK_FIELDS + (VERSION_FIELD, "frame_epsg", "epoch_yr") + COORD_FIELDS + POSITION_PROPERTY_FIELDS[2:]
)
#: Model fields of ``Position`` carried by a record (everything but state, people and times).
POSITION_MODEL_FIELDS: tuple[str, ...] = (
    ("frame_epsg", "epoch_yr") + COORD_FIELDS + COV_FIELDS + VEL_FIELDS + VEL_SIGMA_FIELDS + ("source",)
)

# Plausibility limits (each with its reason).
EPOCH_MIN_YR, EPOCH_MAX_YR = 1900.0, 2100.0  # same range as the model's CHECK constraint
H_MIN_M, H_MAX_M = -1000.0, 10000.0  # same range as the model's CHECK constraint
SIGMA_MAX_MM = rules.SIGMA_MAX_M * 1000.0  # the bounds are decided once, in services.position_rules
VEL_MAX_M_YR = rules.VELOCITY_MAX_M_YR
SOURCE_MAX = 200
MAX_VERSION = 2_147_483_647  # the largest value of a PositiveIntegerField on every supported database
#: Agreement needed between a sigma column and √(covariance diagonal) when a file carries both. Exports
#: write sigmas to 0.01 mm, so a half unit of the last place plus float noise.
SIGMA_COV_AGREEMENT_MM = 0.005 + 1e-9


@dataclass(frozen=True)
class RowError:
    """One problem with one row of an import file.

    ``where`` is what a person reads ("line 7", "features[3]", "file"); ``index`` sorts them;
    ``code`` is machine-readable and stable (tests assert it).
    """

    where: str
    index: int
    code: str
    message: str
    field: str = ""
    mark_code: str = ""

    def as_dict(self) -> dict[str, Any]:
        return {
            "where": self.where,
            "code": self.code,
            "field": self.field,
            "mark_code": self.mark_code,
            "message": self.message,
        }

    def __str__(self) -> str:
        subject = f" [{self.mark_code}]" if self.mark_code else ""
        column = f" {self.field}:" if self.field else ""
        return f"{self.where}{subject}:{column} {self.message} ({self.code})"


@dataclass
class MarkRecord:
    """A validated row: the mark's fields (only those the file carries) and an optional position.

    ``position`` uses ``Position`` model field names and units (m, m², m/yr); covariance complete.
    ``version`` and ``position_revision`` are None when the row does not carry them.
    """

    where: str
    index: int
    mark: dict[str, Any]
    position: dict[str, Any] | None = None
    version: int | None = None
    position_revision: int | None = None

    @property
    def frame_epsg(self) -> int | None:
        return None if self.position is None else self.position["frame_epsg"]

    @property
    def code(self) -> str:
        return self.mark["code"]


@dataclass
class ParseResult:
    """What a parser produced: validated records and every problem found (file-level or per row)."""

    records: list[MarkRecord] = field(default_factory=list)
    errors: list[RowError] = field(default_factory=list)
    format: str = ""


def new_column_names(names: list[str], *, where: str = "line 1", index: int = 1) -> tuple[list[str], list[RowError]]:
    """Column (property) names with the earlier names translated; both names of one field is an error.

    >>> new_column_names(["code", "stamping"])[0]
    ['code', 'marking']
    >>> [e.code for e in new_column_names(["code", "custodian", "keeper"])[1]]
    ['old_and_new_column']
    """
    errors = [
        RowError(where, index, "old_and_new_column", f"'{old}' is the earlier name of '{new}'; give one of them", old)
        for old, new in old_name_clashes(names, OLD_COLUMNS)
    ]
    return [OLD_COLUMNS.get(name, name) for name in names], errors


# --- Frames -----------------------------------------------------------------------------------------


def frame_problem(frame_epsg: int) -> str | None:
    """Return why ``frame_epsg`` cannot be a position's frame, or None when it can (``position_rules``).

    >>> frame_problem(7912) is None and frame_problem(6319) is None
    True
    >>> frame_problem(4326).startswith("EPSG:4326 (WGS 84) is a 2D CRS")
    True
    """
    return rules.frame_problem(int(frame_epsg))


# --- Number formatting ------------------------------------------------------------------------------


def format_exact(value: float, min_decimals: int) -> str:
    """Write ``value`` in fixed notation with at least ``min_decimals`` decimals, reading back exactly.

    The shortest such string is chosen, so the output is deterministic and ``float(s) == value``.

    >>> format_exact(45.2, 9)
    '45.200000000'
    >>> format_exact(45.19999522590536, 9)
    '45.19999522590536'
    >>> format_exact(-110.6, 9)
    '-110.600000000'
    >>> float(format_exact(0.1 + 0.2, 4)) == 0.1 + 0.2
    True
    """
    if not math.isfinite(value):
        raise ValueError(f"cannot write a non-finite number: {value!r}")
    for decimals in range(min_decimals, 30):
        text = f"{value:.{decimals}f}"
        if float(text) == value:
            return text
    return repr(value)  # unreachable for doubles of ordinary size; repr is always exact


def format_repr(value: float) -> str:
    """Python's shortest exact representation (used for covariance and velocities).

    >>> format_repr(2.5e-05)
    '2.5e-05'
    """
    if not math.isfinite(value):
        raise ValueError(f"cannot write a non-finite number: {value!r}")
    return repr(float(value))


def sigma_mm_from_variance(variance_m2: float) -> float:
    """1σ in millimetres from a variance in m², rounded to 0.01 mm (for display columns).

    >>> sigma_mm_from_variance(2.5e-05)
    5.0
    """
    return round(float(sigma_from_variance_m(variance_m2)) * 1000.0, 2)


# --- Validation -------------------------------------------------------------------------------------


def _is_blank(value: Any) -> bool:
    return value is None or (isinstance(value, str) and value.strip() == "")


class _RowChecker:
    """Collects every error of one row."""

    def __init__(self, where: str, index: int):
        self.where = where
        self.index = index
        self.errors: list[RowError] = []
        self.mark_code = ""

    def add(self, code: str, message: str, field_name: str = "") -> None:
        self.errors.append(RowError(self.where, self.index, code, message, field_name, self.mark_code))

    def angle(self, raw: dict[str, Any], name: str, kind: str) -> float | None:
        """A latitude or longitude: a decimal number, or D M S text with the hemisphere as on the forms
        ("45 12 03.5 N", "110°36′W"), through :func:`registry.geodesy.dms.parse_angle`."""
        value = raw.get(name)
        if isinstance(value, str) and not _is_blank(value) and any(ch.isdigit() for ch in value):
            text = value.strip()
            try:
                return float(text)
            except ValueError:
                from registry.geodesy.dms import AngleParseError, parse_angle

                letters = "NS" if kind == "lat" else "EW"
                if not any(ch in "NSEW" for ch in text.upper()):
                    word = "latitude" if kind == "lat" else "longitude"
                    self.add(
                        "dms_without_hemisphere",
                        f"{word} {value!r}: D M S needs its hemisphere letter ({letters[0]} or {letters[1]})",
                        name,
                    )
                    return None
                try:
                    return parse_angle(text, kind=kind)
                except AngleParseError as exc:
                    self.add("not_an_angle", f"{exc} Use decimal degrees or D M S with the hemisphere.", name)
                    return None
        return self.number(raw, name)

    def number(self, raw: dict[str, Any], name: str, *, integer: bool = False) -> float | int | None:
        value = raw.get(name)
        if _is_blank(value):
            return None
        if isinstance(value, bool):
            self.add("not_a_number", f"expected a number, got {value!r}", name)
            return None
        if isinstance(value, int | float):
            number = value
        elif isinstance(value, str):
            text = value.strip()
            try:
                number = int(text) if integer else float(text)
            except ValueError:
                kind = "a whole number" if integer else "a number"
                self.add("not_a_number", f"expected {kind}, got {value!r}", name)
                return None
        else:
            self.add("not_a_number", f"expected a number, got {type(value).__name__}", name)
            return None
        if integer:
            if isinstance(number, float):
                if not number.is_integer():
                    self.add("not_a_number", f"expected a whole number, got {value!r}", name)
                    return None
                number = int(number)
            return int(number)
        number = float(number)
        if not math.isfinite(number):
            self.add("not_a_number", f"expected a finite number, got {value!r}", name)
            return None
        return number

    def date(self, raw: dict[str, Any], name: str):
        """A calendar date written as YYYY-MM-DD (None when blank or wrong; wrong is an error)."""
        value = raw.get(name)
        if _is_blank(value):
            return None
        if not isinstance(value, str):
            self.add("invalid_date", f"expected a date as YYYY-MM-DD, got {type(value).__name__}", name)
            return None
        try:
            return dt.date.fromisoformat(value.strip())
        except ValueError:
            self.add("invalid_date", f"expected a date as YYYY-MM-DD, got {value!r}", name)
            return None

    def text(self, raw: dict[str, Any], name: str, max_length: int | None) -> str | None:
        value = raw.get(name)
        if value is None:
            return ""
        if not isinstance(value, str):
            if isinstance(value, int | float) and not isinstance(value, bool):
                value = str(value)
            else:
                self.add("not_text", f"expected text, got {type(value).__name__}", name)
                return None
        value = value.strip()
        if max_length is not None and len(value) > max_length:
            self.add("too_long", f"at most {max_length} characters, got {len(value)}", name)
            return None
        return value


def validate_row(raw: dict[str, Any], *, where: str, index: int) -> tuple[MarkRecord | None, list[RowError]]:
    """Validate one row given as ``{field: value}`` (strings from CSV, JSON values from GeoJSON).

    Only keys present in ``raw`` are taken for the mark (absent keys keep their default on create and
    their stored value on update; so does a blank choice such as ``status``). The row has a position when any coordinate or position field is
    non-blank; then frame, epoch, latitude, longitude, height, source and an uncertainty (three sigmas
    in mm, or the covariance diagonal in m²) are all required.

    Returns the record (None when there are errors) and the list of errors.
    """
    chk = _RowChecker(where, index)

    # Mark fields.
    mark: dict[str, Any] = {}
    code_raw = raw.get("code")
    if _is_blank(code_raw):
        chk.add("code_required", "the mark code is required", "code")
    elif not isinstance(code_raw, str):
        chk.add("invalid_code", f"expected text, got {type(code_raw).__name__}", "code")
    else:
        code = code_raw.strip()
        chk.mark_code = code
        from django.core.exceptions import ValidationError

        try:
            CODE_VALIDATOR(code)
        except ValidationError:
            chk.add("invalid_code", f"{code!r}: {CODE_VALIDATOR.message}", "code")
        else:
            mark["code"] = code
    for name in MARK_FIELDS[1:]:
        if name not in raw:
            continue
        if name == "suspect_since":
            day = chk.date(raw, name)
            if day is not None:
                mark[name] = day
            continue
        if name in MARK_CHOICES:
            value = raw[name]
            if _is_blank(value):
                continue  # a blank choice cell means "not given": the default on create, unchanged on update
            if not isinstance(value, str) or value.strip() not in MARK_CHOICES[name]:
                chk.add("invalid_choice", f"{value!r} is not one of: {', '.join(MARK_CHOICES[name])}", name)
            else:
                mark[name] = value.strip()
        else:
            text = chk.text(raw, name, MARK_TEXT_MAX[name])
            if text is not None:
                mark[name] = text

    if mark.get("status") != MarkStatus.SUSPECT and (mark.get("suspect_since") or mark.get("suspect_reason")):
        chk.add(
            "suspect_fields_without_suspect",
            "suspect_since and suspect_reason go with status suspect; leave them empty otherwise",
            "suspect_since" if mark.get("suspect_since") else "suspect_reason",
        )

    version = chk.number(raw, VERSION_FIELD, integer=True)
    if version is not None and not 1 <= version <= MAX_VERSION:
        chk.add("out_of_range", f"a version is a whole number from 1 to {MAX_VERSION}, got {version}", VERSION_FIELD)

    # Position fields.
    position_names = ("frame_epsg", "epoch_yr") + COORD_FIELDS + POSITION_PROPERTY_FIELDS[2:]
    has_position = any(not _is_blank(raw.get(n)) for n in position_names)
    position: dict[str, Any] | None = None
    if has_position:
        position = _validate_position(raw, chk)

    if chk.errors:
        return None, chk.errors
    revision = None if position is None else position.pop(REVISION_FIELD, None)
    return MarkRecord(where, index, mark, position, version=version, position_revision=revision), []


def _validate_position(raw: dict[str, Any], chk: _RowChecker) -> dict[str, Any] | None:
    pos: dict[str, Any] = {}
    n_before = len(chk.errors)

    frame = chk.number(raw, "frame_epsg", integer=True)
    if frame is None and _is_blank(raw.get("frame_epsg")):
        chk.add("frame_required", "a position needs its frame (EPSG code of a geographic 3D CRS)", "frame_epsg")
    elif frame is not None:
        problem = frame_problem(int(frame))
        if problem:
            chk.add("invalid_frame", problem, "frame_epsg")
        else:
            pos["frame_epsg"] = int(frame)

    epoch = chk.number(raw, "epoch_yr")
    if epoch is None and _is_blank(raw.get("epoch_yr")):
        chk.add("epoch_required", "a position needs its coordinate epoch (decimal year)", "epoch_yr")
    elif epoch is not None:
        if not EPOCH_MIN_YR <= epoch <= EPOCH_MAX_YR:
            chk.add("out_of_range", f"epoch {epoch} is outside {EPOCH_MIN_YR:.0f}–{EPOCH_MAX_YR:.0f}", "epoch_yr")
        else:
            pos["epoch_yr"] = epoch

    limits = {"lat_deg": (-90.0, 90.0), "lon_deg": (-180.0, 180.0), "h_m": (H_MIN_M, H_MAX_M)}
    words = {"lat_deg": "latitude", "lon_deg": "longitude", "h_m": "ellipsoidal height"}
    for name, (low, high) in limits.items():
        value = chk.angle(raw, name, name[:3]) if name in ("lat_deg", "lon_deg") else chk.number(raw, name)
        if value is None:
            if _is_blank(raw.get(name)):
                chk.add("coordinate_required", f"a position needs its {words[name]}", name)
            continue
        if not low <= value <= high:
            chk.add("out_of_range", f"{words[name]} {value} is outside {low:g} … {high:g}", name)
        else:
            pos[name] = value

    # Uncertainty: three sigmas (mm) and/or a covariance (m²).
    sigmas = [chk.number(raw, n) for n in SIGMA_FIELDS]
    covs = {n: chk.number(raw, n) for n in COV_FIELDS}
    sigma_given = [not _is_blank(raw.get(n)) for n in SIGMA_FIELDS]
    cov_given = any(not _is_blank(raw.get(n)) for n in COV_FIELDS)
    if any(sigma_given) and not all(sigma_given):
        chk.add("sigmas_incomplete", "give all three of sigma_e_mm, sigma_n_mm, sigma_u_mm, or none", "sigma_e_mm")
    if not cov_given:  # with a covariance, the sigma columns are its rounded display (checked for agreement)
        given_sigmas = {n: (None if v is None else v / 1000.0) for n, v in zip(SIGMA_FIELDS, sigmas, strict=True)}
        for problem in rules.sigma_problems(given_sigmas):
            chk.add(problem.code, problem.message, problem.field)
    if cov_given:
        for name in COV_DIAGONAL:
            if _is_blank(raw.get(name)):
                chk.add("covariance_incomplete", "the covariance needs cov_ee_m2, cov_nn_m2 and cov_uu_m2", name)
    elif not any(sigma_given):
        chk.add(
            "uncertainty_required",
            "a position needs its uncertainty: sigma_e_mm, sigma_n_mm, sigma_u_mm, or the covariance (m²)",
            "sigma_e_mm",
        )
    if len(chk.errors) == n_before and cov_given:
        c = {n: (covs[n] if covs[n] is not None else 0.0) for n in COV_FIELDS}
        diagonal = [c[n] for n in COV_DIAGONAL]
        problems = rules.covariance_problems(c)
        for problem in problems:
            chk.add(problem.code, problem.message, problem.field)
        if not problems:
            pos.update(c)
            if all(sigma_given) and all(s is not None for s in sigmas):
                for name, s_mm, var in zip(SIGMA_FIELDS, sigmas, diagonal, strict=True):
                    if abs(s_mm - math.sqrt(var) * 1000.0) > SIGMA_COV_AGREEMENT_MM:
                        chk.add(
                            "sigma_covariance_mismatch",
                            f"{s_mm} mm disagrees with √(covariance) = {math.sqrt(var) * 1000.0:.4f} mm",
                            name,
                        )
    elif len(chk.errors) == n_before and all(s is not None for s in sigmas):
        s_m = [s / 1000.0 for s in sigmas]
        pos.update(
            cov_ee_m2=s_m[0] ** 2,
            cov_en_m2=0.0,
            cov_eu_m2=0.0,
            cov_nn_m2=s_m[1] ** 2,
            cov_nu_m2=0.0,
            cov_uu_m2=s_m[2] ** 2,
        )

    # Velocity (optional): all three or none; its sigmas only with it.
    vel = [chk.number(raw, n) for n in VEL_FIELDS]
    vel_given = [not _is_blank(raw.get(n)) for n in VEL_FIELDS]
    vsig = [chk.number(raw, n) for n in VEL_SIGMA_FIELDS]
    vsig_given = [not _is_blank(raw.get(n)) for n in VEL_SIGMA_FIELDS]
    if any(vel_given) and not all(vel_given):
        chk.add("velocity_incomplete", "give all three velocity components (m/yr), or none", "vel_e_m_yr")
    if any(vsig_given) and not all(vsig_given):
        chk.add("velocity_incomplete", "give all three velocity sigmas (m/yr), or none", "vel_sigma_e_m_yr")
    if any(vsig_given) and not any(vel_given):
        chk.add("velocity_incomplete", "velocity sigmas need a velocity", "vel_sigma_e_m_yr")
    problems = rules.velocity_problems(
        dict(zip(VEL_FIELDS, vel, strict=True)), dict(zip(VEL_SIGMA_FIELDS, vsig, strict=True))
    )
    for problem in problems:
        if problem.code not in ("velocity_incomplete", "velocity_sigma_without_velocity"):  # reported above
            chk.add(problem.code, problem.message, problem.field)
    for names, values in ((VEL_FIELDS, vel), (VEL_SIGMA_FIELDS, vsig)):
        pos.update({n: v for n, v in zip(names, values, strict=True)})

    revision = chk.number(raw, REVISION_FIELD, integer=True)
    if revision is not None:
        if not 0 <= revision <= MAX_VERSION:
            chk.add(
                "out_of_range", f"a revision is a whole number from 0 to {MAX_VERSION}, got {revision}", REVISION_FIELD
            )
        else:
            pos[REVISION_FIELD] = revision

    source = chk.text(raw, "source", SOURCE_MAX)
    if source == "":
        chk.add("source_required", "a position needs its source (campaign, adjustment, occupation)", "source")
    elif source is not None:
        pos["source"] = source

    if len(chk.errors) > n_before:
        return None
    return pos


def check_rows_per_mark(records: list[MarkRecord]) -> list[RowError]:
    """Errors between rows of one mark code: each row of a mark is one frame, the mark fields agree.

    A mark may take several rows (one per frame of its published positions; at most one row without a
    position). The same (code, frame) twice is ``duplicate_frame``; the same code twice without a
    position is ``duplicate_code``; a later row whose mark fields or version differ from the mark's
    first row is ``mark_fields_differ`` (the file would say two things about one mark).
    """
    first_of_code: dict[str, MarkRecord] = {}
    seen: dict[tuple[str, int | None], MarkRecord] = {}
    errors = []
    for record in records:
        key = (record.code, record.frame_epsg)
        earlier = seen.setdefault(key, record)
        if earlier is not record:
            if record.frame_epsg is None:
                code, message = "duplicate_code", f"code {record.code} already appears at {earlier.where}"
            else:
                code = "duplicate_frame"
                message = (
                    f"mark {record.code} already has a position in EPSG:{record.frame_epsg} at {earlier.where}; "
                    "a mark takes at most one position per frame in a file"
                )
            field_name = "code" if record.frame_epsg is None else "frame_epsg"
            errors.append(RowError(record.where, record.index, code, message, field_name, record.code))
            continue
        first = first_of_code.setdefault(record.code, record)
        if first is record:
            continue
        differ = sorted(k for k in set(first.mark) | set(record.mark) if first.mark.get(k) != record.mark.get(k))
        if first.version != record.version:
            differ.append(VERSION_FIELD)
        if differ:
            errors.append(
                RowError(
                    record.where,
                    record.index,
                    "mark_fields_differ",
                    f"the rows of mark {record.code} must agree on its fields; {', '.join(differ)} differ from "
                    f"{first.where}",
                    differ[0],
                    record.code,
                )
            )
    return errors


# --- Export rows ------------------------------------------------------------------------------------


def export_values(mark, position, position_revision: int | None = None) -> dict[str, Any]:
    """The record of ``mark`` (a ``Mark``) with ``position`` (a published ``Position`` or None).

    ``position_revision`` is the position's revision in its frame (see the module docstring).

    Values are Python objects (str, int, float, None) keyed like ``CSV_COLUMNS``; the writers format
    them. Sigma columns are derived from the covariance diagonal (0.01 mm) for the reader's benefit;
    the covariance is authoritative on import.
    """
    values: dict[str, Any] = {name: getattr(mark, name) for name in MARK_FIELDS}
    if values["suspect_since"] is not None:
        values["suspect_since"] = values["suspect_since"].isoformat()
    for name in CSV_COLUMNS[len(MARK_FIELDS) :]:
        values[name] = None
    values[VERSION_FIELD] = mark.version
    if position is not None:
        values[REVISION_FIELD] = position_revision
        for name in POSITION_MODEL_FIELDS:
            values[name] = getattr(position, name)
        for sigma_name, cov_name in zip(SIGMA_FIELDS, COV_DIAGONAL, strict=True):
            values[sigma_name] = sigma_mm_from_variance(getattr(position, cov_name))
    return values


#: How each numeric column is written in CSV: ("exact", min_decimals) or ("repr", None).
CSV_NUMBER_FORMAT: dict[str, tuple[str, int | None]] = {
    "epoch_yr": ("exact", 4),
    "lat_deg": ("exact", 9),
    "lon_deg": ("exact", 9),
    "h_m": ("exact", 4),
    **{n: ("exact", 2) for n in SIGMA_FIELDS},
    **{n: ("repr", None) for n in COV_FIELDS + VEL_FIELDS + VEL_SIGMA_FIELDS},
}


def format_cell(name: str, value: Any) -> str:
    """Text of one value in a CSV cell (empty for None)."""
    if value is None:
        return ""
    if name in INTEGER_FIELDS:
        return str(int(value))
    rule = CSV_NUMBER_FORMAT.get(name)
    if rule is None:
        return str(value)
    kind, decimals = rule
    if kind == "exact":
        return format_exact(float(value), decimals or 0)
    return format_repr(float(value))


#: Position states that were published at some time (a withdrawn position was published first).
EVER_PUBLISHED_STATES = ("published", "superseded", "withdrawn")


def marks_for_export(*, frame_epsg: int | None = None):
    """Export rows: every mark with each of its published positions, ordered by code then frame.

    Returns a list of ``(mark, position_or_None, position_revision_or_None)``: one row per (mark,
    published position) — a mark has at most one published position per frame — and one row
    without a position for a mark that has none. With ``frame_epsg`` only positions in that frame
    are taken (a mark without one there gets a row without a position). Three queries, whatever the
    number of marks.
    """
    from django.db.models import Count

    from registry.models import Mark, Position, PositionState

    marks = list(Mark.objects.order_by("code"))
    published = Position.objects.filter(state=PositionState.PUBLISHED)
    counted = Position.objects.filter(state__in=EVER_PUBLISHED_STATES)
    if frame_epsg is not None:
        published = published.filter(frame_epsg=frame_epsg)
        counted = counted.filter(frame_epsg=frame_epsg)
    by_mark: dict[int, list[Any]] = {}
    for position in published.order_by("mark_id", "frame_epsg", "id"):
        by_mark.setdefault(position.mark_id, []).append(position)
    revisions = {
        (row["mark_id"], row["frame_epsg"]): row["n"]
        for row in counted.values("mark_id", "frame_epsg").annotate(n=Count("id")).order_by()
    }
    rows = []
    for mark in marks:
        positions = by_mark.get(mark.pk) or [None]
        for position in positions:
            revision = None if position is None else revisions[(mark.pk, position.frame_epsg)]
            rows.append((mark, position, revision))
    return rows
