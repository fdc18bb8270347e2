"""``python manage.py verify_audit``: check the audit trail's hash chain.

Walks every row in order (``registry/selectors/audit.py``) and says whether the chain is
intact; if not, which row is the first broken link and what is wrong with it. Prints the head
of the chain (its last place and hash): keep that line outside the database (a log on another
machine, a printed register), so that a later run can show the rows up to it were not rewritten.

Exit status: 0 the chain is intact; 1 a broken link was found (details on standard error);
2 the check could not run (e.g. the database is unreachable).
"""

from __future__ import annotations

import sys

from django.core.management.base import BaseCommand
from django.db import DatabaseError

from registry.selectors.audit import audit_verify_chain

EXIT_INTACT, EXIT_BROKEN, EXIT_FAILED = 0, 1, 2


class Command(BaseCommand):
    help = "Check the audit trail's hash chain and report the first broken link (exit 0 intact, 1 broken, 2 failed)."

    def add_arguments(self, parser):
        parser.add_argument("--database", default="default", help="database alias (default: default)")

    def handle(self, *args, **opts):
        try:
            report = audit_verify_chain(using=opts["database"])
        except DatabaseError as exc:
            self.stderr.write(f"The audit trail could not be read: {exc}")
            sys.exit(EXIT_FAILED)
        if report.intact:
            self.stdout.write(f"The audit trail is intact: {report.total:,} rows, each linked to the one before it.")
            self.stdout.write(f"Head of the chain: place {report.head_seq}, hash {report.head_hash}")
            return
        b = report.broken
        place = f"place {b.seq}" if b.seq is not None else "no place"
        self.stderr.write(f"The audit trail is BROKEN at row {b.row_id} ({place}, {b.at}, {b.action}): {b.problem}.")
        self.stderr.write(
            f"The {report.head_seq:,} rows before it are intact (last hash {report.head_hash}); "
            f"{report.total - report.head_seq:,} rows from it on cannot be trusted."
        )
        sys.exit(EXIT_BROKEN)
