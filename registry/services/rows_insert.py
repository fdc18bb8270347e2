"""Inserting many new rows of one model: one ``INSERT ... VALUES (...), (...) RETURNING id`` per batch.

``QuerySet.bulk_create`` prepares every value of every row through the field's full save path and, on
SQLite, splits a batch into statements of 999 parameters (33 rows of a movement check); for an import of
a few thousand rows that was most of its time (benchmarks/bench_import.py). Here the rows are plain
dicts keyed by column (``attname``), numbers and text are passed as they are (after ``float``/``int``/
``bool``, which also turns numpy scalars into Python ones), and only the other kinds of field (dates and
times, JSON) go through the field's own ``get_db_prep_save``. Absent columns take the field's default;
``auto_now``/``auto_now_add`` columns not given take the time of the call. The database checks every constraint,
as for any insert. No signals are sent (as with ``bulk_create``); models whose ``save()`` must run
(the audit trail chains its rows first: :func:`registry.models.audit.chain_new_rows`) are the caller's
business.
"""

from __future__ import annotations

import operator
import sqlite3
from collections.abc import Callable, Sequence
from typing import Any

from django.db import connections, models, router
from django.utils import timezone

#: Rows per statement.
BATCH = 500


def _converter(field: models.Field, connection) -> Callable[[Any], Any]:
    if isinstance(field, models.ForeignKey | models.IntegerField):
        return lambda v: None if v is None else int(v)
    if isinstance(field, models.FloatField):
        return lambda v: None if v is None else float(v)
    if isinstance(field, models.BooleanField):
        return lambda v: None if v is None else bool(v)
    if isinstance(field, models.CharField | models.TextField) and not field.choices:
        return lambda v: v
    if isinstance(field, models.CharField | models.TextField):
        return lambda v: None if v is None else str(v)  # TextChoices members as plain text
    if isinstance(field, models.DateTimeField):  # one time for a whole import: adapted once
        cache: dict[Any, Any] = {}

        def adapt(v):
            if v not in cache:
                cache[v] = field.get_db_prep_save(v, connection)
            return cache[v]

        return adapt
    if isinstance(field, models.JSONField):  # the same list or dict in several rows is adapted once
        seen: dict[int, tuple[Any, Any]] = {}

        def adapt_json(v):
            hit = seen.get(id(v))
            if hit is None or hit[0] is not v:  # holding ``v`` keeps its id from being reused
                hit = seen[id(v)] = (v, field.get_db_prep_save(v, connection))
            return hit[1]

        return adapt_json
    return lambda v: field.get_db_prep_save(v, connection)


