"""``/proposals/``: the managers' queue of proposed positions and suspect marks (reads in ``selectors.proposals``).

Publishing and rejecting post to the position decision page (``web.position_views``) with ``next`` set
back to the queue, so the same service rules apply (note against possible movement, compared_with).
"""

from __future__ import annotations

from django.http import HttpRequest, HttpResponse
from django.shortcuts import render

from registry.roles import Ability
from registry.selectors.proposals import proposals_queue
from registry.web.views import ability_required


@ability_required(Ability.MANAGE)
def proposals_page(request: HttpRequest) -> HttpResponse:
    items = proposals_queue()
    return render(
        request,
        "registry/proposals.html",
        {
            "items": items,
            "proposed": [i for i in items if i.position],
            "suspects": [i for i in items if not i.position],
        },
    )
