"""Paging of the API's lists: ``limit`` and ``offset``, checked, with a documented maximum.

DRF's own ``LimitOffsetPagination`` passes any integer to the database, so
``?limit=99999999999999999999`` overflowed the 64-bit LIMIT and answered 500, and
``?limit=abc`` silently meant the default. Here a value that is not a whole number, is
negative, or is above the maximum is refused with 400 (``invalid``, details under
``limit`` / ``offset``) in the API's one error shape.
"""

from __future__ import annotations

from django.core.exceptions import ValidationError
from rest_framework.pagination import LimitOffsetPagination

#: Most rows one page of a list returns (README, "JSON API": paging).
MAX_LIMIT = 500
#: The default page size (REST_FRAMEWORK["PAGE_SIZE"]).
DEFAULT_LIMIT = 100
#: Largest offset accepted; far beyond any registry, far below the databases' 64-bit limit.
MAX_OFFSET = 1_000_000_000


def _whole_number(raw: str, *, name: str, minimum: int, maximum: int) -> int:
    text = raw.strip()
    if not (text.isascii() and text.isdigit()) or len(text) > 12:
        if text.isascii() and text.isdigit():  # a long run of digits: only too large
            raise ValidationError(
                {name: ValidationError("At most %(limit_value)d.", code="max_value", params={"limit_value": maximum})}
            )
        raise ValidationError({name: ValidationError("Expected a whole number.", code="invalid_integer")})
    value = int(text)
    if value < minimum:
        raise ValidationError(
            {name: ValidationError("At least %(limit_value)d.", code="min_value", params={"limit_value": minimum})}
        )
    if value > maximum:
        raise ValidationError(
            {name: ValidationError("At most %(limit_value)d.", code="max_value", params={"limit_value": maximum})}
        )
    return value


class RegistryPagination(LimitOffsetPagination):
    """``?limit=`` 1–500 (default 100), ``?offset=`` 0–1,000,000,000; anything else is a 400."""

    default_limit = DEFAULT_LIMIT
    max_limit = MAX_LIMIT

    def get_limit(self, request):
        raw = request.query_params.get(self.limit_query_param)
        if raw is None or raw == "":
            return self.default_limit
        return _whole_number(raw, name=self.limit_query_param, minimum=1, maximum=MAX_LIMIT)

    def get_offset(self, request):
        raw = request.query_params.get(self.offset_query_param)
        if raw is None or raw == "":
            return 0
        return _whole_number(raw, name=self.offset_query_param, minimum=0, maximum=MAX_OFFSET)

    def get_schema_operation_parameters(self, view):
        params = super().get_schema_operation_parameters(view)
        for param in params:
            if param["name"] == self.limit_query_param:
                param["description"] = f"Rows per page, 1 to {MAX_LIMIT} (default {DEFAULT_LIMIT})."
                param["schema"] = {"type": "integer", "minimum": 1, "maximum": MAX_LIMIT}
            elif param["name"] == self.offset_query_param:
                param["description"] = "Rows to skip (0 to 1,000,000,000)."
                param["schema"] = {"type": "integer", "minimum": 0, "maximum": MAX_OFFSET}
        return params
