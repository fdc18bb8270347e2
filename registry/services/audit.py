"""The audit trail: one append-only row per change (and per refused concurrent edit).

Every service calls :func:`audit_record` inside its transaction, so the audit row
commits or rolls back together with the change it describes. The before/after
snapshots are JSON-safe: dates and times become ISO 8601 strings, decimals and
floats become floats, files become their stored names.
"""

from __future__ import annotations

import datetime as _dt
import decimal
import uuid
from collections.abc import Iterable, Mapping
from typing import Any

from django.db import models
from django.db.models.fields.files import FieldFile

from registry.models import AuditEvent, Mark

#: Types given back as they are (subclasses, e.g. text choices, take the checks below).
_PLAIN = frozenset({str, int, float, bool, type(None)})


def json_safe(value: Any) -> Any:
    """Return ``value`` converted to plain JSON types (recursively for dicts and lists).

    >>> json_safe({"d": _dt.date(2024, 5, 1), "x": decimal.Decimal("1.5"), "t": (1, 2)})
    {'d': '2024-05-01', 'x': 1.5, 't': [1, 2]}
    """
    if type(value) in _PLAIN:  # most values: told by their exact type (an import snapshots thousands of rows)
        return value
    if value is None or isinstance(value, bool | int | str):
        return value
    if isinstance(value, float):
        return value
    if isinstance(value, decimal.Decimal):
        return float(value)
    if isinstance(value, _dt.datetime | _dt.date | _dt.time):
        return value.isoformat()
    if isinstance(value, _dt.timedelta):
        return value.total_seconds()
    if isinstance(value, uuid.UUID):
        return str(value)
    if isinstance(value, FieldFile):
        return value.name or ""
    if isinstance(value, models.Model):
        return value.pk
    if isinstance(value, Mapping):
        return {str(k): json_safe(v) for k, v in value.items()}
    if isinstance(value, list | tuple | set | frozenset):
        return [json_safe(v) for v in value]
    return str(value)


def snapshot(obj: models.Model, fields: Iterable[str] | None = None) -> dict[str, Any]:
    """A JSON-safe dict of the concrete fields of ``obj`` (foreign keys by their ``*_id``).

    ``fields`` limits the snapshot to those field names (``attname`` or ``name``).
    """
    wanted = set(fields) if fields is not None else None
    out: dict[str, Any] = {}
    for field in obj._meta.concrete_fields:
        if wanted is not None and field.name not in wanted and field.attname not in wanted:
            continue
        out[field.attname] = json_safe(getattr(obj, field.attname))
    return out


def _mark_of(obj: models.Model) -> Mark | None:
    if isinstance(obj, Mark):
        return obj
    mark_id = getattr(obj, "mark_id", None)
    if mark_id is not None:
        return Mark(pk=mark_id)
    return None


def audit_record(
    *,
    actor,
    action: str,
    obj: models.Model,
    before: Mapping[str, Any] | None = None,
    after: Mapping[str, Any] | None = None,
    note: str = "",
    mark: Mark | None = None,
) -> AuditEvent:
    """Append one audit event describing ``action`` on ``obj``.

    Parameters
    ----------
    actor
        The user who acted (``None`` or an anonymous user for system actions).
    action
        ``<entity>_<action>``, e.g. ``mark_update`` or ``position_publish``.
    obj
        The model instance acted on; its type, primary key and ``str()`` are stored.
    before, after
        Snapshots of what changed (any mapping; converted with :func:`json_safe`).
    note
        Free text, e.g. the reason given for a rejection.
    mark
        The mark the event belongs to; defaults to ``obj`` itself or ``obj.mark``.

    Returns
    -------
    AuditEvent
        The stored row.
    """
    if actor is not None and not getattr(actor, "is_authenticated", False):
        actor = None
    if mark is None:
        mark = _mark_of(obj)
    return AuditEvent.objects.create(
        actor=actor,
        action=action[:60],
        object_type=obj._meta.model_name[:40],
        object_id=str(obj.pk)[:40],
        object_repr=str(obj)[:200],
        mark=mark,
        before=json_safe(dict(before)) if before is not None else None,
        after=json_safe(dict(after)) if after is not None else None,
        note=note or "",
    )


def create_audited(obj: models.Model, *, actor, action: str, what: str, check_code_first: bool = True):
    """Insert ``obj``, a new row with a unique ``code``, and its audit row ``action``, in one transaction.

    A code already taken is the field error ``unique`` ("A <what> with this code already exists."):
    checked first (``check_code_first``; a model's ``full_clean`` may have checked it already), and again
    when the database's unique index refuses the insert (two creations of the same code at once).
    """
    from django.db import IntegrityError, transaction

    from registry.services._input import field_error

    model = type(obj)

    def taken():
        return field_error("code", f"A {what} with this code already exists.", "unique")

    if check_code_first and model.objects.filter(code=obj.code).exists():
        raise taken()
    try:
        with transaction.atomic():
            obj.save(force_insert=True)
            audit_record(actor=actor, action=action, obj=obj, after=snapshot(obj))
    except IntegrityError:
        if model.objects.filter(code=obj.code).exists():
            raise taken() from None
        raise
    return obj
