"""``python manage.py sign_document DOC --as USER --password-stdin [-o FILE]``.

Signs checked document DOC as USER (a signatory), whose account password is read from standard input
(one line; for scripts: ``printf '%s\\n' "$PW" | manage.py sign_document ...``). ``-o`` writes the
signed PDF. The signature is PAdES with USER's certificate; see ``registry/services/documents/signoff.py``.
"""

from __future__ import annotations

import sys

from django.core.exceptions import ValidationError
from django.core.management.base import BaseCommand, CommandError

from registry.errors import RegistryError
from registry.management.commands._documents import document_words, refusal, write_pdf
from registry.management.commands.set_roles import actor_by_username
from registry.services.documents import document_sign


class Command(BaseCommand):
    help = "Sign a checked document (signatory; password on standard input)."

    def add_arguments(self, parser):
        parser.add_argument("code", help="the document's code, e.g. S-7K4Q-MX2C")
        parser.add_argument("--as", dest="actor", required=True, help="the signatory")
        parser.add_argument(
            "--password-stdin", action="store_true", required=True, help="read the signatory's password from stdin"
        )
        parser.add_argument("-o", "--output", help="write the signed PDF to this file")

    def handle(self, *args, **opts):
        actor = actor_by_username(opts["actor"])
        stdin = getattr(self, "stdin", None) or sys.stdin
        password = stdin.readline().rstrip("\r\n")
        if not password:
            raise CommandError("No password on standard input. Nothing was signed.")
        try:
            doc = document_sign(actor=actor, code=opts["code"], password=password)
        except (ValidationError, RegistryError) as exc:
            raise CommandError(refusal(exc).args[0].replace("Nothing was changed.", "Nothing was signed.")) from None
        path = write_pdf(opts["output"], bytes(doc.content))
        self.stdout.write(document_words(doc, path))
