"""``python manage.py check_document DOC --as USER [--note TEXT]``.

Records that USER (a manager or signatory who did not prepare it) checked draft document DOC.
"""

from __future__ import annotations

from django.core.exceptions import ValidationError
from django.core.management.base import BaseCommand

from registry.errors import RegistryError
from registry.management.commands._documents import refusal
from registry.management.commands.set_roles import actor_by_username
from registry.services.documents import document_check


class Command(BaseCommand):
    help = "Check a draft document (not by the person who prepared it)."

    def add_arguments(self, parser):
        parser.add_argument("code", help="the document's code, e.g. S-7K4Q-MX2C")
        parser.add_argument("--as", dest="actor", required=True, help="the checker (recorded in the audit)")
        parser.add_argument("--note", default="", help="what was checked (kept with the audit row)")

    def handle(self, *args, **opts):
        actor = actor_by_username(opts["actor"])
        try:
            doc = document_check(actor=actor, code=opts["code"], note=opts["note"])
        except (ValidationError, RegistryError) as exc:
            raise refusal(exc) from None
        self.stdout.write(f"Document {doc.code} (revision {doc.revision}) is checked; it can now be signed.")
