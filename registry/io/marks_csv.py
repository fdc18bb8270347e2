"""Marks as CSV (RFC 4180: comma-separated, double-quote quoting, UTF-8, a header row).

One row per (mark, published position), or one row without a position for a mark that has none: the
mark's description fields and version and, optionally, one published position with its revision. The columns
are ``registry.io.common.CSV_COLUMNS`` (documented in README.md, section import-export). On import only
``code`` is required; any other column may be left out (an absent column keeps the model default on
create and the stored value with ``--update``). Unknown or repeated column names are refused, so that a
misspelt header never silently drops data. The earlier names of renamed columns (``to_reach``,
``monument_type``, ``setting``, ``stamping``, ``custodian``) are read as the new ones for one more release.

Errors name the CSV line where the record starts (the header is line 1; a quoted field may span lines).
"""

from __future__ import annotations

import csv
import io
from collections import Counter

from registry.io.common import (
    CSV_COLUMNS,
    OLD_COLUMNS,
    ParseResult,
    RowError,
    format_cell,
    new_column_names,
    validate_row,
)

MEDIA_TYPE = "text/csv"
#: Most columns a header may have: every column and every earlier name once, with room for a few
#: mistakes to be listed by name. A longer header is refused at once, before any name is compared.
MAX_COLUMNS = len(CSV_COLUMNS) + len(OLD_COLUMNS) + 20
#: Most column names quoted in one message.
NAMES_SHOWN = 20


def _names(names: list[str]) -> str:
    shown = ", ".join(repr(n[:60]) for n in names[:NAMES_SHOWN])
    return shown + (f" and {len(names) - NAMES_SHOWN} more" if len(names) > NAMES_SHOWN else "")


def parse_marks_csv(text: str) -> ParseResult:
    """Parse and validate CSV text; every problem is collected, nothing is written anywhere."""
    result = ParseResult(format="csv")
    if text.startswith("\ufeff"):
        text = text[1:]
    reader = csv.reader(io.StringIO(text, newline=""), strict=True)
    try:
        header = next(reader)
    except StopIteration:
        result.errors.append(RowError("file", 0, "empty_file", "the file is empty; expected a header row"))
        return result
    except csv.Error as exc:
        result.errors.append(RowError("line 1", 1, "malformed_csv", f"cannot read the header: {exc}"))
        return result
    if len(header) > MAX_COLUMNS:
        result.errors.append(
            RowError(
                "line 1",
                1,
                "too_many_columns",
                f"the header has {len(header):,} columns; a marks file has at most {len(CSV_COLUMNS)} "
                "(is this the right file, or a different separator?)",
            )
        )
        return result
    header, renamed = new_column_names([h.strip() for h in header])
    if renamed:
        result.errors.extend(renamed)
        return result
    known = set(CSV_COLUMNS)
    unknown = [h for h in header if h not in known]
    repeated = sorted(name for name, n in Counter(header).items() if n > 1)
    if unknown:
        result.errors.append(RowError("line 1", 1, "unknown_column", f"unknown column(s): {_names(unknown)}"))
    if repeated:
        result.errors.append(RowError("line 1", 1, "repeated_column", f"repeated column(s): {_names(repeated)}"))
    if "code" not in header:
        result.errors.append(RowError("line 1", 1, "code_required", "the header has no 'code' column"))
    if result.errors:
        return result

    line_end = reader.line_num
    while True:
        line = line_end + 1
        try:
            row = next(reader)
        except StopIteration:
            break
        except csv.Error as exc:
            result.errors.append(RowError(f"line {line}", line, "malformed_csv", str(exc)))
            break
        line_end = reader.line_num
        if not row or all(cell.strip() == "" for cell in row):
            continue
        where = f"line {line}"
        if len(row) != len(header):
            result.errors.append(
                RowError(where, line, "wrong_field_count", f"expected {len(header)} fields, got {len(row)}")
            )
            continue
        record, errors = validate_row(dict(zip(header, row, strict=True)), where=where, index=line)
        if errors:
            result.errors.extend(errors)
        else:
            result.records.append(record)
    return result


def write_marks_csv(rows: list[dict]) -> str:
    """CSV text of export rows (``registry.io.common.export_values``), all columns, CRLF line ends."""
    out = io.StringIO(newline="")
    writer = csv.writer(out, lineterminator="\r\n")
    writer.writerow(CSV_COLUMNS)
    for values in rows:
        writer.writerow([format_cell(name, values.get(name)) for name in CSV_COLUMNS])
    return out.getvalue()
