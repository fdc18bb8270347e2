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


#: Deepest ``offset`` the mark list answers; deeper pages are reached by following ``next`` (a cursor).
MAX_MARK_OFFSET = 10_000


class MarkKeysetPagination(RegistryPagination):
    """The mark list's paging: cursors by default, ``offset`` up to 10,000; counts exact up to 10,000.

    Without ``offset`` the ``next``/``previous`` links carry an opaque ``cursor`` (the page after or
    before a mark code): every page costs the same, however deep (``OFFSET 900000`` read and threw
    away 900,000 rows: 4.4 s at a million marks). ``offset`` still works up to 10,000 rows; deeper it
    is refused with a 400 that says to follow ``next``. ``count`` is exact up to 10,000 matches; above
    that (PostgreSQL) it is the database's estimate and ``count_is_estimate`` is true.
    """

    cursor_query_param = "cursor"
    key = "code"

    def paginate_queryset(self, queryset, request, view=None):
        from registry.selectors.paging import count_rows, decode_cursor, keyset_page

        self.request = request
        self.limit = self.get_limit(request)
        raw_cursor = request.query_params.get(self.cursor_query_param)
        raw_offset = request.query_params.get(self.offset_query_param)
        unfiltered = getattr(view, "unfiltered", False)
        counted = count_rows(queryset, unfiltered_model=queryset.model if unfiltered else None)
        self.count, self.count_exact = counted.n, counted.exact
        self.mode = "offset" if raw_offset not in (None, "") and not raw_cursor else "cursor"
        if self.mode == "offset":
            self.offset = _whole_number(raw_offset, name=self.offset_query_param, minimum=0, maximum=MAX_MARK_OFFSET)
            self.rows = list(queryset[self.offset : self.offset + self.limit])
            return self.rows
        after = before = None
        if raw_cursor:
            try:
                direction, key = decode_cursor(raw_cursor)
            except ValueError:
                raise ValidationError(
                    {self.cursor_query_param: ValidationError("Not a cursor from this list.", code="invalid_cursor")}
                ) from None
            after, before = (key, None) if direction == "after" else (None, key)
        self.page = keyset_page(queryset, key=self.key, size=self.limit, after=after, before=before)
        return self.page.object_list

    def _link(self, **params):
        from rest_framework.utils.urls import remove_query_param, replace_query_param

        url = self.request.build_absolute_uri()
        for name in (self.offset_query_param, self.cursor_query_param):
            url = remove_query_param(url, name)
        for name, value in params.items():
            url = replace_query_param(url, name, value)
        return url

    def get_next_link(self):
        from registry.selectors.paging import encode_cursor

        if self.mode == "offset":
            following = self.offset + self.limit
            if len(self.rows) < self.limit or (self.count_exact and following >= self.count):
                return None
            if following > MAX_MARK_OFFSET:  # past the deepest offset: continue by cursor
                return self._link(cursor=encode_cursor(getattr(self.rows[-1], self.key)))
            return self._link(offset=following)
        if not self.page.has_next:
            return None
        return self._link(cursor=encode_cursor(self.page.last_key))

    def get_previous_link(self):
        from registry.selectors.paging import encode_cursor

        if self.mode == "offset":
            if self.offset <= 0:
                return None
            return self._link(offset=max(0, self.offset - self.limit))
        if not self.page.has_previous:
            return None
        return self._link(cursor=encode_cursor(self.page.first_key, before=True))

    def get_paginated_response(self, data):
        from rest_framework.response import Response

        return Response(
            {
                "count": self.count,
                "count_is_estimate": not self.count_exact,
                "next": self.get_next_link(),
                "previous": self.get_previous_link(),
                "results": data,
            }
        )

    def get_paginated_response_schema(self, schema):
        base = super().get_paginated_response_schema(schema)
        base["properties"]["count"]["description"] = (
            "Matching marks: exact up to 10,000; above that an estimate (count_is_estimate)."
        )
        base["properties"]["count_is_estimate"] = {"type": "boolean"}
        base["required"] = [*base.get("required", ["count", "results"]), "count_is_estimate"]
        return base

    def get_schema_operation_parameters(self, view):
        params = super().get_schema_operation_parameters(view)
        for param in params:
            if param["name"] == self.offset_query_param:
                param["description"] = f"Rows to skip (0 to {MAX_MARK_OFFSET:,}); deeper pages: follow next (a cursor)."
                param["schema"] = {"type": "integer", "minimum": 0, "maximum": MAX_MARK_OFFSET}
        params.append(
            {
                "name": self.cursor_query_param,
                "required": False,
                "in": "query",
                "description": "Opaque position from a next or previous link.",
                "schema": {"type": "string"},
            }
        )
        return params
