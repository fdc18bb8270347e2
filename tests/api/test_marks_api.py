"""The marks API through HTTP: search filters, GeoJSON, create, edit with versions, the error shape."""

from __future__ import annotations

import json

import pytest
from django.core.exceptions import PermissionDenied as DjangoPermissionDenied
from django.core.exceptions import ValidationError
from django.http import Http404

from registry.errors import InvalidInput
from registry.models import AuditEvent, AuditTrailError, FrozenPositionError, Mark
from tests.api._shape import assert_error_shape
from tests.services._data import NAD83_2011_EPSG, make_mark, make_published

pytestmark = pytest.mark.django_db


@pytest.fixture
def district(manager, technician):
    """Three invented marks: one located in ITRF2014, one in NAD83(2011), one without a position."""
    make_mark(manager, code="QR-101", name="Quarry Ridge")
    make_mark(manager, code="QR-102", name="Quarry Ridge South", status="retired")
    make_mark(manager, code="BX-7", name="Boxelder Creek")
    make_published(manager, technician, code="QR-101")
    make_published(
        manager, technician, code="BX-7", frame_epsg=NAD83_2011_EPSG, lat_deg=45.1876543210, lon_deg=-110.5512345678
    )


# ---- list and filters -------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("query", "codes"),
    [
        ("", ["BX-7", "QR-101", "QR-102"]),
        ("?code=QR-101", ["QR-101"]),
        ("?code=QR", []),
        ("?name=south", ["QR-102"]),
        ("?status=retired", ["QR-102"]),
        ("?status=active", ["BX-7", "QR-101"]),
        ("?q=ridge", ["QR-101", "QR-102"]),
        ("?q=bx", ["BX-7"]),
        ("?q=ridge&status=active", ["QR-101"]),
    ],
)
def test_list_filters(district, viewer, api_client_for, query, codes):
    response = api_client_for(viewer).get(f"/api/marks/{query}")
    assert response.status_code == 200
    body = response.json()
    assert [m["code"] for m in body["results"]] == codes
    assert body["count"] == len(codes)


def test_list_rejects_an_unknown_status(district, viewer, api_client_for):
    error = assert_error_shape(api_client_for(viewer).get("/api/marks/?status=lost"), 400, "invalid")
    assert error["details"] == {"status": [{"code": "invalid_choice", "message": "Unknown status 'lost'."}]}


def test_list_is_paginated(district, viewer, api_client_for):
    client = api_client_for(viewer)
    body = client.get("/api/marks/?limit=2").json()
    assert body["count"] == 3 and body["count_is_estimate"] is False and len(body["results"]) == 2
    assert "cursor=" in body["next"] and body["previous"] is None
    second = client.get(body["next"]).json()
    assert [m["code"] for m in second["results"]] == ["QR-102"] and second["next"] is None
    back = client.get(second["previous"]).json()
    assert [m["code"] for m in back["results"]] == [m["code"] for m in body["results"]]
    # offset still pages (up to 10,000 rows deep), with offset links
    by_offset = client.get("/api/marks/?limit=2&offset=0").json()
    assert by_offset["results"] == body["results"] and "offset=2" in by_offset["next"]
    assert [m["code"] for m in client.get(by_offset["next"]).json()["results"]] == ["QR-102"]


def test_list_refuses_a_deep_offset_and_a_foreign_cursor(district, viewer, api_client_for):
    client = api_client_for(viewer)
    error = assert_error_shape(client.get("/api/marks/?offset=10001"), 400, "invalid")
    assert error["details"]["offset"][0]["code"] == "max_value"
    error = assert_error_shape(client.get("/api/marks/?cursor=not-ours"), 400, "invalid")
    assert error["details"]["cursor"][0]["code"] == "invalid_cursor"


def test_search_location_carries_frame_and_epoch_and_rounding(district, viewer, api_client_for):
    body = api_client_for(viewer).get("/api/marks/?code=BX-7").json()
    loc = body["results"][0]["search_location"]
    # Rounding documented in the README: 9 decimal places of a degree.
    assert loc == {
        "lat_deg": 45.187654321,
        "lon_deg": -110.551234568,
        "frame_epsg": NAD83_2011_EPSG,
        "frame_name": "NAD83(2011)",
        "epoch_yr": 2020.0,
    }


