"""``python manage.py verify_signed_documents [--files] [--database ALIAS]``: are the issued documents intact?

For every signed or superseded document the SHA-256 of the PDF bytes kept in the database must equal
the checksum recorded when it was signed, and their length the recorded size. With ``--files`` the copy
in file storage (the media folder or the shared object store) is read back and checked too; a missing
file is a failure. Used after a restore (``deploy/restore_drill.sh``) and by an administrator at will.

Exit status: 0 every issued document is intact; 1 at least one is not (each named on standard error);
2 the check could not run (e.g. the database is unreachable).
"""

from __future__ import annotations

import hashlib
import sys

from django.core.management.base import BaseCommand
from django.db import DatabaseError

from registry.models import Document
from registry.models.documents import DOCUMENT_ISSUED_STATES

EXIT_INTACT, EXIT_BROKEN, EXIT_FAILED = 0, 1, 2


def document_problems(doc: Document, *, files: bool) -> list[str]:
    """What is wrong with one issued document (empty list: intact)."""
    problems = []
    content = bytes(doc.content)
    if hashlib.sha256(content).hexdigest() != doc.sha256:
        problems.append("the PDF kept in the database does not match the checksum recorded at signing")
    if len(content) != doc.size_bytes:
        problems.append(f"the PDF kept in the database is {len(content):,} bytes, {doc.size_bytes:,} were recorded")
    if files:
        if not doc.pdf.name:
            problems.append("no copy in file storage was recorded")
        else:
            try:
                with doc.pdf.storage.open(doc.pdf.name, "rb") as fh:
                    digest = hashlib.file_digest(fh, "sha256").hexdigest()
            except (OSError, ValueError) as exc:
                problems.append(f"the copy in file storage cannot be read ({exc.__class__.__name__})")
            else:
                if digest != doc.sha256:
                    problems.append("the copy in file storage does not match the checksum recorded at signing")
    return problems


class Command(BaseCommand):
    help = (
        "Check the checksums of every signed and superseded document (exit 0 intact, 1 not intact, 2 failed); "
        "--files also reads the copies in file storage."
    )

    def add_arguments(self, parser):
        parser.add_argument("--files", action="store_true", help="also check the copies in file storage")
        parser.add_argument("--database", default="default", help="database alias (default: default)")

    def handle(self, *args, **opts):
        broken = 0
        total = 0
        try:
            qs = Document.objects.using(opts["database"]).filter(state__in=DOCUMENT_ISSUED_STATES).order_by("id")
            for doc in qs.iterator(chunk_size=50):
                total += 1
                for problem in document_problems(doc, files=opts["files"]):
                    broken += 1
                    self.stderr.write(f"Document {doc.code} (revision {doc.revision}, {doc.state}): {problem}.")
        except DatabaseError as exc:
            self.stderr.write(f"The documents could not be read: {exc}")
            sys.exit(EXIT_FAILED)
        where = "the database and file storage" if opts["files"] else "the database"
        if broken:
            self.stderr.write(f"{broken} problem(s) among {total:,} issued documents ({where}).")
            sys.exit(EXIT_BROKEN)
        self.stdout.write(f"All {total:,} issued documents match their recorded checksums ({where}).")
