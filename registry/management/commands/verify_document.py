"""``python manage.py verify_document FILE.pdf [--json]``: is this PDF an authentic, current document?

Offline (no network): the signature is validated with pyHanko against the authorities the registry
trusts, and the file is looked up among the documents the registry issued. Exit status: 0 authentic
and current; 1 not authentic (altered, unknown signer, broken chain, not issued here); 3 authentic but
superseded, out of date, or signed with a certificate revoked since. ``--json`` prints ``authentic``,
``intact``, ``document_code``, ``revision``, ``signed_by``, ``signed_at``, ``current``, ``superseded_by``,
``reasons`` (each a ``code`` and a ``message``).
"""

from __future__ import annotations

import json
import sys

from django.core.management.base import BaseCommand, CommandError

from registry.services.verification import signer_words, verify_pdf

MAX_BYTES = 200 * 1024 * 1024


class Command(BaseCommand):
    help = "Verify a document's signature and standing (exit 0 current, 1 not authentic, 3 not current)."

    def add_arguments(self, parser):
        parser.add_argument("file", help="the PDF to verify")
        parser.add_argument("--json", action="store_true", help="print the result as JSON")

    def handle(self, *args, **opts):
        try:
            with open(opts["file"], "rb") as fh:
                data = fh.read(MAX_BYTES + 1)
        except OSError as exc:
            raise CommandError(f"Cannot read {opts['file']}: {exc.strerror}.") from None
        if len(data) > MAX_BYTES:
            raise CommandError("The file is larger than 200 MB; it is not a document of this registry.")
        result = verify_pdf(data)
        if opts["json"]:
            self.stdout.write(json.dumps(result.as_json(), indent=2))
        else:
            self.stdout.write(self._words(result))
        sys.exit(result.exit_code)

    def _words(self, result) -> str:
        lines = [f"{result.verdict[0].upper()}{result.verdict[1:]}."]
        d = result.document
        if result.authentic and d is not None:
            subject = f"mark {d.mark.code}" if d.mark_id else f"job {d.job.code}"
            lines.append(f"Document {d.code}, revision {d.revision}: {d.get_kind_display()} of {subject}.")
            lines.append(f"Signed by {signer_words(d)} on {d.signed_at:%Y-%m-%d %H:%M} UTC.")
        elif result.claimed_code:
            lines.append(f"The file names itself document {result.claimed_code}.")
        lines += [f"- {m}" for m in result.messages()]
        return "\n".join(lines)