# ---- GeoJSON (RFC 7946) ------------------------------------------------------------------------------


@pytest.mark.parametrize("how", ["query", "accept"])
def test_geojson_is_an_rfc7946_feature_collection(district, viewer, api_client_for, how):
    client = api_client_for(viewer)
    if how == "query":
        response = client.get("/api/marks/?format=geojson")
    else:
        response = client.get("/api/marks/", HTTP_ACCEPT="application/geo+json")
    assert response.status_code == 200
    assert response["Content-Type"].startswith("application/geo+json")  # RFC 7946 §12 media type
    fc = json.loads(response.content)
    assert fc["type"] == "FeatureCollection"  # RFC 7946 §3.3
    assert isinstance(fc["features"], list) and len(fc["features"]) == 3
    by_code = {f["id"]: f for f in fc["features"]}
    for feature in fc["features"]:
        assert feature["type"] == "Feature"  # RFC 7946 §3.2: type, geometry, properties members
        assert {"type", "geometry", "properties"} <= set(feature)
        assert isinstance(feature["properties"], dict)
    located = by_code["QR-101"]["geometry"]
    assert located["type"] == "Point"
    # RFC 7946 §3.1.1: longitude first, then latitude. The district lies at about 45.2° N, 110.6° W.
    lon, lat = located["coordinates"]
    assert (lon, lat) == (-110.602345679, 45.201234568)
    assert -180 <= lon <= 180 and -90 <= lat <= 90
    assert by_code["QR-101"]["properties"]["frame_epsg"] == 7912
    assert by_code["BX-7"]["properties"]["frame_name"] == "NAD83(2011)"
    # RFC 7946 §3.2: a feature without a location has a null geometry.
    assert by_code["QR-102"]["geometry"] is None
    assert by_code["QR-102"]["properties"]["frame_epsg"] is None
    assert fc["count"] == 3  # paging as foreign members (RFC 7946 §6.1)


def test_geojson_honours_filters(district, viewer, api_client_for):
    fc = api_client_for(viewer).get("/api/marks/?format=geojson&status=active").json()
    assert sorted(f["id"] for f in fc["features"]) == ["BX-7", "QR-101"]


# ---- detail, create ------------------------------------------------------------------------------------


def test_detail_lists_published_positions_with_accuracy(district, viewer, api_client_for):
    body = api_client_for(viewer).get("/api/marks/QR-101/").json()
    assert body["version"] == 1
    (position,) = body["published_positions"]
    assert position["frame_epsg"] == 7912 and position["frame_name"] == "ITRF2014"
    assert position["h_m"] == 1523.4567  # metres to 5 decimals, 0.01 mm (1523.4567 stored)
    assert position["sigma_e_mm"] == 5.0 and position["sigma_u_mm"] == 10.0
    # FGDC-STD-007.2-1998 circle for σE = σN = 5 mm, no correlation: K(1) = 1.960790 + 0.004071 +
    # 0.114276 + 0.371625 = 2.450762 (secondary transcription of the polynomial) → r95 = 12.25381 mm → 12.25
    # (JSON keeps 0.01 mm; K(1) = 2.4477 would give 12.24, so this tells the two apart).
    assert position["network_accuracy_h95_mm"] == 12.25
    # Vertical: 1.9600 × 10 mm = 19.6 mm (FGDC-STD-007.3-1998 §3.2.1 factor; z(0.975) recomputed with SciPy).
    assert position["network_accuracy_u95_mm"] == 19.6  # 19.59964 → 19.60


def test_missing_mark_is_a_404_in_the_error_shape(district, viewer, api_client_for):
    error = assert_error_shape(api_client_for(viewer).get("/api/marks/NOPE-1/"), 404, "not_found")
    assert error["details"] == {"code": "NOPE-1"}