def insert_rows(model: type[models.Model], rows: Sequence[dict[str, Any]], *, batch: int = BATCH) -> list[int]:
    """Insert ``rows`` (dicts keyed by ``attname``) into ``model``'s table; returns their new ids, in order.

    Call inside the caller's transaction. Statements hold at most ``batch`` rows and never more
    parameters than the database accepts.
    """
    if not rows:
        return []
    using = router.db_for_write(model)
    connection = connections[using]
    opts = model._meta
    fields = [f for f in opts.concrete_fields if not f.primary_key and not getattr(f, "generated", False)]
    now = timezone.now()
    columns: list[tuple[str, Any, Callable[..., Any]]] = []
    for f in fields:
        convert = _converter(f, connection)
        if getattr(f, "auto_now", False) or getattr(f, "auto_now_add", False):
            columns.append((f.attname, None, lambda v, convert=convert: convert(v or now)))
        else:
            columns.append((f.attname, f.get_default, convert))
    limit = connection.features.max_query_params
    if connection.vendor == "sqlite":
        limit = connection.connection.getlimit(sqlite3.SQLITE_LIMIT_VARIABLE_NUMBER) if connection.connection else 999
    per_statement = max(1, min(batch, (limit or 65535) // len(columns)))
    qn = connection.ops.quote_name
    if connection.vendor == "postgresql":
        with connection.wrap_database_errors:  # the driver's errors as Django's (IntegrityError, ...)
            return _copy_rows(connection, opts, fields, columns, defaults_of(columns), rows, batch)
    if connection.vendor != "sqlite":
        objs = model.objects.using(using).bulk_create([model(**row) for row in rows], batch_size=batch)
        return [obj.pk for obj in objs]
    head = f"INSERT INTO {qn(opts.db_table)} ({', '.join(qn(f.column) for f in fields)}) VALUES "
    one = "(" + ", ".join(["?"] * len(columns)) + ")"
    ids: list[int] = []
    defaults = defaults_of(columns)
    with connection.cursor() as cursor:
        # sqlite3's own cursor, with its own placeholder: Django's wrapper rewrites each "%s" with a regular
        # expression (a tenth of an import's time). Statements are then not in Django's query log.
        raw = cursor.cursor
        execute = sqlite3.Cursor.execute
        for start in range(0, len(rows), per_statement):
            chunk = rows[start : start + per_statement]
            params: list[Any] = []
            for row in chunk:
                for name, _default, convert in columns:
                    params.append(convert(row[name] if name in row else defaults.get(name)))
            with connection.wrap_database_errors:  # the driver's errors as Django's (IntegrityError, ...)
                execute(raw, head + ", ".join([one] * len(chunk)) + f" RETURNING {qn(opts.pk.column)}", params)
                ids.extend(r[0] for r in raw.fetchall())
    return ids


def defaults_of(columns) -> dict[str, Any]:
    return {name: default() for name, default, _ in columns if default is not None}


#: Field kinds whose values the driver writes as COPY text itself (Python's or numpy's numbers, bools, text):
#: the server reads the text by the column's type, so no conversion on the client.
_COPY_AS_IS = (models.ForeignKey, models.IntegerField, models.FloatField, models.BooleanField)


def _copy_as_is(field: models.Field) -> bool:
    if isinstance(field, _COPY_AS_IS):
        return True
    return isinstance(field, models.CharField | models.TextField) and not field.choices


def _copy_rows(connection, opts, fields, columns, defaults, rows, batch: int) -> list[int]:
    """PostgreSQL: take the ids from the table's sequence (one query), then ``COPY`` the rows with them.

    A multi-row INSERT binds every value on the client, one by one; COPY streams them (about five
    times less CPU for an import, benchmarks/bench_import.py). COPY sends text that the server reads by
    each column's type, so numbers, bools and plain text go as they are (the driver writes Python's and
    numpy's); only times, JSON, text choices and other kinds go through their converter
    (:func:`_converter`). The sequence moves as for any insert.
    """
    qn = connection.ops.quote_name
    pk = opts.pk.column
    names = [name for name, _d, _c in columns]
    wanted = frozenset(names)
    # (place in the row after the id, converter) of the columns that need one; auto_now ones always do.
    converted = [
        (i + 1, convert)
        for i, (f, (_n, default, convert)) in enumerate(zip(fields, columns, strict=True))
        if default is None or not _copy_as_is(f)
    ]
    pick = operator.itemgetter(*names)
    with connection.cursor() as cursor:
        cursor.execute(
            "SELECT nextval(pg_get_serial_sequence(%s, %s)) FROM generate_series(1, %s)",
            [qn(opts.db_table), pk, len(rows)],
        )
        ids = [r[0] for r in cursor.fetchall()]
        columns_sql = ", ".join([qn(pk), *(qn(f.column) for f in fields)])
        raw = cursor.cursor  # psycopg's own cursor (COPY is not part of the DB-API)
        for start in range(0, len(rows), batch):
            with raw.copy(f"COPY {qn(opts.db_table)} ({columns_sql}) FROM STDIN") as copy:
                for pk_value, row in zip(ids[start : start + batch], rows[start : start + batch], strict=True):
                    if wanted <= row.keys():
                        values = [pk_value, *pick(row)] if len(names) > 1 else [pk_value, row[names[0]]]
                    else:
                        values = [pk_value, *(row[n] if n in row else defaults.get(n) for n in names)]
                    for i, convert in converted:
                        values[i] = convert(values[i])
                    copy.write_row(values)
    return ids
