"""Jobs API and the screening endpoint: same data as the page, one error shape, roles."""

from __future__ import annotations

import pytest

from registry.models import Job, SkyView
from tests.services.test_screening import SITE_LAT, SITE_LON, make_job, make_mark

POINT = {"type": "Point", "coordinates": [SITE_LON, SITE_LAT]}


@pytest.fixture
def marks(db):
    make_mark("NB-1", 1000.0, 0.0)
    make_mark("SK-1", 700.0, 90.0, sky=SkyView.OBSTRUCTED)
    make_mark("CK-1", 400.0, 200.0, sigma_h_mm=8.0)


def test_screening_endpoint(api_client_for, viewer, marks):
    make_job(code="J-API")
    r = api_client_for(viewer).get("/api/jobs/J-API/screening/", {"as_of": "2025-07-01"})
    assert r.status_code == 200
    data = r.json()
    assert data["job"] == "J-API" and data["frame"] == {"epsg": 6319, "name": "NAD83(2011) (EPSG:6319)"}
    first = data["candidates"][0]
    assert first["code"] == "NB-1" and first["excluded"] is False
    # Same hand value as the service test: 24.2315 mm, 33.8909 mm (JSON keeps 0.001 mm).
    assert first["horizontal_95_mm"] == pytest.approx(24.2315, abs=2e-3)
    assert first["vertical_95_mm"] == pytest.approx(33.8909, abs=2e-3)
    assert {b["term"] for b in first["budget"]} == {"rtk", "base", "drift", "motion", "setup", "rover", "geoid"}
    sk = next(c for c in data["candidates"] if c["code"] == "SK-1")
    assert sk["excluded"] and [x["code"] for x in sk["reasons"]] == ["sky_obstructed"]
    assert data["chosen_bases"][0] == "NB-1"
    assert [c["code"] for c in data["check_marks"]] == ["CK-1"]
    assert data["cautions"] and data["statement"]


def test_screening_errors_have_one_shape(api_client_for, viewer, make_user, db):
    r = api_client_for(viewer).get("/api/jobs/NOPE/screening/")
    assert r.status_code == 404 and r.json()["error"]["code"] == "not_found"
    r = api_client_for(make_user("nobody", None)).get("/api/jobs/NOPE/screening/")
    assert r.status_code == 403
    make_job(code="J-API")
    r = api_client_for(viewer).get("/api/jobs/J-API/screening/", {"as_of": "yesterday"})
    assert r.status_code == 400 and r.json()["error"]["details"]["as_of"][0]["code"] == "invalid_date"


def test_ad_hoc_screening(api_client_for, viewer, marks):
    client = api_client_for(viewer)
    r = client.post(
        "/api/screening/",
        {
            "site_geojson": POINT,
            "frame_epsg": 6319,
            "epoch_yr": 2025.5,
            "tol_h_mm": 30,
            "tol_v_mm": 40,
            "as_of": "2025-07-01",
        },
        format="json",
    )
    assert r.status_code == 200 and r.json()["job"] is None
    assert r.json()["candidates"][0]["code"] == "NB-1"
    r = client.post(
        "/api/screening/",
        {
            "site_geojson": {"type": "Polygon", "coordinates": [[[0, 0], [1, 1]]]},
            "frame_epsg": 6319,
            "epoch_yr": 2025.5,
            "tol_h_mm": 30,
            "tol_v_mm": 40,
        },
        format="json",
    )
    assert r.status_code == 400
    assert r.json()["error"]["details"]["site_geojson"][0]["code"] == "too_few_positions"
    r = client.post("/api/screening/", {"site_geojson": POINT}, format="json")
    assert r.status_code == 400 and "frame_epsg" in r.json()["error"]["details"]


def test_jobs_crud_roles_and_conflict(api_client_for, viewer, manager, make_user, db):
    body = {
        "code": "J-A1",
        "name": "Invented culvert",
        "site_geojson": POINT,
        "frame_epsg": 6319,
        "epoch_yr": 2025.5,
        "tol_h_mm": 20,
        "tol_v_mm": 30,
    }
    assert api_client_for(viewer).post("/api/jobs/", body, format="json").status_code == 403
    r = api_client_for(manager).post("/api/jobs/", body, format="json")
    assert r.status_code == 201 and r.json()["version"] == 1 and r.json()["rtk_h_fixed_mm"] == 8.0
    r = api_client_for(manager).post("/api/jobs/", {**body, "frame_epsg": 4326}, format="json")
    assert r.status_code == 400 and r.json()["error"]["details"]["frame_epsg"][0]["code"] == "invalid_frame"
    assert [j["code"] for j in api_client_for(viewer).get("/api/jobs/").json()] == ["J-A1"]
    r = api_client_for(manager).patch("/api/jobs/J-A1/", {"version": 1, "tol_h_mm": 25}, format="json")
    assert r.status_code == 200 and r.json()["version"] == 2
    r = api_client_for(make_user("omar", "manager")).patch(
        "/api/jobs/J-A1/", {"version": 1, "tol_h_mm": 22}, format="json"
    )
    assert r.status_code == 409
    err = r.json()["error"]
    assert err["code"] == "stale_version" and err["details"]["tol_h_mm"] == {"yours": 22.0, "theirs": 25.0}
    assert Job.objects.get(code="J-A1").tol_h_mm == 25.0
    assert (
        api_client_for(viewer).patch("/api/jobs/J-A1/", {"version": 2, "name": "x"}, format="json").status_code == 403
    )