def test_a_user_without_a_role_gets_the_same_answer_for_real_and_missing_marks(district, make_user, api_client_for):
    client = api_client_for(make_user("nils", None))
    real, missing = client.get("/api/marks/QR-101/"), client.get("/api/marks/NOPE-1/")
    assert real.status_code == missing.status_code == 403
    assert real.json() == missing.json()


def test_create_returns_201_and_the_mark(manager, api_client_for):
    response = api_client_for(manager).post(
        "/api/marks/", {"code": "CW-12", "name": "Cottonwood Bench (invented)", "sky_view": "clear"}, format="json"
    )
    assert response.status_code == 201
    body = response.json()
    assert (body["code"], body["version"], body["search_location"], body["published_positions"]) == (
        "CW-12",
        1,
        None,
        [],
    )
    assert Mark.objects.filter(code="CW-12").exists()


def test_create_with_form_encoding(manager, api_client_for):
    response = api_client_for(manager).post("/api/marks/", {"code": "CW-13"})  # multipart form
    assert response.status_code == 201


@pytest.mark.parametrize(
    ("body", "field", "code"),
    [
        ({"code": "cw 12"}, "code", "invalid_code"),
        ({"code": "CW-12", "status": "lost"}, "status", "invalid_choice"),
        ({"name": "no code"}, "code", "required"),
        ({"code": "CW-12", "version": 3}, "version", "not_editable"),
    ],
)
def test_create_rejects_bad_input_with_field_codes(manager, api_client_for, body, field, code):
    error = assert_error_shape(api_client_for(manager).post("/api/marks/", body, format="json"), 400, "invalid")
    assert code in [item["code"] for item in error["details"][field]]
    assert not Mark.objects.exists()


def test_duplicate_code_is_a_400_not_a_500(district, manager, api_client_for):
    error = assert_error_shape(
        api_client_for(manager).post("/api/marks/", {"code": "QR-101"}, format="json"), 400, "invalid"
    )
    assert error["details"]["code"][0]["code"] == "unique"


@pytest.mark.parametrize(
    ("kwargs", "status", "code"),
    [
        ({"data": "{not json", "content_type": "application/json"}, 400, "parse_error"),
        ({"data": json.dumps(["QR-1"]), "content_type": "application/json"}, 400, "invalid"),
        ({"data": json.dumps("QR-1"), "content_type": "application/json"}, 400, "invalid"),
        ({"data": "<mark/>", "content_type": "application/xml"}, 415, "unsupported_media_type"),
    ],
)
def test_malformed_bodies_get_the_error_shape(manager, api_client_for, kwargs, status, code):
    assert_error_shape(api_client_for(manager).post("/api/marks/", **kwargs), status, code)


def test_unsupported_method_gets_the_error_shape(district, manager, api_client_for):
    assert_error_shape(api_client_for(manager).delete("/api/marks/QR-101/"), 405, "method_not_allowed")
    assert Mark.objects.filter(code="QR-101").exists()


# ---- edit with versions -------------------------------------------------------------------------------


def test_patch_needs_the_version(district, manager, api_client_for):
    error = assert_error_shape(
        api_client_for(manager).patch("/api/marks/QR-101/", {"notes": "x"}, format="json"), 400, "invalid"
    )
    assert error["details"]["version"][0]["code"] == "version_required"


def test_two_patches_from_the_same_version(district, manager, make_user, api_client_for):
    first = api_client_for(manager).patch(
        "/api/marks/QR-101/", {"version": 1, "access_directions": "From the gate, 200 m north."}, format="json"
    )
    assert first.status_code == 200 and first.json()["version"] == 2
    other = make_user("omar", "manager")
    second = api_client_for(other).patch(
        "/api/marks/QR-101/", {"version": 1, "access_directions": "Park at the quarry office."}, format="json"
    )
    error = assert_error_shape(second, 409, "stale_version")
    assert error["details"]["access_directions"]["yours"] == "Park at the quarry office."
    assert error["details"]["access_directions"]["theirs"] == "From the gate, 200 m north."
    assert error["details"]["access_directions"]["changed_by"] == "mona"
    assert error["details"]["version"] == {"yours": 1, "theirs": 2, "changed_by": None, "changed_at": None}
    assert Mark.objects.get(code="QR-101").access_directions == "From the gate, 200 m north."
    trail = {e.action: e.after for e in AuditEvent.objects.filter(action__startswith="mark_update")}
    assert trail["mark_update"]["access_directions"] == "From the gate, 200 m north."
    assert trail["mark_update_refused"]["access_directions"] == "Park at the quarry office."


