"""Text without limits (issue 11, "Edges" 4): a 15 MB visit note was accepted and made the mark page
31 MB. Every text field now has a maximum (services, so pages, API, commands and imports alike),
and pages show a long text cut short with a link to the whole of it."""

from __future__ import annotations

import datetime as dt
import json

import pytest

from registry.models import Job, Mark, Position, Visit
from registry.services.audit import audit_record, snapshot
from registry.services.limits import NOTES_MAX, REASON_MAX, SHOWN_MAX, limits_table
from registry.services.marks import mark_create
from tests.api._shape import assert_error_shape
from tests.services._data import make_published, position_data

pytestmark = pytest.mark.django_db
HUGE = "Found the disk under gravel. " * 540_000  # 15.1 million characters (about 15 MB)


@pytest.fixture
def mark(manager):
    return mark_create(actor=manager, data={"code": "TL-01", "name": "Text limit mark (invented)"})


def _json(client, method, url, body):
    return getattr(client, method)(url, data=json.dumps(body), content_type="application/json")


def test_a_15_mb_visit_note_is_refused_and_nothing_saved(mark, technician, api_client_for, settings):
    settings.DATA_UPLOAD_MAX_MEMORY_SIZE = 40 * 1024 * 1024  # let the body reach the service
    body = {"visited_on": "2024-05-01", "finding": "intact", "notes": HUGE}
    error = assert_error_shape(
        _json(api_client_for(technician), "post", "/api/marks/TL-01/visits/", body), 400, "invalid"
    )
    assert error["details"]["notes"][0]["code"] == "max_length"
    assert f"At most {NOTES_MAX}" in error["details"]["notes"][0]["message"]
    assert Visit.objects.count() == 0


@pytest.mark.parametrize(
    ("method", "url", "body", "field"),
    [
        ("patch", "/api/marks/TL-01/", {"version": 1, "notes": "x" * (NOTES_MAX + 1)}, "notes"),
        ("patch", "/api/marks/TL-01/", {"version": 1, "access_directions": "x" * (NOTES_MAX + 1)}, "access_directions"),
        ("post", "/api/marks/", {"code": "TL-02", "notes": "x" * (NOTES_MAX + 1)}, "notes"),
        ("post", "/api/marks/TL-01/positions/", position_data(note="x" * (NOTES_MAX + 1)), "note"),
        (
            "post",
            "/api/marks/TL-01/occupations/",
            {
                "method": "static_gnss",
                "start_utc": "2024-05-01T14:00:00Z",
                "end_utc": "2024-05-01T20:00:00Z",
                "notes": "x" * (NOTES_MAX + 1),
            },
            "notes",
        ),
    ],
)
def test_every_free_text_has_its_maximum(mark, manager, api_client_for, method, url, body, field):
    before = (Mark.objects.count(), Position.objects.count(), Mark.objects.get(code="TL-01").version)
    error = assert_error_shape(_json(api_client_for(manager), method, url, body), 400, "invalid")
    assert error["details"][field][0]["code"] == "max_length"
    assert (Mark.objects.count(), Position.objects.count(), Mark.objects.get(code="TL-01").version) == before
    # exactly at the limit is fine
    ok = {**body, field: "y" * NOTES_MAX}
    assert _json(api_client_for(manager), method, url, ok).status_code in (200, 201)


def test_a_reason_has_its_maximum(mark, manager, technician, api_client_for):
    position = make_published(manager, technician, "TL-01")
    r = _json(
        api_client_for(manager), "post", f"/api/positions/{position.pk}/withdraw/", {"note": "z" * (REASON_MAX + 1)}
    )
    assert assert_error_shape(r, 400, "invalid")["details"]["note"][0]["code"] == "max_length"


def test_job_notes_have_the_same_maximum(manager, api_client_for):
    from tests.api.test_edges_api import JOB_FORM  # the page form; the API takes the same fields

    body = {
        k: v for k, v in JOB_FORM.items() if k in ("code", "name", "frame_epsg", "epoch_yr", "tol_h_mm", "tol_v_mm")
    }
    body.update(site_geojson={"type": "Point", "coordinates": [-110.6, 45.2]}, notes="n" * (NOTES_MAX + 1))
    r = _json(api_client_for(manager), "post", "/api/jobs/", body)
    assert assert_error_shape(r, 400, "invalid")["details"]["notes"][0]["code"] == "max_length"
    assert Job.objects.count() == 0


def test_every_text_field_has_a_documented_maximum():
    rows = limits_table()
    assert rows and all(isinstance(limit, int) and limit > 0 for _, _, limit in rows)
    readme = (__import__("pathlib").Path(__file__).resolve().parents[2] / "README.md").read_text()
    assert f"{NOTES_MAX:,}" in readme and f"{REASON_MAX:,}" in readme and f"{SHOWN_MAX:,}" in readme


def test_a_page_never_renders_an_unbounded_text(mark, viewer, technician, client):
    """Data stored before the limits (written directly here) is shown cut short, with "show all"."""
    visit = Visit.objects.create(
        mark=mark, visited_on=dt.date(2024, 5, 1), finding="intact", notes=HUGE, created_by=technician
    )
    audit_record(actor=technician, action="visit_record", obj=visit, after=snapshot(visit), mark=mark)  # history too
    Mark.objects.filter(pk=mark.pk).update(notes=HUGE, access_directions=HUGE)
    client.force_login(viewer)
    r = client.get("/marks/TL-01/")
    assert r.status_code == 200
    assert len(r.content) < 200_000, len(r.content)  # 31.3 MB before, with one such note (issue 11; measured)
    body = r.content.decode()
    assert body.count(f"show all ({len(HUGE):,} characters)") == 3
    full = client.get(f"/marks/TL-01/text/visit/{visit.pk}/")
    assert full.status_code == 200 and full.content.decode().count("Found the disk under gravel.") == 540_000
    assert client.get("/marks/TL-01/text/access-directions/").status_code == 200
    assert client.get("/marks/TL-01/text/visit/999999/").status_code == 404
    assert client.get("/marks/TL-01/text/password/").status_code == 404
