"""Small input parsers shared by the services; every failure is a coded ValidationError.

The services accept plain Python values (from forms, the API, importers). These
helpers turn them into the types the models store and name the field that was wrong.
"""

from __future__ import annotations

import datetime as _dt
import math
from typing import Any

from django.core.exceptions import ValidationError
from django.utils import timezone
from django.utils.dateparse import parse_date, parse_datetime

from registry.services.limits import REASON_MAX

# Integers must fit the databases' 64-bit columns.
_MAX_INT64 = 2**63 - 1


def field_error(field: str, message: str, code: str, **params: Any) -> ValidationError:
    return ValidationError({field: ValidationError(message, code=code, params={"field": field, **params})})


def check_keys(data: Any, allowed: set[str] | tuple[str, ...]) -> dict[str, Any]:
    """``data`` must be a dict whose keys are all in ``allowed``."""
    if not isinstance(data, dict):
        raise ValidationError("Send the fields as an object.", code="invalid_payload")
    unknown = [k for k in data if k not in allowed]
    if unknown:
        raise ValidationError(
            {
                str(k): ValidationError(f"Unknown field '{k}'.", code="unknown_field", params={"field": k})
                for k in unknown
            }
        )
    return data


def parse_float(data: dict, field: str, *, required: bool = False) -> float | None:
    """A finite float from a number or numeric text; ``None`` when absent and not required."""
    value = data.get(field)
    if value is None or value == "":
        if required:
            raise field_error(field, "This field is required.", "required")
        return None
    if isinstance(value, bool):
        raise field_error(field, "Expected a number.", "invalid_number")
    try:
        number = float(value.strip() if isinstance(value, str) else value)
    except (TypeError, ValueError):
        raise field_error(field, "Expected a number.", "invalid_number") from None
    if not math.isfinite(number):
        raise field_error(field, "Expected a finite number.", "not_finite")
    return number


def parse_int(data: dict, field: str, *, required: bool = False) -> int | None:
    value = data.get(field)
    if value is None or value == "":
        if required:
            raise field_error(field, "This field is required.", "required")
        return None
    if isinstance(value, bool):
        raise field_error(field, "Expected a whole number.", "invalid_integer")
    if isinstance(value, float):
        if not value.is_integer() or abs(value) > _MAX_INT64:
            raise field_error(field, "Expected a whole number.", "invalid_integer")
        return int(value)
    try:
        number = int(value.strip() if isinstance(value, str) else value)
    except (TypeError, ValueError):
        raise field_error(field, "Expected a whole number.", "invalid_integer") from None
    if abs(number) > _MAX_INT64:
        raise field_error(field, "The number is out of range.", "out_of_range")
    return number


def parse_text(data: dict, field: str, *, required: bool = False, max_length: int | None = None) -> str:
    value = data.get(field)
    if value is None:
        value = ""
    if not isinstance(value, str):
        raise field_error(field, "Expected text.", "invalid_type")
    value = value.strip()
    if "\x00" in value:
        raise field_error(field, "Null characters are not allowed.", "null_characters_not_allowed")
    if required and not value:
        raise field_error(field, "This field is required.", "required")
    if max_length is not None and len(value) > max_length:
        raise field_error(
            field, "At most %(limit_value)d characters.", "max_length", limit_value=max_length, show_value=len(value)
        )
    return value


def parse_choice(data: dict, field: str, choices, *, required: bool = False, default: str | None = None) -> str | None:
    value = data.get(field)
    if value is None or value == "":
        if required and default is None:
            raise field_error(field, "This field is required.", "required")
        return default
    if value not in choices.values:
        raise field_error(
            field,
            "%(value)r is not one of: %(choices)s.",
            "invalid_choice",
            value=value,
            choices=", ".join(choices.values),
        )
    return value


def parse_aware_datetime(data: dict, field: str, *, required: bool = False) -> _dt.datetime | None:
    """A timezone-aware datetime (UTC when given as ISO 8601 text with an offset or 'Z')."""
    value = data.get(field)
    if value is None or value == "":
        if required:
            raise field_error(field, "This field is required.", "required")
        return None
    if isinstance(value, str):
        try:
            parsed = parse_datetime(value.strip())
        except ValueError:
            parsed = None
        if parsed is None:
            raise field_error(
                field, "Expected an ISO 8601 date and time, e.g. 2024-05-01T14:30:00Z.", "invalid_datetime"
            )
        value = parsed
    if not isinstance(value, _dt.datetime):
        raise field_error(field, "Expected a date and time.", "invalid_datetime")
    if timezone.is_naive(value):
        raise field_error(field, "Give the time zone (times are stored in UTC), e.g. a trailing 'Z'.", "naive_datetime")
    return value.astimezone(_dt.UTC)


def parse_date_value(data: dict, field: str, *, required: bool = False) -> _dt.date | None:
    value = data.get(field)
    if value is None or value == "":
        if required:
            raise field_error(field, "This field is required.", "required")
        return None
    if isinstance(value, _dt.datetime):
        raise field_error(field, "Expected a date (YYYY-MM-DD), not a date and time.", "invalid_date")
    if isinstance(value, str):
        try:
            parsed = parse_date(value.strip())
        except ValueError:
            parsed = None
        if parsed is None:
            raise field_error(field, "Expected a date as YYYY-MM-DD.", "invalid_date")
        value = parsed
    if not isinstance(value, _dt.date):
        raise field_error(field, "Expected a date.", "invalid_date")
    return value


def parse_note(note: Any, *, required: bool, what: str = "this action") -> str:
    """A reason or remark: text without null characters; ``note_required`` when required and empty."""
    if note is None:
        note = ""
    if not isinstance(note, str):
        raise field_error("note", "The note is text.", "invalid_type")
    note = note.strip()
    if "\x00" in note:
        raise field_error("note", "Null characters are not allowed.", "null_characters_not_allowed")
    if required and not note:
        raise field_error("note", f"Give the reason for {what}.", "note_required")
    if len(note) > REASON_MAX:
        raise field_error(
            "note", "At most %(limit_value)d characters.", "max_length", limit_value=REASON_MAX, show_value=len(note)
        )
    return note


def merge_errors(*errors: ValidationError) -> ValidationError:
    """Combine several field-keyed ValidationErrors into one."""
    merged: dict[str, list] = {}
    for err in errors:
        for key, items in err.error_dict.items():
            merged.setdefault(key, []).extend(items)
    return ValidationError(merged)