def test_status_endpoint(district, manager, api_client_for):
    client = api_client_for(manager)
    error = assert_error_shape(
        client.post("/api/marks/QR-101/status/", {"version": 1, "status": "destroyed"}, format="json"), 400, "invalid"
    )
    assert error["details"]["note"][0]["code"] == "note_required"
    response = client.post(
        "/api/marks/QR-101/status",
        {"version": 1, "status": "destroyed", "note": "Quarry blast (invented)"},
        format="json",
    )
    assert response.status_code == 200 and response.json()["status"] == "destroyed"
    stale = client.post("/api/marks/QR-101/status/", {"version": 1, "status": "active", "note": "found"}, format="json")
    assert_error_shape(stale, 409, "stale_version")


# ---- hostile input never becomes a 500 (PostgreSQL refuses NUL in text; SQLite 64-bit integers) ------


@pytest.mark.parametrize(
    ("method", "url", "body", "status", "field", "code"),
    [
        ("get", "/api/marks/QR%00101/", None, 404, None, "not_found"),
        ("get", "/api/marks/?q=qr%00", None, 400, "q", "null_characters_not_allowed"),
        ("get", "/api/marks/?code=QR%00", None, 400, "code", "null_characters_not_allowed"),
        ("get", "/api/marks/?format=geojson&name=a%00", None, 400, "name", "null_characters_not_allowed"),
        ("patch", "/api/marks/QR-101/", {"version": 1, "notes": "a\x00b"}, 400, "notes", "null_characters_not_allowed"),
        ("patch", "/api/marks/QR-101/", {"version": 10**30, "notes": "x"}, 400, "version", "invalid_version"),
        ("patch", "/api/marks/QR-101/", {"version": 1, "notes": ["x"]}, 400, "notes", "invalid_type"),
        (
            "post",
            "/api/marks/",
            {"code": "CW-1", "keeper": "a\x00"},
            400,
            "keeper",
            "null_characters_not_allowed",
        ),
        (
            "post",
            "/api/marks/QR-101/status/",
            {"version": 1, "status": "retired", "note": "a\x00"},
            400,
            "note",
            "null_characters_not_allowed",
        ),
    ],
)
def test_hostile_input_gets_a_clear_error(district, manager, api_client_for, method, url, body, status, field, code):
    client = api_client_for(manager)
    response = getattr(client, method)(url, body, format="json") if body is not None else getattr(client, method)(url)
    error = assert_error_shape(response, status, "invalid" if status == 400 else code)
    if field:
        assert error["details"][field][0]["code"] == code
    assert Mark.objects.get(code="QR-101").version == 1


# ---- the handler itself, for errors no view above happens to raise ---------------------------------


@pytest.mark.parametrize(
    ("exc", "status", "code"),
    [
        (Http404("gone"), 404, "not_found"),
        (DjangoPermissionDenied(), 403, "permission_denied"),
        (FrozenPositionError("frozen"), 409, "position_frozen"),
        (AuditTrailError("never"), 409, "audit_append_only"),
        (InvalidInput("bad"), 400, "invalid"),
        (ValidationError("The whole body is wrong.", code="odd"), 400, "invalid"),
    ],
    ids=["Http404", "PermissionDenied", "FrozenPositionError", "AuditTrailError", "InvalidInput", "ValidationError"],
)
def test_exception_handler_gives_the_one_shape(viewer, exc, status, code):
    from rest_framework.test import APIRequestFactory, force_authenticate
    from rest_framework.views import APIView

    class Raiser(APIView):
        def get(self, request):
            raise exc

    request = APIRequestFactory().get("/x/")
    force_authenticate(request, viewer)
    response = Raiser.as_view()(request)
    response.render()
    assert_error_shape(response, status, code)


