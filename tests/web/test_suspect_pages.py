"""Suspect marks through HTTP, per role: the API, the mark page and its clearance form, the list filter,
and the clear_suspect command. Marks and people are invented."""

from __future__ import annotations

import datetime as dt

import pytest
from django.core.management import CommandError, call_command
from django.urls import reverse
from django.utils import timezone

from registry.models import AuditEvent, Mark
from tests.api._shape import assert_error_shape
from tests.services._data import make_mark, make_published

pytestmark = pytest.mark.django_db

TODAY = timezone.now().date().isoformat()
ROLES = ["viewer", "technician", "manager", "signatory", "admin_user_role"]


@pytest.fixture
def suspect_mark(manager, technician, api_client_for):
    """QR-101 made suspect by a visit recorded through the API (version 2), beside an active QR-102."""
    make_mark(manager, code="QR-101", name="Quarry Ridge")
    make_mark(manager, code="QR-102", name="Quarry Ridge South")
    make_published(manager, technician, code="QR-101")
    response = api_client_for(technician).post(
        "/api/marks/QR-101/visits/",
        {"visited_on": TODAY, "finding": "disturbed", "notes": "Post leaning; do not use until re-observed."},
        format="json",
    )
    assert response.status_code == 201, response.content
    assert response.json()["finding"] == "disturbed"
    return Mark.objects.get(code="QR-101")


def test_the_api_shows_why_and_since_when(suspect_mark, viewer, api_client_for):
    body = api_client_for(viewer).get("/api/marks/QR-101/").json()
    assert body["status"] == "suspect" and body["suspect_since"] == TODAY
    assert body["suspect_reason"] == f"the visit of {TODAY} found it disturbed" and body["version"] == 2
    listed = api_client_for(viewer).get("/api/marks/?status=suspect").json()
    assert [m["code"] for m in listed["results"]] == ["QR-101"]


@pytest.mark.parametrize("role", ROLES)
def test_clearance_through_the_api_per_role(request, suspect_mark, api_client_for, role):
    client = api_client_for(request.getfixturevalue(role))
    response = client.post("/api/marks/QR-101/clear-suspect/", {"version": 2, "note": "Re-checked"}, format="json")
    if role == "manager":
        assert response.status_code == 200 and response.json()["status"] == "active"
        assert AuditEvent.objects.get(action="mark_clear_suspect").note == "Re-checked"
    else:
        assert_error_shape(response, 403, "permission_denied")
        assert Mark.objects.get(code="QR-101").status == "suspect"


def test_api_clearance_refusals_change_nothing(suspect_mark, manager, api_client_for):
    client = api_client_for(manager)
    error = assert_error_shape(
        client.post("/api/marks/QR-101/clear-suspect/", {"version": 2}, format="json"), 400, "invalid"
    )
    assert error["details"]["note"][0]["code"] == "note_required"
    error = assert_error_shape(
        client.post("/api/marks/QR-101/clear-suspect/", {"version": 1, "note": "x"}, format="json"),
        409,
        "stale_version",
    )
    assert error["details"]["version"] == {"yours": 1, "theirs": 2, "changed_by": None, "changed_at": None}
    assert_error_shape(
        client.post("/api/marks/QR-102/clear-suspect/", {"version": 1, "note": "x"}, format="json"), 409, "not_suspect"
    )
    error = assert_error_shape(
        client.post("/api/marks/QR-101/status/", {"version": 2, "status": "active", "note": "ok"}, format="json"),
        400,
        "invalid",
    )
    assert error["details"]["status"][0]["code"] == "suspect_needs_clearance"
    assert Mark.objects.get(code="QR-101").status == "suspect"


def test_the_visit_api_still_takes_the_earlier_names(suspect_mark, technician, api_client_for):
    response = api_client_for(technician).post(
        "/api/marks/QR-102/visits/", {"visited_on": TODAY, "condition": "not_found"}, format="json"
    )
    assert response.status_code == 201 and response.json()["finding"] == "searched_not_found"
    assert Mark.objects.get(code="QR-102").status == "suspect"


