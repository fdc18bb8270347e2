"""GET /api/marks/near/: same answer as the selector, viewer ability required, one error shape.

Invented marks in a fictional district near 45.2°N 110.6°W. Distances are checked against
GeographicLib 2.1 on GRS80 (Karney 2013; a = 6 378 137 m, 1/f = 298.257222101).
"""

from __future__ import annotations

import pytest
from django.urls import reverse
from geographiclib.geodesic import Geodesic

from registry.models import Mark, MarkStatus, Stability
from tests.api._shape import assert_error_shape

pytestmark = pytest.mark.django_db

GRS80 = Geodesic(6378137.0, 1 / 298.257222101)
URL = "/api/marks/near/"


@pytest.fixture
def district():
    # Four marks due north of the search point at 300, 100, 200 and 400 m (GeographicLib Direct).
    spec = [("NR-300", 300.0, MarkStatus.ACTIVE, Stability.HIGH), ("NR-100", 100.0, MarkStatus.ACTIVE, Stability.LOW),
            ("NR-200", 200.0, MarkStatus.RETIRED, Stability.HIGH), ("NR-400", 400.0, MarkStatus.ACTIVE, Stability.MODERATE)]  # fmt: skip
    marks = []
    for code, north_m, status, stability in spec:
        p = GRS80.Direct(45.2, -110.6, 0.0, north_m)
        marks.append(
            Mark(code=code, search_lat_deg=p["lat2"], search_lon_deg=p["lon2"], status=status, stability=stability)
        )
    Mark.objects.bulk_create(marks)


def test_url_is_not_read_as_a_mark_code():
    assert reverse("api:marks-near") == URL


def test_viewer_gets_marks_nearest_first_with_cautions(district, viewer, api_client_for):
    r = api_client_for(viewer).get(URL, {"lat": 45.2, "lon": -110.6, "radius_km": 0.35})
    assert r.status_code == 200, r.content
    body = r.json()
    assert [m["code"] for m in body["marks"]] == ["NR-100", "NR-200", "NR-300"]
    assert body["count"] == 3
    assert [m["distance_m"] for m in body["marks"]] == [100.0, 200.0, 300.0]  # mm rounding
    assert all(m["azimuth_deg"] == pytest.approx(0.0, abs=1e-6) for m in body["marks"])
    assert body["search"]["radius_m"] == 350.0 and body["search"]["limit"] == 50
    assert body["search"]["ellipsoid"] == "GRS80"
    assert any("field" in c for c in body["cautions"])


def test_limit_and_filters(district, viewer, api_client_for):
    client = api_client_for(viewer)
    r = client.get(URL, {"lat": 45.2, "lon": -110.6, "radius_km": 1, "limit": 2})
    assert [m["code"] for m in r.json()["marks"]] == ["NR-100", "NR-200"]
    r = client.get(URL, {"lat": 45.2, "lon": -110.6, "radius_km": 1, "status": "active"})
    assert [m["code"] for m in r.json()["marks"]] == ["NR-100", "NR-300", "NR-400"]
    r = client.get(URL + "?lat=45.2&lon=-110.6&radius_km=1&stability=high&stability=moderate")
    assert [m["code"] for m in r.json()["marks"]] == ["NR-200", "NR-300", "NR-400"]
    r = client.get(URL, {"lat": 45.2, "lon": -110.6, "radius_km": 1, "stability": "high,moderate", "status": "active"})
    assert [m["code"] for m in r.json()["marks"]] == ["NR-300", "NR-400"]
    assert r.json()["search"]["filters"] == {"status": ["active"], "stability": ["high", "moderate"]}


@pytest.mark.parametrize(
    "query, field",
    [
        ({"lat": 91, "lon": 0, "radius_km": 1}, "lat"),
        ({"lat": 0, "lon": 0}, "radius_km"),
        ({"lat": 0, "lon": 0, "radius_km": 5000}, "radius_km"),
        ({"lat": 0, "lon": 0, "radius_km": 1, "limit": 0}, "limit"),
        ({"lat": 0, "lon": 0, "radius_km": 1, "status": "lost"}, "status"),
        ({"lat": "north", "lon": 0, "radius_km": 1}, "lat"),
    ],
)
def test_bad_query_is_a_400_in_the_one_shape(viewer, api_client_for, query, field):
    err = assert_error_shape(api_client_for(viewer).get(URL, query), 400, "invalid")
    assert field in err["details"]


def test_anonymous_and_roleless_users_are_refused(make_user, api_client_for):
    r = api_client_for(None).get(URL, {"lat": 45.2, "lon": -110.6, "radius_km": 1})
    assert r.status_code in (401, 403)
    r = api_client_for(make_user("nobody")).get(URL, {"lat": 45.2, "lon": -110.6, "radius_km": 1})
    assert_error_shape(r, 403, "permission_denied")


def test_usable_only_takes_the_limit_after_the_usability_rule(district, viewer, technician, api_client_for):
    """usable_only=true: the N nearest usable marks (the rule of services.usability, as on the page), and how
    many marks not for use were passed over. NR-100 (nearest) is searched for and not found; NR-200 is
    retired; so the two nearest usable marks are NR-300 and NR-400, with two passed over."""
    from registry.services.fieldwork import visit_record

    visit_record(
        actor=technician, mark_code="NR-100", data={"visited_on": "2024-05-01", "finding": "searched_not_found"}
    )
    client = api_client_for(viewer)
    r = client.get(URL, {"lat": 45.2, "lon": -110.6, "radius_km": 1, "limit": 2, "usable_only": "true"})
    assert r.status_code == 200, r.content
    body = r.json()
    assert [m["code"] for m in body["marks"]] == ["NR-300", "NR-400"]
    assert body["left_out_not_usable"] == 2 and body["search"]["filters"] == {"usable_only": True}
    r = client.get(URL, {"lat": 45.2, "lon": -110.6, "radius_km": 1, "limit": 2})  # without it: as before
    assert [m["code"] for m in r.json()["marks"]] == ["NR-100", "NR-200"] and r.json()["left_out_not_usable"] == 0
    r = client.get(URL, {"lat": 45.2, "lon": -110.6, "radius_km": 1, "usable_only": "perhaps"})
    assert r.status_code == 400


def test_the_kept_answer_is_sent_as_drf_encodes_it_with_the_same_headers(district, viewer, api_client_for):
    """The answer is encoded once and kept as JSON: the first and a repeated request send the same bytes
    and headers, those bytes are what DRF's JSON renderer writes for the answer, and a client asking for
    indented JSON still gets it indented."""
    import json

    from django.core.cache import cache
    from rest_framework.renderers import JSONRenderer

    cache.clear()
    client = api_client_for(viewer)
    query = {"lat": 45.2, "lon": -110.6, "radius_km": 1, "limit": 3}
    first, again = client.get(URL, query), client.get(URL, query)
    assert first.status_code == again.status_code == 200
    assert first.content == again.content == JSONRenderer().render(json.loads(first.content))
    assert first["Content-Type"] == again["Content-Type"] == "application/json"
    assert dict(first.headers) == dict(again.headers)
    assert [m["code"] for m in again.json()["marks"]] == ["NR-100", "NR-200", "NR-300"]
    indented = client.get(URL, query, HTTP_ACCEPT="application/json; indent=4")
    assert indented.content.startswith(b'{\n    "search": {') and json.loads(indented.content) == again.json()
