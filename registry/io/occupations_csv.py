"""Occupation results in a CSV file (one occupation per row, optionally with its result position).

Pure Python (no Django). The columns (``README.md``, "Batch occupation results"):

==================== ========= ==================================================================
column               required  meaning
==================== ========= ==================================================================
mark                 yes       the mark's code
method               yes       static_gnss, rtk, network_rtk, levelling, total_station, other
start_utc, end_utc   yes       ISO 8601 with a zone, e.g. 2025-06-09T14:00:00Z
observer             no        who observed
receiver, antenna    no        make, model, serial
antenna_height_m     no        as measured, m
antenna_height_kind  no        vertical (default) or slant
antenna_radius_m     no        slant only: radius of the slant-measure point, m
arp_offset_m         no        slant only: offset to the antenna reference point, m
frame_epsg           result    EPSG code of the result's geographic 3D frame (e.g. 7912, 6319)
epoch_yr             result    coordinate epoch, decimal year
lat_deg, lon_deg     result    decimal degrees (east positive)
h_m                  result    ellipsoidal height, m
sigma_e_mm ... _u_mm result    one-sigma east, north, up, mm
corr_en, corr_eu,    no        correlation coefficients (−1 … 1) between the components; default 0
corr_nu
source               no        where the result came from (default: the file's name)
notes                no        free text
==================== ========= ==================================================================

A row with any "result" column filled must fill all of them (frame, epoch, coordinates, three sigmas);
a row with none of them records the occupation alone. Line numbers are those of the file (the header
is line 1; a quoted field spanning lines counts each).
"""

from __future__ import annotations

import csv
import io
import math
from dataclasses import dataclass, field
from typing import Any

COLUMNS = (
    "mark",
    "method",
    "start_utc",
    "end_utc",
    "observer",
    "receiver",
    "antenna",
    "antenna_height_m",
    "antenna_height_kind",
    "antenna_radius_m",
    "arp_offset_m",
    "frame_epsg",
    "epoch_yr",
    "lat_deg",
    "lon_deg",
    "h_m",
    "sigma_e_mm",
    "sigma_n_mm",
    "sigma_u_mm",
    "corr_en",
    "corr_eu",
    "corr_nu",
    "source",
    "notes",
)
REQUIRED = ("mark", "method", "start_utc", "end_utc")
RESULT_REQUIRED = ("frame_epsg", "epoch_yr", "lat_deg", "lon_deg", "h_m", "sigma_e_mm", "sigma_n_mm", "sigma_u_mm")
RESULT_OPTIONAL = ("corr_en", "corr_eu", "corr_nu")
#: Longest cell accepted (a note may be long; anything longer is a broken file).
MAX_CELL_CHARS = 10_000
#: Most rows in one file.
DEFAULT_MAX_ROWS = 50_000


@dataclass(frozen=True)
class CsvProblem:
    line: int
    code: str
    message: str
    column: str = ""
    mark: str = ""


@dataclass
class OccupationRow:
    """One row: the occupation's fields and, optionally, its result position (covariance in m², ENU)."""

    line: int
    mark: str
    occupation: dict[str, Any]
    result: dict[str, Any] | None = None


@dataclass
class OccupationsFile:
    rows: list[OccupationRow] = field(default_factory=list)
    problems: list[CsvProblem] = field(default_factory=list)


def _number(raw: str, column: str, line: int, mark: str, problems: list[CsvProblem]) -> float | None:
    try:
        value = float(raw)
    except ValueError:
        problems.append(CsvProblem(line, "invalid_number", f"{raw!r} is not a number.", column, mark))
        return None
    if not math.isfinite(value):
        problems.append(CsvProblem(line, "not_finite", f"{raw!r} is not a finite number.", column, mark))
        return None
    return value


def _result(cells: dict[str, str], line: int, mark: str, problems: list[CsvProblem]) -> dict[str, Any] | None:
    given = [c for c in RESULT_REQUIRED + RESULT_OPTIONAL if cells.get(c)]
    if not given:
        return None
    missing = [c for c in RESULT_REQUIRED if not cells.get(c)]
    if missing:
        problems.append(
            CsvProblem(
                line,
                "result_incomplete",
                f"A result needs {', '.join(RESULT_REQUIRED)}; missing: {', '.join(missing)}.",
                missing[0],
                mark,
            )
        )
        return None
    before = len(problems)
    values = {c: _number(cells[c], c, line, mark, problems) for c in RESULT_REQUIRED}
    corr = {c: _number(cells[c], c, line, mark, problems) if cells.get(c) else 0.0 for c in RESULT_OPTIONAL}
    if len(problems) > before:
        return None
    if values["frame_epsg"] != int(values["frame_epsg"]):
        problems.append(CsvProblem(line, "invalid_integer", "An EPSG code is a whole number.", "frame_epsg", mark))
        return None
    for c in ("sigma_e_mm", "sigma_n_mm", "sigma_u_mm"):
        if values[c] < 0:
            problems.append(CsvProblem(line, "negative_sigma", "A sigma cannot be negative.", c, mark))
    for c, r in corr.items():
        if r is not None and not -1.0 <= r <= 1.0:
            problems.append(CsvProblem(line, "correlation_out_of_range", "A correlation is between −1 and 1.", c, mark))
    if len(problems) > before:
        return None
    se, sn, su = (values[c] / 1000.0 for c in ("sigma_e_mm", "sigma_n_mm", "sigma_u_mm"))
    return {
        "frame_epsg": int(values["frame_epsg"]),
        "epoch_yr": values["epoch_yr"],
        "lat_deg": values["lat_deg"],
        "lon_deg": values["lon_deg"],
        "h_m": values["h_m"],
        "cov_ee_m2": se * se,
        "cov_nn_m2": sn * sn,
        "cov_uu_m2": su * su,
        "cov_en_m2": corr["corr_en"] * se * sn,
        "cov_eu_m2": corr["corr_eu"] * se * su,
        "cov_nu_m2": corr["corr_nu"] * sn * su,
    }


