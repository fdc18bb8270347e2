"""Fieldwork pages: record a visit (with photos), record an occupation (with files), change a mark's status,
clear a suspect mark.

Thin views: the form parses, the services (:mod:`registry.services.fieldwork`,
:mod:`registry.services.marks`) check the role, validate, write and audit. A visit or
occupation and its files are saved together: if any file is refused, the whole
submission is rolled back (database rows and stored files) and the form shows why.
"""

from __future__ import annotations

from django.contrib import messages
from django.core.exceptions import ValidationError
from django.db import transaction
from django.http import HttpRequest, HttpResponse
from django.shortcuts import redirect, render

from registry.errors import Conflict
from registry.roles import Ability
from registry.services.access import access_mark_by_code
from registry.services.fieldwork import attachment_add, occupation_record, visit_record
from registry.services.held_uploads import hold_upload, release_held_upload, take_held_upload
from registry.services.marks import mark_set_status
from registry.services.rinex import occupation_from_rinex, rinex_prefill
from registry.services.suspect import mark_clear_suspect
from registry.services.usability import mark_usability
from registry.web.fieldwork_forms import ClearSuspectForm, MarkStatusForm, OccupationForm, VisitForm
from registry.web.views import ability_required


def _record_with_files(record, files, *, kind: str, link: str, caption: str = ""):
    """Run ``record()`` and attach ``files`` to its result in one transaction; clean stored files on failure.

    ``files`` holds files, or (file, caption) pairs (a visit's photos, each with its own caption).
    """
    stored = []
    try:
        with transaction.atomic():
            obj = record()
            for f in files:
                f, caption = f if isinstance(f, tuple) else (f, caption)
                attachment = attachment_add(
                    actor=record.actor, mark_code=record.mark_code, file=f, kind=kind, caption=caption, **{link: obj.pk}
                )
                stored.append(attachment.file)
    except BaseException:
        for f in stored:
            f.storage.delete(f.name)
        raise
    return obj, len(stored)


class _Call:
    """A deferred service call that remembers its actor and mark (for the attachments)."""

    def __init__(self, fn, *, actor, mark_code: str, data: dict):
        self.fn, self.actor, self.mark_code, self.data = fn, actor, mark_code, data

    def __call__(self):
        return self.fn(actor=self.actor, mark_code=self.mark_code, data=self.data)


@ability_required(Ability.RECORD)
def visit_new(request: HttpRequest, code: str) -> HttpResponse:
    mark = access_mark_by_code(request.user, code, ability=Ability.RECORD)
    status = 200
    if request.method == "POST":
        form = VisitForm(request.POST, request.FILES)
        if form.is_valid():
            call = _Call(visit_record, actor=request.user, mark_code=mark.code, data=form.visit_data())
            try:
                visit, n = _record_with_files(call, form.photo_pairs(), kind="photo", link="visit_id")
            except ValidationError as exc:
                form.add_service_error(exc)
            else:
                messages.success(
                    request, f"Visit of {visit.visited_on:%Y-%m-%d} recorded for {mark.code} with {n} photo(s)."
                )
                return redirect("web:mark-detail", code=mark.code)
        status = 400
    else:
        form = VisitForm(user=request.user)
    return render(request, "registry/visit_form.html", {"form": form, "mark": mark}, status=status)


#: Purpose of a RINEX file held between reading its header and recording the occupation.
RINEX_PURPOSE = "occupation-rinex"


def _rinex_initial(prefill) -> dict:
    """The occupation form's initial values from a RINEX pre-fill (times as the form shows them)."""
    initial = {k: v for k, v in prefill.data.items() if v is not None}
    for key in ("start_utc", "end_utc"):
        if initial.get(key) is not None:
            initial[key] = f"{initial[key]:%Y-%m-%d %H:%M:%S}"
    return initial


class _RinexCall(_Call):
    """Record the occupation from the held RINEX file (the form's values override the header's)."""

    def __init__(self, *, actor, mark_code: str, data: dict, content: bytes, filename: str):
        super().__init__(occupation_from_rinex, actor=actor, mark_code=mark_code, data=data)
        self.content, self.filename = content, filename

    def __call__(self):
        occupation, _prefill = occupation_from_rinex(
            actor=self.actor, mark_code=self.mark_code, content=self.content, filename=self.filename, data=self.data
        )
        return occupation


def _read_rinex(request: HttpRequest, mark) -> tuple[OccupationForm, dict, int]:
    """ "Read the header" button: check the file, hold it, and show the form filled from its header."""
    upload = request.FILES.get("rinex_file")
    if upload is None:
        return OccupationForm(), {"rinex_errors": ["Choose a RINEX file to read."]}, 400
    content = upload.read()
    try:
        prefill = rinex_prefill(mark=mark, content=content, filename=upload.name)
    except ValidationError as exc:
        errors = [f"RINEX file {upload.name}: {message} Nothing was saved." for message in exc.messages]
        return OccupationForm(), {"rinex_errors": errors}, 400
    token = hold_upload(
        actor=request.user, content=content, filename=upload.name, purpose=f"{RINEX_PURPOSE}:{mark.code}"
    )
    form = OccupationForm(initial={**_rinex_initial(prefill), "held_rinex": token})
    return form, {"rinex": prefill}, 200


