"""Spreadsheet formula injection guard for CSV files meant to be opened in a spreadsheet.

A cell that starts with ``=``, ``+``, ``-``, ``@``, a tab or a carriage return may be run as a
formula when the file is opened in a spreadsheet program (OWASP, "CSV Injection",
https://owasp.org/www-community/attacks/CSV_Injection). Such text cells get a leading apostrophe,
which spreadsheets show as text. Cells that are numbers (``-110.6``, ``+1.5e-3``) are left alone.

Used for the job's control-list export only. The marks CSV of ``export_marks`` is a round-trip
format (``import_marks --update`` must read back exactly what was written), so it is NOT guarded;
its mark codes cannot start with these characters (``CODE_VALIDATOR``), but names and notes can, so
open it with a text editor or import it as text columns. See the README.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping
from typing import Any

FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")


def _is_number(text: str) -> bool:
    try:
        return math.isfinite(float(text))
    except ValueError:
        return False


def spreadsheet_safe(value: Any) -> Any:
    """``value`` with a leading ``'`` if it is text a spreadsheet could run as a formula.

    >>> spreadsheet_safe("=HYPERLINK(\\"http://x.invalid\\")")
    '\\'=HYPERLINK("http://x.invalid")'
    >>> spreadsheet_safe("-110.600000000"), spreadsheet_safe("River St"), spreadsheet_safe(7912)
    ('-110.600000000', 'River St', 7912)
    """
    if isinstance(value, str) and value.startswith(FORMULA_STARTS) and not _is_number(value):
        return "'" + value
    return value


def spreadsheet_safe_rows(rows: Iterable[Mapping[str, Any]]) -> list[dict[str, Any]]:
    """Every cell of ``rows`` through :func:`spreadsheet_safe`."""
    return [{key: spreadsheet_safe(value) for key, value in row.items()} for row in rows]