def parse_occupations_csv(text: str, *, max_rows: int = DEFAULT_MAX_ROWS) -> OccupationsFile:
    """Read the file into rows and problems (every problem of every row; nothing raised).

    >>> f = parse_occupations_csv("mark,method,start_utc,end_utc\\nA-1,rtk,2025-01-01T10:00Z,2025-01-01T10:05Z\\n")
    >>> (f.rows[0].line, f.rows[0].mark, f.rows[0].result, f.problems)
    (2, 'A-1', None, [])
    """
    out = OccupationsFile()
    if text.startswith("\ufeff"):
        text = text[1:]
    if "\x00" in text:
        out.problems.append(CsvProblem(1, "binary", "This is a binary file, not a CSV text file."))
        return out
    reader = csv.reader(io.StringIO(text, newline=""))
    try:
        header = next(reader)
    except StopIteration:
        out.problems.append(CsvProblem(1, "empty", "The file is empty."))
        return out
    except csv.Error as exc:
        out.problems.append(CsvProblem(1, "bad_csv", f"The header line cannot be read as CSV ({exc})."))
        return out
    names = [h.strip().lower() for h in header]
    unknown = [n for n in names if n not in COLUMNS]
    missing = [n for n in REQUIRED if n not in names]
    duplicated = sorted({n for n in names if names.count(n) > 1})
    for n in unknown:
        out.problems.append(
            CsvProblem(1, "unknown_column", f"Unknown column {n!r}; the columns are: {', '.join(COLUMNS)}.", n)
        )
    for n in missing:
        out.problems.append(CsvProblem(1, "missing_column", f"The column {n!r} is required.", n))
    for n in duplicated:
        out.problems.append(CsvProblem(1, "duplicate_column", f"The column {n!r} appears twice.", n))
    if out.problems:
        return out
    seen: dict[tuple[str, str], int] = {}
    start_line = reader.line_num + 1
    while True:
        try:
            cells_list = next(reader)
        except StopIteration:
            break
        except csv.Error as exc:
            out.problems.append(CsvProblem(start_line, "bad_csv", f"This line cannot be read as CSV ({exc})."))
            break
        line, start_line = start_line, reader.line_num + 1
        if not any(c.strip() for c in cells_list):
            continue
        if len(out.rows) + len({p.line for p in out.problems}) >= max_rows:
            out.problems.append(CsvProblem(line, "too_many_rows", f"A file holds at most {max_rows} rows."))
            break
        if len(cells_list) != len(names):
            out.problems.append(
                CsvProblem(
                    line, "wrong_cell_count", f"The row has {len(cells_list)} cells; the header has {len(names)}."
                )
            )
            continue
        cells = {n: c.strip() for n, c in zip(names, cells_list, strict=True)}
        mark = cells["mark"]
        before = len(out.problems)
        for n, c in cells.items():
            if len(c) > MAX_CELL_CHARS:
                out.problems.append(
                    CsvProblem(line, "cell_too_long", f"More than {MAX_CELL_CHARS} characters.", n, mark)
                )
        for n in REQUIRED:
            if not cells[n]:
                out.problems.append(CsvProblem(line, "required", "This cell is required.", n, mark))
        key = (mark, cells["start_utc"])
        if mark and cells["start_utc"]:
            if key in seen:
                out.problems.append(
                    CsvProblem(
                        line,
                        "duplicate_row",
                        f"The same mark and start time are on line {seen[key]} already.",
                        "start_utc",
                        mark,
                    )
                )
            else:
                seen[key] = line
        result = _result(cells, line, mark, out.problems)
        if len(out.problems) > before:
            continue
        occupation: dict[str, Any] = {
            "method": cells["method"],
            "start_utc": cells["start_utc"],
            "end_utc": cells["end_utc"],
        }
        for source_name, target in (
            ("observer", "observer"),
            ("receiver", "receiver"),
            ("antenna", "antenna"),
            ("antenna_height_m", "antenna_height_measured_m"),
            ("antenna_height_kind", "antenna_height_kind"),
            ("antenna_radius_m", "antenna_radius_m"),
            ("arp_offset_m", "arp_offset_m"),
            ("notes", "notes"),
        ):
            if cells.get(source_name):
                occupation[target] = cells[source_name]
        if result is not None and cells.get("source"):
            result["source"] = cells["source"]
        out.rows.append(OccupationRow(line=line, mark=mark, occupation=occupation, result=result))
    return out