@ability_required(Ability.RECORD)
def occupation_new(request: HttpRequest, code: str) -> HttpResponse:
    mark = access_mark_by_code(request.user, code, ability=Ability.RECORD)
    if not mark_usability(mark, None).occupation_allowed:
        messages.error(request, f"Mark {mark.code} is recorded as destroyed; a destroyed mark takes no occupations.")
        return redirect("web:mark-detail", code=mark.code)
    status = 200
    extra: dict = {}
    if request.method == "POST" and "read_rinex" in request.POST:
        form, extra, status = _read_rinex(request, mark)
    elif request.method == "POST":
        form = OccupationForm(request.POST, request.FILES)
        if form.is_valid():
            token = form.cleaned_data.get("held_rinex") or ""
            try:
                if token:
                    content, filename = take_held_upload(
                        actor=request.user, token=token, purpose=f"{RINEX_PURPOSE}:{mark.code}"
                    )
                    call = _RinexCall(
                        actor=request.user,
                        mark_code=mark.code,
                        data=form.occupation_data(),
                        content=content,
                        filename=filename,
                    )
                else:
                    call = _Call(
                        occupation_record, actor=request.user, mark_code=mark.code, data=form.occupation_data()
                    )
                occupation, n = _record_with_files(
                    call,
                    form.cleaned_data["files"],
                    kind=form.cleaned_data.get("file_kind") or "rinex",
                    link="occupation_id",
                )
            except ValidationError as exc:
                form.add_service_error(exc)
            except Conflict as exc:
                form.add_service_error(exc)
            else:
                if token:
                    release_held_upload(token)
                    n += 1
                arp = occupation.antenna_height_arp_m
                arp_text = f"; ARP height {arp:.3f} m" if arp is not None else ""
                messages.success(request, f"Occupation recorded for {mark.code}{arp_text}, with {n} file(s).")
                return redirect("web:mark-detail", code=mark.code)
        status = 400
    else:
        form = OccupationForm()
    return render(
        request,
        "registry/occupation_form.html",
        {"form": form, "mark": mark, **form.groups(), **extra},
        status=status,
    )


@ability_required(Ability.MANAGE)
def mark_status(request: HttpRequest, code: str) -> HttpResponse:
    mark = access_mark_by_code(request.user, code, ability=Ability.MANAGE)
    status = 200
    conflict = ""
    if request.method == "POST":
        form = MarkStatusForm(request.POST)
        if form.is_valid():
            d = form.cleaned_data
            try:
                mark = mark_set_status(
                    actor=request.user,
                    code=mark.code,
                    status=d["status"],
                    expected_version=d["version"],
                    note=d["note"],
                )
            except ValidationError as exc:
                form.add_service_error(exc)
            except Conflict as exc:
                conflict = exc.message
                mark.refresh_from_db()
                data = request.POST.copy()
                data["version"] = str(mark.version)
                form = MarkStatusForm(data)
                form.is_valid()
                status = 409
            else:
                messages.success(request, f"Mark {mark.code} is now {mark.status} (version {mark.version}).")
                return redirect("web:mark-detail", code=mark.code)
        if status == 200:
            status = 400
    else:
        form = MarkStatusForm(initial={"version": mark.version, "status": mark.status})
    return render(
        request, "registry/mark_status_form.html", {"form": form, "mark": mark, "conflict": conflict}, status=status
    )


@ability_required(Ability.MANAGE)
def mark_clear_suspect_page(request: HttpRequest, code: str) -> HttpResponse:
    """A manager's clearance of a suspect mark (the form is on the mark page; errors are shown here)."""
    mark = access_mark_by_code(request.user, code, ability=Ability.MANAGE)
    status = 200
    conflict = ""
    if request.method == "POST":
        form = ClearSuspectForm(request.POST)
        if form.is_valid():
            d = form.cleaned_data
            try:
                mark = mark_clear_suspect(
                    actor=request.user, code=mark.code, note=d["note"], expected_version=d["version"]
                )
            except ValidationError as exc:
                form.add_service_error(exc)
            except Conflict as exc:
                conflict = exc.message
                mark.refresh_from_db()
                data = request.POST.copy()
                data["version"] = str(mark.version)
                form = ClearSuspectForm(data)
                form.is_valid()
                status = 409
            else:
                messages.success(
                    request, f"Mark {mark.code} is no longer suspect; it is active (version {mark.version})."
                )
                return redirect("web:mark-detail", code=mark.code)
        if status == 200:
            status = 400
    else:
        form = ClearSuspectForm(initial={"version": mark.version})
    return render(
        request,
        "registry/mark_clear_suspect_form.html",
        {"form": form, "mark": mark, "conflict": conflict},
        status=status,
    )
