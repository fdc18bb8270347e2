"""Batch occupation results from a CSV file: upload, preview every row, then record them all (or none).

The preview runs the import as a dry run (:func:`registry.services.occupation_batch.occupation_batch_import`,
the same service as ``manage.py import_occupations``) and holds the uploaded file
(:mod:`registry.services.held_uploads`) so that "Record" commits exactly the file that was previewed,
without uploading it again. A file with any bad row lists every one (line, mark, column, reason) and
changes nothing.
"""

from __future__ import annotations

from django import forms
from django.core.exceptions import ValidationError
from django.http import HttpRequest, HttpResponse
from django.shortcuts import render

from registry.io.occupations_csv import COLUMNS
from registry.roles import Ability
from registry.services.held_uploads import hold_upload, release_held_upload, take_held_upload
from registry.services.imports import ImportRejected
from registry.services.occupation_batch import occupation_batch_import
from registry.web.uploads import IMPORT_MAX_BYTES, within_size
from registry.web.views import ability_required

PURPOSE = "occupation-batch"


class BatchUploadForm(forms.Form):
    file = forms.FileField(label="CSV file (UTF-8)")

    def clean_file(self):
        return within_size(self.cleaned_data["file"], IMPORT_MAX_BYTES)


@ability_required(Ability.RECORD)
def occupation_import_page(request: HttpRequest) -> HttpResponse:
    context: dict = {"columns": COLUMNS, "preview": None, "done": None, "rejected": None, "token": ""}
    status = 200
    form = BatchUploadForm()
    if request.method == "POST" and request.POST.get("token"):
        token = request.POST["token"]
        try:
            content, filename = take_held_upload(actor=request.user, token=token, purpose=PURPOSE)
            context["done"] = occupation_batch_import(actor=request.user, content=content, filename=filename)
        except ImportRejected as exc:
            context["rejected"], status = exc, 400
        except ValidationError as exc:
            context["file_error"], status = " ".join(exc.messages), 400
        else:
            release_held_upload(token)
    elif request.method == "POST":
        form = BatchUploadForm(request.POST, request.FILES)
        if form.is_valid():
            upload = form.cleaned_data["file"]
            content = upload.read()
            try:
                context["preview"] = occupation_batch_import(
                    actor=request.user, content=content, filename=upload.name, dry_run=True
                )
            except ImportRejected as exc:
                context["rejected"], status = exc, 400
            except ValidationError as exc:
                form.add_error("file", exc)
                status = 400
            else:
                context["token"] = hold_upload(
                    actor=request.user, content=content, filename=upload.name, purpose=PURPOSE
                )
        else:
            status = 400
    context["form"] = form
    return render(request, "registry/occupation_import.html", context, status=status)
