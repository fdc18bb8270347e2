"""The append-only, tamper-evident audit trail.

Rows are only ever inserted. ``save()`` refuses an update, ``delete()`` refuses, database
triggers refuse UPDATE and DELETE (migration 0003) and, on PostgreSQL, TRUNCATE (migration
``audit_hash_chain``), and in production the application's database role may only INSERT and
SELECT on this table (``deploy/README.md``, "Database roles").

**Hash chain.** Every row carries ``seq`` (1, 2, 3, ... with no gaps), ``prev_hash`` (the
``row_hash`` of row ``seq - 1``; 64 zeros for the first row) and ``row_hash`` = SHA-256 of a
canonical JSON text of the row's content and ``prev_hash`` (:func:`chain_payload`). Changing,
removing or inserting a row anywhere breaks the link to the rows after it; ``manage.py
verify_audit`` walks the chain and reports the first broken link. (Whoever can rewrite the table
can also recompute every hash after the change, so ``verify_audit`` prints the head of the
chain: an office that keeps that line outside the database, e.g. in its backup log, can show
that the rows up to it were not rewritten.)

**One chain under concurrency.** Rows are chained when they are inserted, by ``save()`` and by
``AuditEvent.objects.bulk_create`` (so :func:`registry.services.audit.audit_record`, imports and
``load_demo`` all chain), inside the writer's transaction and under a lock held until it
commits: on PostgreSQL a transaction-level advisory lock (``pg_advisory_xact_lock``), taken
before the chain's head is read, so a second writer waits and then reads the first one's
committed row (READ COMMITTED: each statement sees what was committed before it started); on
SQLite every write transaction already holds the database's write lock (``BEGIN IMMEDIATE``,
settings.py). ``seq`` is unique, so a writer that got around the lock would fail, not fork the
chain. The lock serialises the audited writes only from their audit row to their commit.
"""

from __future__ import annotations

import datetime as _dt
import functools
import hashlib
import json
from typing import Any

from django.conf import settings
from django.db import connections, models, router, transaction
from django.utils import timezone

#: ``prev_hash`` of the first row.
GENESIS_HASH = "0" * 64
#: Version of the canonical form, hashed with every row.
CHAIN_VERSION = 1
#: Key of PostgreSQL's advisory lock that serialises appends to the chain ("AUDT").
CHAIN_LOCK_KEY = 0x41554454


class AuditTrailError(Exception):
    """The audit trail is append-only."""


def _canonical(value: Any) -> Any:
    """JSON values as they read back from either database (numbers normalised, keys as text).

    JSONB (PostgreSQL) and JSON text (SQLite) give back equal values but not always equal types:
    ``1e20`` may come back as the integer 100000000000000000000 and ``3.0`` as ``3``. Integral
    numbers below 2**53 are written as integers and every other number as its shortest float.

    The usual kinds (text, None, bools, plain ints and floats, plain dicts and lists) are told by their
    exact type, without a call per value inside a dict: an import chains tens of thousands of rows.
    Anything else (subclasses such as numpy's floats, other objects) goes through
    :func:`_canonical_any`, the rule as written above; a test compares the two on generated values.
    """
    t = type(value)
    if t is str or value is None:
        return value
    if t is dict:
        out = {}
        for k, v in value.items():
            tv = type(v)
            if tv is str or v is None or tv is bool:
                pass
            elif tv is float:
                if v.is_integer() and -_EXACT < v < _EXACT:
                    v = int(v)
            elif tv is int:
                if not -_EXACT < v < _EXACT:
                    v = _canonical_any(v)
            elif isinstance(v, str):  # text choices
                pass
            else:
                v = _canonical(v)
            out[k if type(k) is str else str(k)] = v
        return out
    if t is list or t is tuple:
        return [_canonical(v) for v in value]
    if t is float:
        return int(value) if value.is_integer() and -_EXACT < value < _EXACT else value
    if t is int and -_EXACT < value < _EXACT:
        return value
    return _canonical_any(value)


