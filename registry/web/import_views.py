"""The import page (managers: an import publishes positions): upload a CSV or GeoJSON file; all or nothing.

The page calls the same service as ``manage.py import_marks`` (:func:`registry.services.imports.mark_import`):
on any bad row it lists every one (CSV line or GeoJSON feature index, column, reason) and nothing is
changed; on success it shows what was created, updated and left unchanged.
"""

from __future__ import annotations

from django import forms
from django.core.exceptions import ValidationError
from django.http import HttpRequest, HttpResponse
from django.shortcuts import render

from registry.io.common import CSV_COLUMNS
from registry.roles import Ability
from registry.services.imports import ImportRejected, mark_import
from registry.web.views import ability_required

MAX_UPLOAD_BYTES = 20 * 1024 * 1024


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
        upload = self.cleaned_data["file"]
        if upload.size > MAX_UPLOAD_BYTES:
            raise ValidationError(
                "The file is larger than %(limit)d MB.", code="too_large", params={"limit": MAX_UPLOAD_BYTES // 2**20}
            )
        return upload

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


@ability_required(Ability.MANAGE)
def import_page(request: HttpRequest) -> HttpResponse:
    context = {"columns": CSV_COLUMNS, "summary": None, "rejected": None}
    status = 200
    if request.method == "POST":
        form = ImportForm(request.POST, request.FILES)
        if form.is_valid():
            upload = form.cleaned_data["file"]
            try:
                context["summary"] = mark_import(
                    actor=request.user,
                    content=upload.read(),
                    filename=upload.name,
                    fmt=form.cleaned_data["format"] or None,
                    update=form.cleaned_data["update"],
                    overwrite=form.cleaned_data["overwrite"],
                    dry_run=form.cleaned_data["dry_run"],
                )
            except ImportRejected as exc:
                context["rejected"] = exc
                context["filename"] = upload.name
                status = 400
            except ValidationError as exc:
                form.add_error("format", exc)
                status = 400
        else:
            status = 400
    else:
        form = ImportForm()
    context["form"] = form
    return render(request, "registry/import.html", context, status=status)
