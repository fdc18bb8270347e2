"""The managers' queue (/proposals/ and /api/proposals/): oldest first, check verdicts, decide on the page."""

from __future__ import annotations

import pytest
from django.urls import reverse

from registry.models import AuditEvent, Position

ROLES = ["viewer", "technician", "manager", "signatory", "admin_user_role"]


@pytest.mark.django_db
@pytest.mark.parametrize("role", ROLES)
def test_queue_only_for_managers(request, kestrel, signed_in, role):
    response = signed_in(request.getfixturevalue(role)).get(reverse("web:proposals"))
    assert response.status_code == (200 if role == "manager" else 403)


@pytest.mark.django_db
def test_queue_lists_the_proposal_with_its_check_and_visits(kestrel, signed_in, manager):
    page = signed_in(manager).get(reverse("web:proposals")).content.decode()
    proposed = kestrel["proposed"]
    assert f'id="proposal-{proposed.pk}"' in page and "no movement shown" in page
    assert "2024-04-18 intact" in page  # the scenario's visit
    assert page.index("KV-001") < page.index("Suspect marks without a proposal")


@pytest.mark.django_db
def test_reject_from_the_queue_needs_a_reason_and_comes_back(kestrel, signed_in, manager):
    proposed = kestrel["proposed"]
    client = signed_in(manager)
    url = reverse("web:position-decide", kwargs={"code": "KV-001", "position_id": proposed.pk, "action": "reject"})
    assert client.post(url, {"note": "", "next": reverse("web:proposals")}).status_code == 400
    response = client.post(url, {"note": "Duplicate session (invented).", "next": reverse("web:proposals")})
    assert response.status_code == 302 and response["Location"] == reverse("web:proposals")
    assert Position.objects.get(pk=proposed.pk).state == "rejected"
    assert AuditEvent.objects.filter(action="position_reject", note="Duplicate session (invented).").exists()


@pytest.mark.django_db
def test_publish_from_the_queue(kestrel, signed_in, manager):
    proposed = kestrel["proposed"]
    client = signed_in(manager)
    page = client.get(reverse("web:proposals")).content.decode()
    compared = Position.objects.get(mark__code="KV-001", state="published").pk
    assert f'name="compared_with" value="{compared}"' in page
    url = reverse("web:position-decide", kwargs={"code": "KV-001", "position_id": proposed.pk, "action": "publish"})
    response = client.post(url, {"note": "", "compared_with": str(compared), "next": reverse("web:proposals")})
    assert response.status_code == 302 and response["Location"] == reverse("web:proposals")
    assert Position.objects.get(pk=proposed.pk).state == "published"
    assert f'id="proposal-{proposed.pk}"' not in client.get(reverse("web:proposals")).content.decode()


@pytest.mark.django_db
def test_queue_api(kestrel, manager, viewer, api_client_for):
    assert api_client_for(viewer).get("/api/proposals/").status_code == 403
    items = api_client_for(manager).get("/api/proposals/").json()
    mine = [i for i in items if i["position"] and i["position"]["id"] == kestrel["proposed"].pk]
    assert len(mine) == 1 and mine[0]["movement_check"]["verdict"] == "no_movement"
    assert mine[0]["recent_visits"][0] == {"visited_on": "2024-04-18", "finding": "intact"}


@pytest.mark.django_db
def test_occupation_row_shows_its_result_compared_with_the_published_position(kestrel, signed_in, viewer):
    # the scenario's occupation produced the 2020 position, which was proposed against the 2009 one
    page = signed_in(viewer).get(reverse("web:mark-detail", kwargs={"code": "KV-001"})).content.decode()
    section = page[page.index('id="h-occupations"') :]
    assert "possible movement</strong> against the published position (" in section and "T = " in section
    # the compared position is named in words and linked to its row (superseded since: said so)
    check = kestrel["occupation"].result_position.movement_checks.get(stage="proposed")
    assert check.compared_with_id == kestrel["first"].pk
    assert (
        f'href="#position-{check.compared_with_id}"' in section
        and 'since <span class="state state-superseded">superseded</span>)' in section
    )
