"""Position pages: propose a position (technician, manager); publish, reject or withdraw one (manager).

Before publishing, the confirmation page shows the movement check of the proposed position against
the mark's published one (:mod:`registry.services.movement`, computed afresh), and the form names that
published position (``compared_with``), so that a publication by someone else in between is refused
rather than silently superseded. Writes go through :mod:`registry.services.positions`.
"""

from __future__ import annotations

from django.contrib import messages
from django.core.exceptions import ValidationError
from django.http import Http404, HttpRequest, HttpResponse
from django.shortcuts import redirect, render
from django.urls import reverse

from registry.errors import Conflict
from registry.models import PositionState
from registry.roles import Ability
from registry.selectors.positions import frames_in_use
from registry.services.access import access_mark_by_code, access_position_by_id
from registry.services.movement import comparison_target, movement_compare
from registry.services.positions import position_propose, position_publish, position_reject, position_withdraw
from registry.web.fieldwork_forms import DecisionForm, PositionForm
from registry.web.service_errors import add_service_error
from registry.web.views import ability_required

#: action → (service, state it needs, title, note required)
ACTIONS = {
    "publish": (position_publish, PositionState.PROPOSED, "Publish", False),
    "reject": (position_reject, PositionState.PROPOSED, "Reject", True),
    "withdraw": (position_withdraw, PositionState.PUBLISHED, "Withdraw", True),
}
PAST = {"publish": "published", "reject": "rejected", "withdraw": "withdrawn"}


@ability_required(Ability.RECORD)
def position_new(request: HttpRequest, code: str) -> HttpResponse:
    mark = access_mark_by_code(request.user, code, ability=Ability.RECORD)
    frames = frames_in_use()
    status = 200
    if request.method == "POST":
        form = PositionForm(request.POST, frames_in_use=frames)
        if form.is_valid():
            try:
                position = position_propose(actor=request.user, mark_code=mark.code, data=form.position_data())
            except ValidationError as exc:
                form.add_service_error(exc)
            except Conflict as exc:
                form.add_service_error(exc)
            else:
                messages.success(request, f"Position {position.pk} proposed for {mark.code}; a manager decides on it.")
                return redirect(reverse("web:mark-detail", kwargs={"code": mark.code}) + f"#position-{position.pk}")
        status = 400
    else:
        form = PositionForm(frames_in_use=frames)
    return render(request, "registry/position_form.html", {"form": form, "mark": mark, **form.groups()}, status=status)


@ability_required(Ability.MANAGE)
def position_decide(request: HttpRequest, code: str, position_id: int, action: str) -> HttpResponse:
    if action not in ACTIONS:
        raise Http404("Unknown action.")
    service, needed_state, title, note_required = ACTIONS[action]
    position = access_position_by_id(request.user, position_id, ability=Ability.MANAGE)
    if position.mark.code != code:
        raise Http404("No such position for this mark.")
    mark = position.mark
    status = 200
    refusal = ""
    if request.method == "POST":
        form = DecisionForm(request.POST)
        if form.is_valid():
            extra = {"compared_with": form.compared_with_id()} if action == "publish" else {}
            try:
                service(actor=request.user, position_id=position.pk, note=form.cleaned_data["note"], **extra)
            except ValidationError as exc:
                add_service_error(form, exc, plain_to="note")
                status = 400
            except Conflict as exc:
                refusal = exc.message
                status = 409
                position.refresh_from_db()
            else:
                messages.success(request, f"Position {position.pk} of {mark.code} {PAST[action]}.")
                back = request.POST.get("next", "")
                if back == reverse("web:proposals"):  # the queue's forms come back to the queue
                    return redirect(back)
                return redirect(reverse("web:mark-detail", kwargs={"code": mark.code}) + f"#position-{position.pk}")
        else:
            status = 400
    check = (
        movement_compare(position=position, published=comparison_target(position))
        if action == "publish" and position.state == PositionState.PROPOSED
        else None
    )
    if request.method != "POST" or status == 409:  # a refusal shows the new comparison: decide on it again
        initial = {"compared_with": DecisionForm.compared_with_value(check.compared_with if check else None)}
        if request.method == "POST":
            initial["note"] = request.POST.get("note", "")
        form = DecisionForm(initial=initial)
    context = {
        "form": form,
        "mark": mark,
        "position": position,
        "action": action,
        "title": title,
        "past": PAST[action],
        "note_required": note_required,
        "state_ok": position.state == needed_state,
        "needed_state": needed_state,
        "check": check,
        "refusal": refusal,
    }
    return render(request, "registry/position_decide.html", context, status=status)