def test_create_and_edit_still_take_the_earlier_field_names(manager, api_client_for):
    """Deprecated for one release (README, earlier names): to_reach, monument_type, setting, stamping, custodian."""
    client = api_client_for(manager)
    response = client.post(
        "/api/marks/",
        {"code": "EN-1", "monument_type": "pillar", "stamping": "EN-1 2020", "to_reach": "Trail end"},
        format="json",
    )
    assert response.status_code == 201, response.content
    body = response.json()
    assert (body["monument"], body["marking"], body["access_directions"]) == ("pillar", "EN-1 2020", "Trail end")
    assert "monument_type" not in body and "stamping" not in body
    response = client.patch("/api/marks/EN-1/", {"version": 1, "custodian": "Ridge Trust"}, format="json")
    assert response.status_code == 200 and response.json()["keeper"] == "Ridge Trust"
    error = assert_error_shape(
        client.patch("/api/marks/EN-1/", {"version": 2, "custodian": "A", "keeper": "B"}, format="json"), 400, "invalid"
    )
    assert error["details"]["custodian"][0]["code"] == "old_and_new_name"


# ---- usability (issue 10) -------------------------------------------------------------------------------


def test_list_detail_and_geojson_say_whether_a_mark_is_usable_and_why_not(district, viewer, technician, api_client_for):
    """The same rule as the pages (services.usability): a retired mark and a mark its latest visit did
    not find are not for use, with the reason in words and a stable code; an active mark is usable."""
    from registry.services.fieldwork import visit_record

    visit_record(actor=technician, mark_code="BX-7", data={"visited_on": "2024-05-01", "finding": "searched_not_found"})
    client = api_client_for(viewer)
    rows = {m["code"]: m["usability"] for m in client.get("/api/marks/").json()["results"]}
    assert rows["QR-101"] == {"usable": True, "state": "usable", "reason": ""}
    assert rows["QR-102"] == {
        "usable": False,
        "state": "retired",
        "reason": "the mark is retired from the registry's active network",
    }
    assert rows["BX-7"]["usable"] is False and rows["BX-7"]["state"] == "last_visit_not_found"
    assert "did not find it" in rows["BX-7"]["reason"]
    assert client.get("/api/marks/BX-7/").json()["usability"] == rows["BX-7"]  # the detail agrees
    fc = client.get("/api/marks/?format=geojson").json()
    props = {f["id"]: f["properties"] for f in fc["features"]}
    assert (props["BX-7"]["usable"], props["BX-7"]["usability_state"]) == (False, "last_visit_not_found")
    assert props["QR-101"]["usable"] is True and props["QR-101"]["usability_reason"] == ""
    # a visit that finds the mark again makes it usable in the API as on the pages
    visit_record(actor=technician, mark_code="BX-7", data={"visited_on": "2024-06-01", "finding": "intact"})
    assert client.get("/api/marks/BX-7/").json()["usability"]["usable"] is True


def test_the_schema_documents_the_usability_codes(viewer, api_client_for):
    from registry.services.usability import STATES, assess

    schema = api_client_for(viewer).get("/api/schema/?format=json").json()
    usability = schema["components"]["schemas"]["Usability"]
    assert set(usability["required"]) == {"usable", "state", "reason"}
    assert usability["properties"]["state"]["allOf"][0]["$ref"] == "#/components/schemas/UsabilityStateEnum"
    assert set(schema["components"]["schemas"]["UsabilityStateEnum"]["enum"]) == set(STATES)
    assert "last_visit_not_found = not for use" in usability["properties"]["state"]["description"]
    # every code the rule gives is documented
    given = {
        assess(s, f).state
        for s in ("active", "retired", "destroyed", "suspect")
        for f in (None, "intact", "damaged", "disturbed", "searched_not_found", "destroyed")
    }
    assert given == set(STATES)
