"""The import page (managers: an import publishes positions): upload a CSV or GeoJSON file; all or nothing.

The page calls the same service as ``manage.py import_marks`` (:func:`registry.services.imports.mark_import`),
through :mod:`registry.services.import_runs`: a small file is imported in the request, a large one by
the task worker while the run's page follows it. On any bad row nothing is changed and the page shows
the first 200 problems (CSV line or GeoJSON feature index, column, reason) with their count; the full
list downloads as CSV. On success it shows what was created, updated and left unchanged.
"""

from __future__ import annotations

import contextlib
import hashlib
import secrets
import time
from pathlib import Path

from django import forms
from django.conf import settings
from django.core import signing
from django.core.exceptions import ValidationError
from django.http import Http404, HttpRequest, HttpResponse
from django.shortcuts import redirect, render

from registry.errors import NotFound
from registry.io.common import CSV_COLUMNS
from registry.models import ImportState
from registry.roles import Ability
from registry.services.import_runs import access_import_run, import_run_errors_csv, import_run_start
from registry.web.uploads import IMPORT_MAX_BYTES, within_size
from registry.web.views import ability_required


class ImportForm(forms.Form):
    file = forms.FileField(label="File (.csv or .geojson, UTF-8)")
    format = forms.ChoiceField(
        label="Format",
        choices=[("", "from the file name"), ("csv", "CSV"), ("geojson", "GeoJSON")],
        required=False,
    )
    update = forms.BooleanField(
        label="Apply rows whose code already exists (otherwise such rows are refused)", required=False
    )
    overwrite = forms.BooleanField(
        label=(
            "Also apply rows of existing marks that carry no version, whatever was changed since "
            "(the audit trail records it; needs the option above)"
        ),
        required=False,
    )
    dry_run = forms.BooleanField(label="Check only: report what would happen, change nothing", required=False)

    def clean_file(self):
        return within_size(self.cleaned_data["file"], IMPORT_MAX_BYTES)

    def clean(self):
        data = super().clean()
        if data.get("overwrite") and not data.get("update"):
            self.add_error(
                "overwrite",
                ValidationError(
                    "This applies to existing marks: tick the option above too.", code="overwrite_needs_update"
                ),
            )
        return data


#: How long a checked file is kept for its import (seconds).
CHECKED_MAX_AGE_S = 6 * 3600
_CHECKED_SALT = "registry.import.checked"


def _checked_dir() -> Path:
    return Path(settings.DATA_DIR) / "import-checks"


def _keep_checked(*, user, content: bytes, filename: str, fmt: str, update: bool, overwrite: bool) -> str:
    """Store a file that passed the check; return the signed reference the page carries to import it."""
    folder = _checked_dir()
    folder.mkdir(parents=True, exist_ok=True)
    now = time.time()
    for old in folder.glob("*.upload"):  # forget files checked long ago
        with contextlib.suppress(OSError):
            if now - old.stat().st_mtime > CHECKED_MAX_AGE_S:
                old.unlink()
    token = secrets.token_urlsafe(18)
    (folder / f"{token}.upload").write_bytes(content)
    return signing.dumps(
        {
            "t": token,
            "u": user.pk,
            "sha": hashlib.sha256(content).hexdigest(),
            "name": filename,
            "fmt": fmt,
            "update": update,
            "overwrite": overwrite,
        },
        salt=_CHECKED_SALT,
    )


def _read_checked(user, reference: str) -> tuple[dict, bytes]:
    """The stored file of a reference made by :func:`_keep_checked` for this user; ``ValidationError`` else."""
    try:
        ref = signing.loads(reference, salt=_CHECKED_SALT, max_age=CHECKED_MAX_AGE_S)
    except signing.SignatureExpired:
        raise ValidationError("The check is too old; choose the file again.", code="check_expired") from None
    except signing.BadSignature:
        raise ValidationError("This checked file is not known; choose the file again.", code="check_unknown") from None
    path = _checked_dir() / f"{ref.get('t', '')}.upload"
    if ref.get("u") != user.pk or not path.is_file():
        raise ValidationError("This checked file is not known; choose the file again.", code="check_unknown")
    content = path.read_bytes()
    if hashlib.sha256(content).hexdigest() != ref.get("sha"):
        raise ValidationError("The checked file changed on the server; choose it again.", code="check_changed")
    return ref, content


