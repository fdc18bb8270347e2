"""Reading the audit trail's hash chain back: :func:`audit_verify_chain`.

The chain itself is described in :mod:`registry.models.audit`. The walk reads the rows in
``seq`` order, in chunks (constant memory), and checks for each row: it has a place in the
chain, its ``seq`` is the previous one plus 1 (the first is 1), its ``prev_hash`` is the previous
row's ``row_hash``, and its ``row_hash`` is the SHA-256 of its own content. The first row that
fails is reported; rows after it are not trusted.
"""

from __future__ import annotations

from dataclasses import dataclass

from registry.models import AuditEvent
from registry.models.audit import GENESIS_HASH, row_hash_of


@dataclass(frozen=True)
class BrokenLink:
    """The first row where the chain does not hold."""

    row_id: int
    seq: int | None
    at: str
    action: str
    problem: str  # plain words


@dataclass(frozen=True)
class ChainReport:
    rows: int  # rows checked (up to and including a broken one)
    total: int  # rows in the table
    head_seq: int  # last intact link
    head_hash: str
    broken: BrokenLink | None

    @property
    def intact(self) -> bool:
        return self.broken is None


def audit_verify_chain(*, using: str = "default", chunk_size: int = 2000) -> ChainReport:
    """Walk the whole chain; stop at the first broken link."""
    total = AuditEvent.objects.using(using).count()
    unlinked = AuditEvent.objects.using(using).filter(seq__isnull=True).order_by("id").first()
    expected_seq, prev = 1, GENESIS_HASH
    checked = 0
    broken = None
    qs = AuditEvent.objects.using(using).filter(seq__isnull=False).order_by("seq")
    for event in qs.iterator(chunk_size=chunk_size):
        checked += 1
        problem = ""
        if event.seq != expected_seq:
            problem = (
                f"rows are missing before it: its place in the chain is {event.seq}, the next expected was "
                f"{expected_seq}"
                if event.seq > expected_seq
                else f"its place in the chain ({event.seq}) repeats an earlier one"
            )
        elif event.prev_hash != prev:
            problem = "it does not point to the row before it (the previous row was changed or replaced)"
        elif event.row_hash != row_hash_of(event):
            problem = "its content does not match its hash (the row was changed)"
        if problem:
            broken = BrokenLink(event.pk, event.seq, event.at.isoformat(), event.action, problem)
            break
        expected_seq, prev = event.seq + 1, event.row_hash
    if broken is None and unlinked is not None:
        checked += 1
        broken = BrokenLink(
            unlinked.pk, None, unlinked.at.isoformat(), unlinked.action, "it has no place in the chain (never linked)"
        )
    return ChainReport(rows=checked, total=total, head_seq=expected_seq - 1, head_hash=prev, broken=broken)