#: Integers of smaller magnitude are exact as floats (IEEE 754 double: a 53-bit significand).
_EXACT = 2**53


def _canonical_any(value: Any) -> Any:
    """:func:`_canonical` for any value, by ``isinstance`` (the rule as first written)."""
    if value is None or isinstance(value, bool | str):
        return value
    if isinstance(value, int | float):
        number = float(value)
        if number.is_integer() and abs(number) < 2**53:
            return int(number)
        return number
    if isinstance(value, dict):
        return {str(k): _canonical(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_canonical(v) for v in value]
    return str(value)


@functools.lru_cache(maxsize=256)
def _utc_text(at: _dt.datetime) -> str:
    """``at`` in UTC as ``2026-01-02T03:04:05.000000Z`` (kept for a while: a batch of rows shares one time)."""
    return at.astimezone(_dt.UTC).strftime("%Y-%m-%dT%H:%M:%S.%fZ")


#: The canonical text's encoder (sorted keys, no spaces, ASCII), made once.
_ENCODER = json.JSONEncoder(sort_keys=True, separators=(",", ":"), ensure_ascii=True)


def chain_payload(
    *,
    seq: int,
    at: _dt.datetime,
    actor_id: int | None,
    action: str,
    object_type: str,
    object_id: str,
    object_repr: str,
    mark_id: int | None,
    before: Any,
    after: Any,
    note: str,
    prev_hash: str,
) -> bytes:
    """The canonical text a row's hash is computed from (UTF-8 JSON, sorted keys, no spaces).

    >>> import datetime as dt
    >>> chain_payload(seq=1, at=dt.datetime(2026, 1, 2, 3, 4, 5, tzinfo=dt.UTC), actor_id=None, action="a",
    ...     object_type="t", object_id="1", object_repr="r", mark_id=None, before=None, after={"x": 1.0},
    ...     note="", prev_hash="0" * 4)
    b'{"action":"a","actor":null,"after":{"x":1},"at":"2026-01-02T03:04:05.000000Z","before":null,"mark":null,"note":"","object_id":"1","object_repr":"r","object_type":"t","prev":"0000","seq":1,"v":1}'
    """
    doc = {
        "v": CHAIN_VERSION,
        "seq": int(seq),
        "at": _utc_text(at),
        "actor": actor_id,
        "action": action,
        "object_type": object_type,
        "object_id": object_id,
        "object_repr": object_repr,
        "mark": mark_id,
        "before": _canonical(before),
        "after": _canonical(after),
        "note": note,
        "prev": prev_hash,
    }
    return _ENCODER.encode(doc).encode("ascii")


def row_hash_of(event: AuditEvent, *, seq: int | None = None, prev_hash: str | None = None) -> str:
    """SHA-256 (hex) of ``event`` chained to ``prev_hash`` (default: the row's own fields)."""
    payload = chain_payload(
        seq=event.seq if seq is None else seq,
        at=event.at,
        actor_id=event.actor_id,
        action=event.action,
        object_type=event.object_type,
        object_id=event.object_id,
        object_repr=event.object_repr,
        mark_id=event.mark_id,
        before=event.before,
        after=event.after,
        note=event.note,
        prev_hash=event.prev_hash if prev_hash is None else prev_hash,
    )
    return hashlib.sha256(payload).hexdigest()


def _lock_chain(using: str) -> None:
    connection = connections[using]
    if connection.vendor == "postgresql":
        with connection.cursor() as cur:
            cur.execute("SELECT pg_advisory_xact_lock(%s)", [CHAIN_LOCK_KEY])


def chain_head(using: str = "default") -> tuple[int, str]:
    """``(seq, row_hash)`` of the last chained row; ``(0, GENESIS_HASH)`` for an empty trail."""
    last = (
        AuditEvent.objects.using(using)
        .filter(seq__isnull=False)
        .order_by("-seq")
        .values_list("seq", "row_hash")
        .first()
    )
    return (int(last[0]), last[1]) if last else (0, GENESIS_HASH)


def _link(events: list[AuditEvent], using: str) -> None:
    """Give ``events`` (new rows, in order) their place in the chain. Call inside a transaction."""
    _lock_chain(using)
    seq, prev = chain_head(using)
    now = timezone.now()
    for event in events:
        if event.at is None:
            event.at = now
        if event.at.tzinfo is None:
            event.at = timezone.make_aware(event.at, _dt.UTC)
        seq += 1
        event.seq = seq
        event.prev_hash = prev
        event.row_hash = row_hash_of(event)
        prev = event.row_hash


def chain_new_rows(events: list[Any], using: str = "default") -> None:
    """Chain new rows that the caller inserts itself (``registry.services.import_bulk``), in order.

    ``events`` may be unsaved ``AuditEvent`` objects or any objects with the same attributes (``at``,
    ``actor_id``, ``action``, ``object_type``, ``object_id``, ``object_repr``, ``mark_id``, ``before``,
    ``after``, ``note``); ``seq``, ``prev_hash``, ``row_hash`` (and ``at`` when None) are set. Takes
    the chain's lock: call inside the transaction that inserts them, and insert them before it commits.
    """
    if not transaction.get_connection(using).in_atomic_block:
        raise AuditTrailError("Chain new audit rows inside the transaction that inserts them.")
    _link(events, using)


class AuditEventManager(models.Manager):
    def bulk_create(self, objs, *args, **kwargs):
        """Chain the new rows (in the given order) before inserting them, under the chain's lock."""
        objs = list(objs)
        using = self.db or router.db_for_write(self.model)
        with transaction.atomic(using=using):
            _link(objs, using)
            return super().bulk_create(objs, *args, **kwargs)

    def bulk_update(self, *args, **kwargs):
        raise AuditTrailError("Audit events are never changed.")


class AuditEvent(models.Model):
    at = models.DateTimeField(default=timezone.now, db_index=True)
    actor = models.ForeignKey(
        settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.PROTECT, related_name="+"
    )
    action = models.CharField(max_length=60, help_text="<entity>_<action>, e.g. mark_update.")
    object_type = models.CharField(max_length=40)
    object_id = models.CharField(max_length=40)
    object_repr = models.CharField(max_length=200, blank=True)
    mark = models.ForeignKey(
        "registry.Mark", null=True, blank=True, on_delete=models.PROTECT, related_name="audit_events"
    )
    before = models.JSONField(null=True, blank=True)
    after = models.JSONField(null=True, blank=True)
    note = models.TextField(blank=True)
    # The hash chain (module docstring). Null only for rows written before the chain existed and
    # not yet linked, which verify_audit reports.
    seq = models.BigIntegerField(null=True, blank=True, editable=False, help_text="Place in the hash chain, from 1.")
    prev_hash = models.CharField(max_length=64, blank=True, default="", editable=False)
    row_hash = models.CharField(max_length=64, blank=True, default="", editable=False)

    objects = AuditEventManager()

    class Meta:
        ordering = ["-at", "-id"]
        indexes = [models.Index(fields=["object_type", "object_id"], name="audit_object")]
        constraints = [
            models.UniqueConstraint(fields=["seq"], condition=models.Q(seq__isnull=False), name="audit_seq_unique")
        ]

    def __str__(self) -> str:
        return f"{self.at:%Y-%m-%d %H:%M:%S} {self.action} {self.object_type}:{self.object_id}"

    def save(self, *args, **kwargs):
        if self.pk is not None:
            raise AuditTrailError("Audit events are never changed.")
        using = kwargs.get("using") or router.db_for_write(type(self), instance=self)
        with transaction.atomic(using=using):
            _link([self], using)
            super().save(*args, **kwargs)

    def delete(self, *args, **kwargs):
        raise AuditTrailError("Audit events are never deleted.")
