"""Mark pages: the list with search, the mark page, and create/edit for managers.

Views parse input and render; reads come from :mod:`registry.selectors.marks`, writes
go through :mod:`registry.services.marks` (role check, validation, transaction, audit).
"""

from __future__ import annotations

from django.contrib import messages
from django.core.exceptions import ValidationError
from django.core.paginator import Paginator
from django.http import Http404, HttpRequest, HttpResponse
from django.shortcuts import redirect, render
from django.urls import reverse

from registry.errors import Conflict
from registry.models import Document, Mark
from registry.roles import Ability, has_ability
from registry.selectors.marks import MATCH_PREFIX, attach_usability, mark_detail, mark_search, mark_status_counts
from registry.selectors.timeseries import mark_timeseries
from registry.services.documents import can_prepare
from registry.services.marks import mark_create, mark_update
from registry.web.forms import MARK_FORM_FIELDS, MarkForm, MarkSearchForm, pack_loaded
from registry.web.mark_map import build_map, points_from_marks
from registry.web.templatetags.registry_format import format_frame
from registry.web.views import ability_required

PAGE_SIZE = 50


@ability_required(Ability.VIEW)
def mark_list(request: HttpRequest) -> HttpResponse:
    form = MarkSearchForm(request.GET or None)
    if request.GET:
        filters = form.filters()
    else:
        filters = {"q": "", "match": MATCH_PREFIX, "text": "", "status": ""}
    paginator = Paginator(mark_search(**filters), PAGE_SIZE)
    page = paginator.get_page(request.GET.get("page"))
    page.object_list = attach_usability(page.object_list)
    markmap = build_map(points_from_marks(page.object_list, lambda code: reverse("web:mark-detail", args=[code])))
    status_counts = mark_status_counts(q=filters["q"], match=filters["match"], text=filters["text"])
    context = {
        "form": form,
        "filters": filters,
        "page": page,
        "paginator": paginator,
        "status_counts": status_counts,
        "matching_any_status": sum(status_counts.values()),
        "registry_total": Mark.objects.count(),
        "filtered": any(filters[k] for k in ("q", "text", "status")),
        "can_manage": has_ability(request.user, Ability.MANAGE),
        "markmap": markmap,
    }
    return render(request, "registry/mark_list.html", context)


@ability_required(Ability.VIEW)
def mark_page(request: HttpRequest, code: str) -> HttpResponse:
    try:
        detail = mark_detail(code=code)
    except Mark.DoesNotExist:
        raise Http404(f"No mark with code {code!r}.") from None
    context = {
        "detail": detail,
        "mark": detail.mark,
        "can_manage": has_ability(request.user, Ability.MANAGE),
        "can_record": has_ability(request.user, Ability.RECORD),
        # documents area: the mark's current and open sheets, and whether the user may prepare one
        "sheets": Document.objects.filter(mark=detail.mark, state__in=("signed", "draft", "checked")).order_by(
            "-revision"
        )[:3],
        "can_prepare": can_prepare(request.user),
        # position history plot (registry/selectors/timeseries.py)
        "timeseries": mark_timeseries(mark=detail.mark, frame_label=format_frame),
    }
    return render(request, "registry/mark_detail.html", context)


@ability_required(Ability.MANAGE)
def mark_new(request: HttpRequest) -> HttpResponse:
    if request.method == "POST":
        form = MarkForm(request.POST)
        if form.is_valid():
            try:
                mark = mark_create(actor=request.user, data=form.mark_data())
            except ValidationError as exc:
                form.add_service_error(exc)
            else:
                messages.success(request, f"Mark {mark.code} created (version {mark.version}).")
                return redirect("web:mark-detail", code=mark.code)
    else:
        form = MarkForm()
    return render(request, "registry/mark_form.html", {"form": form, "mark": None})


