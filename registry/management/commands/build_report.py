"""``python manage.py build_report JOB --as USER [--residuals CSV] [--style nssda|asprs2023] [-o FILE] [--json]``.

Builds the control report of job JOB in this process (service ``document_build_report``; the page
queues the same build in the background). ``--residuals`` is a check-point residual file (format in
``registry/geodesy/statements.py``) whose NSSDA or ASPRS Edition 2 statement the report prints.
``--json`` prints ``document_code``, ``revision``, ``state``, ``sha256``, ``pages``, ``path``.
"""

from __future__ import annotations

import sys

from django.core.exceptions import ValidationError
from django.core.management.base import BaseCommand, CommandError

from registry.errors import RegistryError
from registry.management.commands._documents import document_json, document_words, refusal, write_pdf
from registry.management.commands.set_roles import actor_by_username
from registry.services.documents import document_build_report


class Command(BaseCommand):
    help = "Build the control report of a job (a new draft revision, to be checked and signed)."

    def add_arguments(self, parser):
        parser.add_argument("job", help="the job's code")
        parser.add_argument("--as", dest="actor", required=True, help="who prepares it (recorded in the audit)")
        parser.add_argument("--residuals", help="check-point residual CSV for the accuracy statement")
        parser.add_argument("--style", choices=["nssda", "asprs2023"], help="default: REGISTRY_REPORT_STATEMENT_STYLE")
        parser.add_argument("-o", "--output", help="also write the PDF to this file")
        parser.add_argument("--json", action="store_true", help="print the result as JSON")
        parser.add_argument("--page-size", choices=["A4", "Letter"], help="default: REGISTRY_PAGE_SIZE")

    def handle(self, *args, **opts):
        actor = actor_by_username(opts["actor"])
        residuals = None
        if opts["residuals"]:
            try:
                with open(opts["residuals"], encoding="utf-8-sig") as fh:
                    residuals = fh.read()
            except OSError as exc:
                raise CommandError(f"Cannot read {opts['residuals']}: {exc.strerror}.") from None
            except UnicodeDecodeError:
                raise CommandError(f"{opts['residuals']} is not UTF-8 text.") from None
        quiet = opts["json"] or not sys.stderr.isatty()

        def progress(fraction: float, step: str) -> None:
            if not quiet:
                sys.stderr.write(f"\r{fraction * 100:5.1f} %  {step[:60]:<60}")

        try:
            doc = document_build_report(
                actor=actor,
                job_code=opts["job"],
                residuals_csv=residuals,
                style=opts["style"],
                page_size=opts["page_size"],
                progress=progress,
            )
        except (ValidationError, RegistryError) as exc:
            raise refusal(exc) from None
        if not quiet:
            sys.stderr.write("\n")
        path = write_pdf(opts["output"], bytes(doc.content))
        self.stdout.write(document_json(doc, path) if opts["json"] else document_words(doc, path))
