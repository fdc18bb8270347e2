"""The API's JSON parser: DRF's, plus limits that keep odd input a 400 instead of a 500.

- **Nesting.** ``[[[[...]]]]`` 100,000 deep made ``json.loads`` raise ``RecursionError`` (a 500).
  The parsed document may be at most :data:`MAX_JSON_DEPTH` levels deep (a GeoJSON polygon
  with holes is 5 levels inside the request body); deeper is 400 ``json_too_deep``.
- **Text that is not Unicode.** JSON may spell a lone UTF-16 surrogate (``"\\ud800"``); Python
  keeps it in the string, and the database driver then fails to encode it (a 500). Any such
  string, value or key, is 400 ``invalid_text``.

Both are checked by :func:`registry.jsonlimits.check_json_value`, which the job form and the
other JSON text inputs use too.
"""

from __future__ import annotations

from rest_framework.exceptions import ParseError
from rest_framework.parsers import JSONParser

from registry.jsonlimits import MAX_JSON_DEPTH, JSONLimitError, check_json_value


class SafeJSONParser(JSONParser):
    """DRF's JSON parser with the nesting and text checks (400 ``json_too_deep`` / ``invalid_text``)."""

    def parse(self, stream, media_type=None, parser_context=None):
        try:
            data = super().parse(stream, media_type, parser_context)
        except RecursionError:
            raise ParseError(
                f"JSON parse error - nested more than {MAX_JSON_DEPTH} levels deep.", code="json_too_deep"
            ) from None
        try:
            return check_json_value(data)
        except JSONLimitError as exc:
            raise ParseError(exc.message, code=exc.code) from None
