"""``/marks/<code>/combine/``: a manager picks consistent solutions of a mark and combines them, or fits a velocity.

The page lists the mark's usable solutions (proposed, published, superseded); the arithmetic, the rules
(one frame, one epoch for a combination, enough span for a velocity) and the audit are in
``registry.services.combination``. The result is a new proposed position, decided on the proposals queue.
A refused selection shows the service's message and changes nothing.
"""

from __future__ import annotations

from django.core.exceptions import ValidationError
from django.http import HttpRequest, HttpResponse
from django.shortcuts import redirect, render
from django.urls import reverse

from registry.models import CheckStage
from registry.roles import Ability
from registry.selectors.mark_page import position_of_mark
from registry.selectors.positions import positions_in_states
from registry.services.access import access_mark_by_code
from registry.services.combination import USABLE_STATES, positions_combine, positions_velocity
from registry.services.movement_checks import latest_check
from registry.services.occupation_batch import movement_words
from registry.web.views import ability_required

ACTIONS = {"combine": positions_combine, "velocity": positions_velocity}


def _messages(exc: ValidationError) -> list[str]:
    return list(exc.messages)


@ability_required(Ability.MANAGE)
def combine_page(request: HttpRequest, code: str) -> HttpResponse:
    mark = access_mark_by_code(request.user, code, ability=Ability.MANAGE)
    errors: list[str] = []
    chosen: set[int] = set()
    status = 200
    if request.method == "POST":
        action = request.POST.get("action", "")
        raw = request.POST.getlist("position")
        chosen = {int(i) for i in raw if i.isdigit()}
        service = ACTIONS.get(action)
        if service is None:
            errors.append("Choose whether to combine the solutions or to estimate a velocity.")
        else:
            try:
                proposal, _ = service(actor=request.user, mark_code=mark.code, position_ids=raw)
            except ValidationError as exc:
                errors += _messages(exc)
            else:
                return redirect(reverse("web:mark-combine", args=[mark.code]) + f"?made={proposal.pk}")
        status = 400
    made = None
    made_id = request.GET.get("made", "")
    if made_id.isdigit():
        made = position_of_mark(mark=mark, pk=int(made_id))
    made_check = ""
    if made is not None:
        check = latest_check(made.pk, CheckStage.PROPOSED)
        if check is not None:
            d = (
                None
                if check.statistic is None
                else tuple(v * 1000.0 for v in (check.d_east_m, check.d_north_m, check.d_up_m))
            )
            made_check = movement_words(check.verdict, d)
    solutions = positions_in_states(mark=mark, states=USABLE_STATES)
    return render(
        request,
        "registry/combine.html",
        {
            "mark": mark,
            "solutions": solutions,
            "errors": errors,
            "chosen": chosen,
            "made": made,
            "made_check": made_check,
        },
        status=status,
    )
