"""Mark pages: the list with search, the mark page, and create/edit for managers.

Views parse input and render; reads come from :mod:`registry.selectors.marks`, writes
go through :mod:`registry.services.marks` (role check, validation, transaction, audit).
"""

from __future__ import annotations

import functools
import re

from django.contrib import messages
from django.core.exceptions import ValidationError
from django.http import Http404, HttpRequest, HttpResponse
from django.shortcuts import redirect, render
from django.urls import reverse
from django.utils.functional import SimpleLazyObject

from registry.errors import Conflict
from registry.formatting import format_frame
from registry.roles import Ability, has_ability
from registry.selectors.documents import mark_sheets
from registry.selectors.mark_page import mark_detail, position_of_mark, visit_of_mark
from registry.selectors.marks import MATCH_PREFIX, attach_usability, mark_list_counts, mark_search
from registry.selectors.paging import MAX_NUMBERED_PAGE, KeysetPage, keyset_page
from registry.selectors.read_cache import audit_token, cached_read
from registry.selectors.timeseries import mark_timeseries
from registry.services.access import access_mark_by_code
from registry.services.documents import can_prepare
from registry.services.marks import mark_create, mark_update
from registry.web.forms import MARK_FORM_FIELDS, MarkForm, MarkSearchForm, pack_loaded
from registry.web.mark_map import build_map, points_from_marks
from registry.web.views import ability_required

PAGE_SIZE = 50


_LISTING_NAMES = (
    "page",
    "markmap",
    "counts",
    "too_deep",
    "num_pages",
    "status_counts",
    "matching_any_status",
    "registry_total",
)


_URL_SAFE_CODE = re.compile(r"[A-Z0-9][A-Z0-9_.-]*")  # CODE_VALIDATOR's characters: none is quoted in a URL
_CODE_SLOT = "CODE-SLOT"


def _mark_url_maker():
    """``code → the mark page's address``, reversed once for a whole list instead of once per row."""
    head, tail = reverse("web:mark-detail", args=[_CODE_SLOT]).split(_CODE_SLOT)

    def url_of(code: str) -> str:
        if _URL_SAFE_CODE.fullmatch(code):
            return f"{head}{code}{tail}"
        return reverse("web:mark-detail", args=[code])  # a code from before the rule: quoted as Django does

    return url_of


def _page_number(raw: str | None) -> int:
    try:
        return max(1, int(raw or 1))
    except (TypeError, ValueError):
        return 1


@ability_required(Ability.VIEW)
def mark_list(request: HttpRequest) -> HttpResponse:
    """The mark list: numbered pages up to MAX_NUMBERED_PAGE, then keyset links (after/before a code)."""
    form = MarkSearchForm(request.GET or None)
    if request.GET:
        filters = form.filters()
    else:
        filters = {"q": "", "match": MATCH_PREFIX, "text": "", "status": ""}
    after = (request.GET.get("after") or "").strip()[:64] or None
    before = (request.GET.get("before") or "").strip()[:64] or None
    last = request.GET.get("last") == "1"
    number = _page_number(request.GET.get("page"))
    token = audit_token()

    @functools.cache
    def listing() -> dict:
        """The rows and counts; read only if the template's cached fragment is missing."""
        counts = cached_read(
            "mark-list-counts", tuple(sorted(filters.items())), lambda: mark_list_counts(**filters), token=token
        )
        num_pages = max(1, -(-counts.matching.n // PAGE_SIZE)) if counts.matching.exact else None
        page_number = min(number, num_pages) if num_pages is not None else number  # past the end: the last page
        too_deep = after is None and before is None and not last and page_number > MAX_NUMBERED_PAGE
        if too_deep:
            page = KeysetPage([], PAGE_SIZE, has_next=False, has_previous=True, number=page_number)
        else:
            page = cached_read(
                "mark-list-page",
                (tuple(sorted(filters.items())), after, before, last, page_number),
                lambda: keyset_page(
                    mark_search(**filters),
                    key="code",
                    size=PAGE_SIZE,
                    after=after,
                    before=before,
                    last=last,
                    number=None if after else page_number,
                ),
                token=token,
            )
        page.object_list = attach_usability(page.object_list)
        url_of = _mark_url_maker()
        for m in page.object_list:
            m.page_url = url_of(m.code)
        markmap = build_map(points_from_marks(page.object_list, url_of))
        return {
            "page": page,
            "markmap": markmap,
            "counts": counts,
            "too_deep": too_deep,
            "num_pages": num_pages,
            "status_counts": counts.status_counts,
            "matching_any_status": counts.matching_any_status.n,
            "registry_total": counts.registry_total.n,
        }

    context = {
        "form": form,
        "filters": filters,
        # The list's fragment is cached under the audit token and the full address (the template's
        # {% cache %}); these are computed only when it is rendered.
        **{name: SimpleLazyObject(lambda name=name: listing()[name]) for name in _LISTING_NAMES},
        "read_token": token,
        "max_numbered_page": MAX_NUMBERED_PAGE,
        "filtered": any(filters[k] for k in ("q", "text", "status")),
        "can_manage": has_ability(request.user, Ability.MANAGE),
    }
    return render(request, "registry/mark_list.html", context)


@ability_required(Ability.VIEW)
def mark_page(request: HttpRequest, code: str) -> HttpResponse:
    # The mark through the gatekeeper (services.access), its page data cached on the newest audit row; the
    # decorator above checks the ability on every request, cached or not.
    token = audit_token()
    detail = cached_read(
        "mark-detail", (code,), lambda: mark_detail(mark=access_mark_by_code(request.user, code)), token=token
    )
    mark = detail.mark
    context = {
        "detail": detail,
        "mark": mark,
        "read_token": token,
        "can_manage": has_ability(request.user, Ability.MANAGE),
        "can_record": has_ability(request.user, Ability.RECORD),
        # documents area: the mark's current and open sheets (cached on the newest audit row, like the page),
        # and whether the user may prepare one
        "sheets": cached_read("mark-sheets", (code,), lambda: mark_sheets(mark), token=token),
        "can_prepare": can_prepare(request.user),
        # position history plot (registry/selectors/timeseries.py): drawn only when the page's cached
        # body (the template's {% cache %}, under the same token) is missing
        "timeseries": SimpleLazyObject(lambda: mark_timeseries(mark=mark, frame_label=format_frame)),
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
    mark = access_mark_by_code(request.user, code, ability=Ability.MANAGE)
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
                current = access_mark_by_code(request.user, mark.code, ability=Ability.MANAGE)
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
    mark = access_mark_by_code(request.user, code)
    if what in _MARK_TEXTS and pk is None:
        field, title = _MARK_TEXTS[what]
        text = getattr(mark, field, "")
    elif what == "visit" and pk is not None:
        visit = visit_of_mark(mark=mark, pk=pk)
        if visit is None:
            raise Http404("No such visit.")
        text, title = visit.notes, f"Notes of the visit on {visit.visited_on:%Y-%m-%d}"
    elif what == "position" and pk is not None:
        position = position_of_mark(mark=mark, pk=pk)
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
