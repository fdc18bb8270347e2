"""The positions API through HTTP: propose, list, publish (supersede), reject, withdraw."""

from __future__ import annotations

import json

import pytest

from registry.models import Mark, Position, PositionState
from tests.api._shape import assert_error_shape
from tests.services._data import NAD83_2011_EPSG, make_mark, position_data

pytestmark = pytest.mark.django_db


@pytest.fixture
def mark(manager):
    return make_mark(manager)


def propose(client, **overrides):
    response = client.post("/api/marks/QR-101/positions/", position_data(**overrides), format="json")
    assert response.status_code == 201, response.content
    return response.json()


def test_propose_returns_the_position_with_frame_epoch_and_rounding(mark, technician, api_client_for):
    body = propose(api_client_for(technician), vel_e_m_yr=-0.0123456, vel_n_m_yr=0.004, vel_u_m_yr=0.0)
    assert body["state"] == "proposed" and body["mark"] == "QR-101" and body["created_by"] == "theo"
    assert (body["frame_epsg"], body["frame_name"], body["epoch_yr"]) == (7912, "ITRF2014", 2020.0)
    assert (body["lat_deg"], body["lon_deg"], body["h_m"]) == (45.201234568, -110.602345679, 1523.4567)  # 0.01 mm
    assert body["cov_ee_m2"] == 0.005**2  # covariance unrounded
    assert body["vel_e_m_yr"] == -0.012346  # 6 decimals of m/yr = 0.001 mm/yr


def test_propose_invalid_input_is_a_400_with_field_codes(mark, technician, api_client_for):
    response = api_client_for(technician).post(
        "/api/marks/QR-101/positions/", position_data(lat_deg=95.0, frame_epsg=4326, cov_uu_m2=-1), format="json"
    )
    error = assert_error_shape(response, 400, "invalid")
    codes = {field: [item["code"] for item in items] for field, items in error["details"].items()}
    assert codes == {
        "lat_deg": ["lat_out_of_range"],
        "frame_epsg": ["frame_not_geographic_3d"],
        "cov_uu_m2": ["negative_variance"],
    }
    assert not Position.objects.exists()


def test_propose_on_a_missing_mark_is_a_404(technician, api_client_for):
    response = api_client_for(technician).post("/api/marks/NOPE-1/positions/", position_data(), format="json")
    assert_error_shape(response, 404, "not_found")


def test_publish_then_supersede_through_the_api(mark, technician, manager, api_client_for):
    tech, boss = api_client_for(technician), api_client_for(manager)
    first = propose(tech)
    published = boss.post(f"/api/positions/{first['id']}/publish/", {}, format="json")
    assert published.status_code == 200 and published.json()["state"] == "published"
    assert published.json()["decided_by"] == "mona"
    second = propose(tech, epoch_yr=2024.5, lat_deg=45.2012346)
    # invented data: 4.5 years of plate motion are missing from it, so the movement check asks for a reason
    refused = boss.post(f"/api/positions/{second['id']}/publish/", {}, format="json")
    assert assert_error_shape(refused, 400, "invalid")["details"]["note"][0]["code"] == "movement_note_required"
    reason = {"note": "Invented data, published regardless."}
    assert boss.post(f"/api/positions/{second['id']}/publish", reason, format="json").status_code == 200  # no slash
    old = boss.get(f"/api/positions/{first['id']}/").json()
    assert old["state"] == "superseded" and old["superseded_by"] == second["id"] and old["superseded_at"]
    detail = boss.get("/api/marks/QR-101/").json()
    assert [p["id"] for p in detail["published_positions"]] == [second["id"]]
    assert detail["search_location"]["lat_deg"] == 45.2012346
    assert detail["search_location"]["epoch_yr"] == 2024.5


def test_publishing_twice_is_a_409(mark, technician, manager, api_client_for):
    first = propose(api_client_for(technician))
    boss = api_client_for(manager)
    boss.post(f"/api/positions/{first['id']}/publish/", format="json")
    error = assert_error_shape(boss.post(f"/api/positions/{first['id']}/publish/", format="json"), 409, "invalid_state")
    assert error["details"] == {"state": "published", "allowed": ["proposed"]}


def test_reject_needs_a_note(mark, technician, manager, api_client_for):
    first = propose(api_client_for(technician))
    boss = api_client_for(manager)
    error = assert_error_shape(boss.post(f"/api/positions/{first['id']}/reject/", {}, format="json"), 400, "invalid")
    assert error["details"]["note"][0]["code"] == "note_required"
    response = boss.post(f"/api/positions/{first['id']}/reject/", {"note": "Float solution (invented)"}, format="json")
    assert response.status_code == 200 and response.json()["state"] == "rejected"


