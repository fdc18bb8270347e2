"""``python manage.py build_sheet CODE --as USER [-o FILE] [--json] [--page-size A4|Letter]``.

Builds the station description sheet of mark CODE as a new draft revision (service
``document_build_sheet``: the same rules as the page and the API). ``-o`` also writes the PDF to FILE.
``--json`` prints ``document_code``, ``revision``, ``state``, ``sha256``, ``pages``, ``path``.
"""

from __future__ import annotations

from django.core.exceptions import ValidationError
from django.core.management.base import BaseCommand

from registry.errors import RegistryError
from registry.management.commands._documents import document_json, document_words, refusal, write_pdf
from registry.management.commands.set_roles import actor_by_username
from registry.services.documents import document_build_sheet


class Command(BaseCommand):
    help = "Build the station description sheet of a mark (a new draft revision, to be checked and signed)."

    def add_arguments(self, parser):
        parser.add_argument("code", help="the mark's code")
        parser.add_argument("--as", dest="actor", required=True, help="who prepares it (recorded in the audit)")
        parser.add_argument("-o", "--output", help="also write the PDF to this file")
        parser.add_argument("--json", action="store_true", help="print the result as JSON")
        parser.add_argument("--page-size", choices=["A4", "Letter"], help="default: REGISTRY_PAGE_SIZE")

    def handle(self, *args, **opts):
        actor = actor_by_username(opts["actor"])
        try:
            doc = document_build_sheet(actor=actor, mark_code=opts["code"], page_size=opts["page_size"])
        except (ValidationError, RegistryError) as exc:
            raise refusal(exc) from None
        path = write_pdf(opts["output"], bytes(doc.content))
        self.stdout.write(document_json(doc, path) if opts["json"] else document_words(doc, path))