def test_the_mark_page_says_it_and_offers_the_clearance_to_managers_only(suspect_mark, signed_in, manager, viewer):
    url = reverse("web:mark-detail", kwargs={"code": "QR-101"})
    page = signed_in(viewer).get(url).content.decode()
    assert "Suspect — not for use until re-observed" in page and f"the visit of {TODAY} found it disturbed" in page
    assert "Clear suspicion" not in page
    page = signed_in(manager).get(url).content.decode()
    assert "Clear suspicion" in page and reverse("web:mark-clear-suspect", kwargs={"code": "QR-101"}) in page


@pytest.mark.parametrize("role", ROLES)
def test_clearance_through_the_page_per_role(request, suspect_mark, signed_in, role):
    url = reverse("web:mark-clear-suspect", kwargs={"code": "QR-101"})
    response = signed_in(request.getfixturevalue(role)).post(url, {"version": "2", "note": "Check shot 3 mm"})
    if role == "manager":
        assert response.status_code == 302 and response["Location"].endswith("/marks/QR-101/")
        assert Mark.objects.get(code="QR-101").status == "active"
    else:
        assert response.status_code == 403
        assert Mark.objects.get(code="QR-101").status == "suspect"


def test_page_clearance_without_a_note_or_from_a_stale_page(suspect_mark, signed_in, manager):
    client = signed_in(manager)
    url = reverse("web:mark-clear-suspect", kwargs={"code": "QR-101"})
    response = client.post(url, {"version": "2", "note": ""})
    assert response.status_code == 400 and "Give the reason for clearing the suspicion" in response.content.decode()
    response = client.post(url, {"version": "1", "note": "Checked"})
    assert response.status_code == 409 and "changed by someone else" in response.content.decode()
    assert Mark.objects.get(code="QR-101").status == "suspect"
    assert client.get(url).status_code == 200


def test_the_list_filter_and_counts_know_the_status(suspect_mark, signed_in, viewer):
    page = signed_in(viewer).get(reverse("web:mark-list"), {"status": "suspect"}).content.decode()
    assert "QR-101" in page and "QR-102" not in page
    assert '<option value="suspect" selected>suspect — awaiting re-observation</option>' in page
    assert 'class="state state-suspect"' in page


def test_the_status_form_does_not_offer_suspect(suspect_mark, signed_in, manager):
    page = signed_in(manager).get(reverse("web:mark-status", kwargs={"code": "QR-102"})).content.decode()
    assert 'value="suspect"' not in page and 'value="retired"' in page


def test_the_command_clears_with_a_note(suspect_mark, manager, technician, capsys):
    with pytest.raises(CommandError, match="Your role does not allow"):
        call_command("clear_suspect", "QR-101", "--as", "theo", "--note", "fine")
    with pytest.raises(CommandError, match="changed by someone else"):
        call_command("clear_suspect", "QR-101", "--as", "mona", "--note", "fine", "--expected-version", "1")
    call_command("clear_suspect", "QR-101", "--as", "mona", "--note", "Re-checked 2 mm")
    assert "QR-101 is no longer suspect; it is active" in capsys.readouterr().out
    assert Mark.objects.get(code="QR-101").status == "active"
    with pytest.raises(CommandError, match="not suspect"):
        call_command("clear_suspect", "QR-101", "--as", "mona", "--note", "again")
    assert AuditEvent.objects.filter(action="mark_clear_suspect").count() == 1


def test_an_older_visit_entered_late_does_not_make_it_suspect(manager, technician, api_client_for):
    make_mark(manager, code="QR-103")
    make_published(manager, technician, code="QR-103")
    last_year = (timezone.now().date() - dt.timedelta(days=365)).isoformat()
    response = api_client_for(technician).post(
        "/api/marks/QR-103/visits/", {"visited_on": last_year, "finding": "disturbed"}, format="json"
    )
    assert response.status_code == 201 and Mark.objects.get(code="QR-103").status == "active"