def test_withdraw_falls_back_to_the_other_frame(mark, technician, manager, api_client_for):
    tech, boss = api_client_for(technician), api_client_for(manager)
    itrf = propose(tech)
    nad = propose(tech, frame_epsg=NAD83_2011_EPSG, lat_deg=45.20122, lon_deg=-110.60233)
    boss.post(f"/api/positions/{itrf['id']}/publish/", format="json")
    # nad was proposed when nothing was published: it names what it was compared with
    stale = boss.post(f"/api/positions/{nad['id']}/publish/", {"note": "x"}, format="json")
    assert assert_error_shape(stale, 409, "compared_with_changed")["details"]["published_now"] == itrf["id"]
    body = {"note": "Invented data, published regardless.", "compared_with": itrf["id"]}
    assert boss.post(f"/api/positions/{nad['id']}/publish/", body, format="json").status_code == 200
    assert boss.get("/api/marks/QR-101/").json()["search_location"]["frame_epsg"] == NAD83_2011_EPSG
    response = boss.post(f"/api/positions/{nad['id']}/withdraw/", {"note": "Wrong antenna (invented)"}, format="json")
    assert response.status_code == 200 and response.json()["state"] == "withdrawn"
    location = boss.get("/api/marks/QR-101/").json()["search_location"]
    assert (location["frame_epsg"], location["lat_deg"]) == (7912, 45.201234568)
    boss.post(f"/api/positions/{itrf['id']}/withdraw/", {"note": "Blunder (invented)"}, format="json")
    assert boss.get("/api/marks/QR-101/").json()["search_location"] is None
    assert Mark.objects.values_list("search_lat_deg", flat=True).get() is None


def test_positions_list_and_state_filter(mark, technician, manager, api_client_for, viewer):
    tech, boss = api_client_for(technician), api_client_for(manager)
    a = propose(tech)
    propose(tech, epoch_yr=2021.0)
    boss.post(f"/api/positions/{a['id']}/publish/", format="json")
    client = api_client_for(viewer)
    assert client.get("/api/marks/QR-101/positions/").json()["count"] == 2
    published = client.get("/api/marks/QR-101/positions/?state=published").json()
    assert [p["id"] for p in published["results"]] == [a["id"]]
    error = assert_error_shape(client.get("/api/marks/QR-101/positions/?state=draft"), 400, "invalid")
    assert error["details"]["state"][0]["code"] == "invalid_choice"


def test_unknown_position_is_a_404(mark, manager, api_client_for):
    client = api_client_for(manager)
    assert_error_shape(client.get("/api/positions/987654/"), 404, "not_found")
    assert_error_shape(client.post("/api/positions/987654/publish/", format="json"), 404, "not_found")
    assert not Position.objects.filter(state=PositionState.PUBLISHED).exists()


@pytest.mark.parametrize(
    ("raw", "field", "code"),
    [
        ('"lat_deg": 1e400', "lat_deg", "not_finite"),  # JSON number beyond float range → inf
        ('"lat_deg": "45.2\\u0000"', "lat_deg", "invalid_number"),
        ('"frame_epsg": 99999999999999999999999', "frame_epsg", "out_of_range"),
    ],
)
def test_odd_numbers_in_json_are_refused(mark, technician, api_client_for, raw, field, code):
    body = json.dumps(position_data())
    key = raw.split(":")[0]
    start = body.index(key)
    end = body.index(",", start)
    response = api_client_for(technician).post(
        "/api/marks/QR-101/positions/", body[:start] + raw + body[end:], content_type="application/json"
    )
    error = assert_error_shape(response, 400, "invalid")
    assert error["details"][field][0]["code"] == code
    assert not Position.objects.exists()


def test_notes_with_null_characters_and_huge_ids(mark, technician, manager, api_client_for):
    proposed = propose(api_client_for(technician))
    boss = api_client_for(manager)
    for action in ("publish", "reject"):
        response = boss.post(f"/api/positions/{proposed['id']}/{action}/", {"note": "a\x00b"}, format="json")
        assert (
            assert_error_shape(response, 400, "invalid")["details"]["note"][0]["code"] == "null_characters_not_allowed"
        )
    assert_error_shape(boss.get("/api/positions/99999999999999999999999/"), 404, "not_found")
    assert_error_shape(boss.post("/api/positions/99999999999999999999999/publish/", format="json"), 404, "not_found")
    assert Position.objects.get().state == PositionState.PROPOSED


def test_publish_returns_the_stored_movement_check_and_the_comparison_endpoint(
    mark, technician, manager, viewer, api_client_for
):
    tech, boss = api_client_for(technician), api_client_for(manager)
    first = propose(tech)
    published = boss.post(f"/api/positions/{first['id']}/publish/", {"compared_with": None}, format="json").json()
    assert (
        published["movement_check"]["verdict"] == "not_compared"
        and published["movement_check"]["compared_with"] is None
    )
    second = propose(tech, lat_deg=45.2012345678 + 0.001 / 111_132)  # 1 mm north, same frame and epoch
    check = api_client_for(viewer).get(f"/api/positions/{second['id']}/movement-check/").json()
    current = check["current"]
    assert current["compared_with"] == first["id"] and current["verdict"] == "no_movement"
    assert current["d_north_mm"] == pytest.approx(1.0, abs=0.01) and current["dof"] == 3
    assert set(current["detectable_mm"]) == {"east", "north", "up"}
    assert [c["stage"] for c in check["stored"]] == ["proposed"]
    done = boss.post(f"/api/positions/{second['id']}/publish/", {"compared_with": first["id"]}, format="json")
    assert done.status_code == 200 and done.json()["movement_check"]["stage"] == "published"
    assert done.json()["movement_check"]["t_global"] == pytest.approx(current["t_global"])


def test_publish_with_a_bad_compared_with_is_a_400(mark, technician, manager, api_client_for):
    first = propose(api_client_for(technician))
    response = api_client_for(manager).post(
        f"/api/positions/{first['id']}/publish/", {"compared_with": "yesterday"}, format="json"
    )
    assert assert_error_shape(response, 400, "invalid")["details"]["compared_with"][0]["code"] == "invalid_integer"
