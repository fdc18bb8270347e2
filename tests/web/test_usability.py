"""A mark's usability wherever it appears (issue 10, items 1–3): the rule in the service, the words on
the mark page, the mark list and the API refusing field work on a destroyed mark. Marks are invented."""

from __future__ import annotations

import pytest
from django.urls import reverse

from registry.errors import Conflict
from registry.models import Occupation
from registry.services.fieldwork import occupation_record, visit_record
from registry.services.marks import mark_set_status
from registry.services.usability import assess
from tests.api._shape import assert_error_shape

pytestmark = pytest.mark.django_db

OCCUPATION = {"method": "static_gnss", "start_utc": "2024-07-01T15:00:00Z", "end_utc": "2024-07-01T21:00:00Z"}


@pytest.mark.parametrize(
    "status,finding,state,usable",
    [
        ("active", None, "usable", True),
        ("active", "intact", "usable", True),
        ("active", "damaged", "usable", True),
        ("active", "disturbed", "last_visit_disturbed", False),
        ("active", "searched_not_found", "last_visit_not_found", False),
        ("active", "destroyed", "last_visit_destroyed", False),
        ("suspect", "intact", "suspect", False),
        ("retired", None, "retired", False),
        ("destroyed", "intact", "destroyed", False),
    ],
)
def test_the_rule(status, finding, state, usable):
    u = assess(status, finding)
    assert (u.state, u.usable) == (state, usable)
    assert u.label == ("usable" if usable else "not for use")
    # the caution fits the state: only a usable mark is told to check it is undisturbed
    assert ("Check that the mark is undisturbed" in u.caution) == usable
    assert u.occupation_allowed == u.new_position_allowed == (status != "destroyed")


def _destroy(kestrel, manager, code="KV-002"):
    mark = kestrel["bridge"]
    return mark_set_status(
        actor=manager, code=code, status="destroyed", expected_version=mark.version, note="Bridge replaced."
    )


def test_the_service_refuses_an_occupation_of_a_destroyed_mark(kestrel, manager, technician, api_client_for):
    _destroy(kestrel, manager)
    before = Occupation.objects.count()
    with pytest.raises(Conflict) as err:
        occupation_record(actor=technician, mark_code="KV-002", data=OCCUPATION)
    assert err.value.code == "mark_destroyed"
    response = api_client_for(technician).post("/api/marks/KV-002/occupations/", OCCUPATION, format="json")
    assert_error_shape(response, 409, "mark_destroyed")
    assert Occupation.objects.count() == before
    # the page does not offer the form either
    from django.test import Client

    c = Client()
    c.force_login(technician)
    response = c.get(reverse("web:occupation-create", kwargs={"code": "KV-002"}))
    assert response.status_code == 302 and response["Location"].endswith("/marks/KV-002/")


def test_the_mark_page_of_a_destroyed_mark(kestrel, manager, technician, signed_in):
    _destroy(kestrel, manager)
    page = signed_in(technician).get(reverse("web:mark-detail", kwargs={"code": "KV-002"})).content.decode()
    banner = page.split('class="banner notforuse"')[1].split("</section>")[0]
    assert "Not for use" in banner and "Destroyed" in banner and "no longer exists" in banner
    assert "Check that the mark is undisturbed" not in page
    # no field actions that a destroyed mark cannot take
    assert "Record occupation" not in page and "Propose position" not in page and "Record visit" in page
    # the published position is greyed and labelled, a word first
    table = page.split('<table class="positions notforuse">')[1].split("</table>")[0]
    assert "not for use" in table


def test_the_mark_page_after_a_not_found_visit(kestrel, technician, signed_in):
    visit_record(
        actor=technician, mark_code="KV-002", data={"visited_on": "2024-05-01", "finding": "searched_not_found"}
    )
    page = signed_in(technician).get(reverse("web:mark-detail", kwargs={"code": "KV-002"})).content.decode()
    assert 'class="banner notforuse"' in page and "did not find it" in page
    assert "Record occupation" in page  # re-observing it is exactly what it needs


def test_a_usable_mark_keeps_the_general_caution(kestrel, technician, signed_in):
    page = signed_in(technician).get(reverse("web:mark-detail", kwargs={"code": "KV-001"})).content.decode()
    assert 'class="banner notforuse"' not in page and "Check that the mark is undisturbed" in page
    assert "Record occupation" in page and "Propose position" in page


def test_the_list_says_it_in_its_rows_and_counts_proposed(kestrel, manager, signed_in, viewer):
    _destroy(kestrel, manager)
    page = signed_in(viewer).get(reverse("web:mark-list")).content.decode()
    page = page.split('<table class="marks">')[1]  # the rows (the map above links the marks too)
    row = page.split('href="/marks/KV-002/"')[1].split("</tr>")[0]
    assert "not for use" in row and "nfu-coord" in row
    row = page.split('href="/marks/KV-001/"')[1].split("</tr>")[0]
    assert ">usable<" in row and "1 proposed" in row  # the scenario's ITRF2020 position awaits a decision


def test_the_free_text_covers_the_monument(kestrel, signed_in, viewer):
    client = signed_in(viewer)
    page = client.get(reverse("web:mark-list"), {"text": "disk"}).content.decode()
    assert 'href="/marks/KV-001/"' in page and 'href="/marks/KV-002/"' not in page  # disk set in rock outcrop
    page = client.get(reverse("web:mark-list"), {"text": "granite"}).content.decode()  # how it is set
    assert 'href="/marks/KV-001/"' in page


def test_history_speaks_in_words(kestrel, signed_in, viewer):
    """Issue 10, item 9: no event codes, field names, database ids or seconds in front of a user."""
    import re

    response = signed_in(viewer).get(reverse("web:mark-detail", kwargs={"code": "KV-001"}))
    html = response.content.decode()
    history = html.split('id="h-history"')[1]
    for code in ("position_publish", "position_propose", "mark_update", "visit_record", "occupation_record"):
        assert code not in history
    for name in ("search_lat_deg", "frame_epsg", "cov_ee_m2", "superseded_by_id", "decided_by_id", "supersedes_id"):
        assert name not in history
    assert "supersedes: (empty) → ITRF2014 (EPSG:7912), epoch 2010.000" in re.sub(r"<[^>]+>", "", history)
    assert "the visit of 2024-04-18 (intact)" in history  # the photo's visit, not its id
    assert not re.search(r"\bposition \d+\b", html)  # no "position 7"
    assert not re.search(r"\d\d:\d\d:\d\d", html)  # times to the minute
    assert not re.search(r"\.\d{6}\+00:00", html)  # no microsecond ISO stamps
    assert "Position published" in history and "Position in ITRF2014 (EPSG:7912), epoch 2020.500" in history
    assert re.search(r"\d{4}-\d\d-\d\d \d\d:\d\d UTC", history)
    # the API keeps the codes (documented)