@ability_required(Ability.MANAGE)
def import_page(request: HttpRequest) -> HttpResponse:
    context = {"columns": CSV_COLUMNS, "run": None, "checked": None, "check_error": None}
    status = 200
    form = ImportForm()
    run = None
    if request.method == "POST" and request.POST.get("checked"):
        # The second step: import the file that passed the check, without choosing it again.
        try:
            ref, content = _read_checked(request.user, request.POST["checked"])
        except ValidationError as exc:
            context["check_error"] = exc.messages[0]
            status = 400
        else:
            try:
                run = import_run_start(
                    actor=request.user,
                    content=content,
                    filename=ref["name"],
                    fmt=ref["fmt"] or None,
                    update=ref["update"],
                    overwrite=ref["overwrite"],
                    dry_run=False,
                )
            except ValidationError as exc:
                context["check_error"] = exc.messages[0]
                status = 400
            (_checked_dir() / f"{ref['t']}.upload").unlink(missing_ok=True)
    elif request.method == "POST":
        form = ImportForm(request.POST, request.FILES)
        if form.is_valid():
            upload = form.cleaned_data["file"]
            content = upload.read()
            options = {
                "fmt": form.cleaned_data["format"] or "",
                "update": form.cleaned_data["update"],
                "overwrite": form.cleaned_data["overwrite"],
            }
            try:
                run = import_run_start(
                    actor=request.user,
                    content=content,
                    filename=upload.name,
                    fmt=options["fmt"] or None,
                    update=options["update"],
                    overwrite=options["overwrite"],
                    dry_run=form.cleaned_data["dry_run"],
                )
            except ValidationError as exc:
                form.add_error("format", exc)
                status = 400
            else:
                if run.finished and run.state == ImportState.DONE and form.cleaned_data["dry_run"]:
                    context["checked"] = {
                        "reference": _keep_checked(user=request.user, content=content, filename=upload.name, **options),
                        "update": options["update"],
                        "overwrite": options["overwrite"],
                    }
        else:
            status = 400
    if run is not None:
        if not run.finished:  # queued for the worker: follow it on its own page
            return redirect("web:import-run", run_id=run.pk)
        context["run"] = run
        status = 400 if run.state != ImportState.DONE else 200
    context["form"] = form
    return render(request, "registry/import.html", context, status=status)


@ability_required(Ability.MANAGE)
def import_run_page(request: HttpRequest, run_id: int) -> HttpResponse:
    """One import: its progress while it runs (the page reloads itself), then its outcome."""
    try:
        run = access_import_run(request.user, run_id)
    except NotFound:
        raise Http404("No such import.") from None
    context = {"columns": CSV_COLUMNS, "run": run, "form": ImportForm(), "follow": not run.finished}
    return render(request, "registry/import.html", context)


@ability_required(Ability.MANAGE)
def import_run_errors(request: HttpRequest, run_id: int) -> HttpResponse:
    """Every problem of a refused import, as CSV."""
    try:
        run = access_import_run(request.user, run_id)
    except NotFound:
        raise Http404("No such import.") from None
    if run.state != ImportState.REFUSED:
        raise Http404("This import has no list of problems.")
    response = HttpResponse(import_run_errors_csv(run), content_type="text/csv; charset=utf-8")
    stem = (run.filename.rsplit(".", 1)[0] or "import")[:80]
    safe = "".join(c if c.isalnum() or c in "-_." else "_" for c in stem)
    response["Content-Disposition"] = f'attachment; filename="{safe}-problems.csv"'
    return response
