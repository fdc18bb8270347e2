"""Limits on JSON documents that keep odd input a clear refusal instead of a server error.

Pure Python (no Django), used by the API's parser (``registry/api/parsers.py``), the services
that take JSON text (a job's site) and the geodesy site parser.

- **Nesting.** ``[[[[...]]]]`` 100,000 deep makes ``json.loads`` raise ``RecursionError``. A
  document may be at most :data:`MAX_JSON_DEPTH` levels deep (a GeoJSON polygon with holes
  inside a request body is 5); deeper is ``json_too_deep``.
- **Text that is not Unicode.** JSON may spell a lone UTF-16 surrogate (``"\\ud800"``); Python
  keeps it in the string and the database driver then fails to encode it. Any such string,
  value or key, is ``invalid_text``.

The walk uses an explicit stack, so it never recurses itself.
"""

from __future__ import annotations

import json
from typing import Any

#: Deepest nesting of arrays/objects accepted in a JSON document (README, "JSON API": limits).
MAX_JSON_DEPTH = 32


class JSONLimitError(ValueError):
    """A JSON document broke a limit; ``code`` is ``json_too_deep`` or ``invalid_text``."""

    def __init__(self, message: str, code: str):
        super().__init__(message)
        self.message = message
        self.code = code


def _bad_text(text: str) -> bool:
    try:
        text.encode("utf-8")
    except UnicodeEncodeError:
        return True
    return False


def check_json_value(value: Any, *, max_depth: int = MAX_JSON_DEPTH) -> Any:
    """Return ``value`` unchanged if it is at most ``max_depth`` deep and all its text is Unicode.

    >>> check_json_value({"a": [1, {"b": "x"}]})
    {'a': [1, {'b': 'x'}]}
    >>> check_json_value([[[]]], max_depth=2)
    Traceback (most recent call last):
    ...
    registry.jsonlimits.JSONLimitError: The JSON is nested more than 2 levels deep.
    """
    stack: list[tuple[Any, int]] = [(value, 1)]
    while stack:
        item, depth = stack.pop()
        if isinstance(item, str):
            if _bad_text(item):
                raise JSONLimitError(
                    "The text contains a character that is not valid Unicode (a lone surrogate such as \\ud800).",
                    "invalid_text",
                )
            continue
        if isinstance(item, dict | list):
            if depth > max_depth:
                raise JSONLimitError(f"The JSON is nested more than {max_depth} levels deep.", "json_too_deep")
            if isinstance(item, dict):
                for key, child in item.items():
                    stack.append((key, depth))
                    stack.append((child, depth + 1))
            else:
                stack.extend((child, depth + 1) for child in item)
    return value


def loads_checked(text: str | bytes, *, max_depth: int = MAX_JSON_DEPTH, **kwargs) -> Any:
    """``json.loads`` that raises :class:`JSONLimitError` (a ``ValueError``) for the limits above."""
    try:
        value = json.loads(text, **kwargs)
    except RecursionError:
        raise JSONLimitError(f"The JSON is nested more than {max_depth} levels deep.", "json_too_deep") from None
    return check_json_value(value, max_depth=max_depth)