def _conflict_rows(conflict: Conflict) -> list[dict]:
    rows = []
    for name, info in (conflict.details or {}).items():
        if name == "version" or not isinstance(info, dict):
            continue
        rows.append({"field": name, **info})
    order = {name: i for i, name in enumerate(MARK_FORM_FIELDS)}
    rows.sort(key=lambda r: order.get(r["field"], len(order)))
    return rows


@ability_required(Ability.MANAGE)
def mark_edit(request: HttpRequest, code: str) -> HttpResponse:
    try:
        mark = Mark.objects.get(code=code)
    except Mark.DoesNotExist:
        raise Http404(f"No mark with code {code!r}.") from None
    initial = {name: getattr(mark, name) for name in MARK_FORM_FIELDS}
    initial["version"] = mark.version
    initial["loaded"] = pack_loaded(mark)
    conflict = None
    status = 200
    if request.method == "POST":
        form = MarkForm(request.POST, editing=True, initial=initial)
        if form.is_valid():
            loaded_version = form.cleaned_data["version"]
            changes, base = form.my_changes(mark)
            if not changes:
                messages.info(request, f"Nothing to save: you changed no field of mark {mark.code}.")
                return redirect("web:mark-detail", code=mark.code)
            try:
                mark = mark_update(
                    actor=request.user, code=mark.code, expected_version=loaded_version, changes=changes, base=base
                )
            except ValidationError as exc:
                form.add_service_error(exc)
            except Conflict as exc:
                current = Mark.objects.get(pk=mark.pk)
                conflict = {
                    "message": exc.message,
                    "rows": _conflict_rows(exc),
                    "loaded_version": loaded_version,
                    "stored_version": current.version,
                }
                status = 409
                # Keep what the user changed; show the stored value of every field they did not touch
                # (so that a second save cannot undo a colleague's change), and start again from the
                # stored version: a deliberate second save is checked against it.
                data = request.POST.copy()
                for name in MARK_FORM_FIELDS:
                    if name != "code" and name not in changes:
                        data[name] = getattr(current, name)
                data["version"] = str(current.version)
                data["loaded"] = pack_loaded(current)
                form = MarkForm(data, editing=True, initial=initial)
                form.is_valid()
                mark = current
            else:
                merged = mark.version > loaded_version + 1
                note = " Others had changed other fields meanwhile; their changes are kept." if merged else ""
                messages.success(request, f"Mark {mark.code} saved (version {mark.version}).{note}")
                return redirect("web:mark-detail", code=mark.code)
    else:
        form = MarkForm(initial=initial, editing=True)
    return render(
        request,
        "registry/mark_form.html",
        {"form": form, "mark": mark, "conflict": conflict},
        status=status,
    )


#: The free texts of a mark that a page may show cut short, by the name in the address.
_MARK_TEXTS = {"access-directions": ("access_directions", "Access directions"), "notes": ("notes", "Notes")}


@ability_required(Ability.VIEW)
def mark_text(request: HttpRequest, code: str, what: str, pk: int | None = None) -> HttpResponse:
    """One free text of a mark in full: its description fields, a visit's notes, a position's note."""
    from registry.models import Position, Visit
    from registry.services.access import access_mark_by_code

    mark = access_mark_by_code(request.user, code)
    if what in _MARK_TEXTS and pk is None:
        field, title = _MARK_TEXTS[what]
        text = getattr(mark, field, "")
    elif what == "visit" and pk is not None:
        visit = Visit.objects.filter(mark=mark, pk=pk).first()
        if visit is None:
            raise Http404("No such visit.")
        text, title = visit.notes, f"Notes of the visit on {visit.visited_on:%Y-%m-%d}"
    elif what == "position" and pk is not None:
        position = Position.objects.filter(mark=mark, pk=pk).first()
        if position is None:
            raise Http404("No such position.")
        from registry.web.wording import describe_position

        text, title = position.note, f"Note of the position in {describe_position(position)}"
    else:
        raise Http404("No such text.")
    back = redirect("web:mark-detail", code=mark.code).url
    return render(
        request, "registry/full_text.html", {"title": title, "subject": mark.code, "text": text, "back": back}
    )
