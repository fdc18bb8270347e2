"""Odd input that once answered 500 (issue 11, "Edges" 3): every one is a 400 (or 404/413) in the
API's error shape, and nothing is stored.

- a lone UTF-16 surrogate (``"\\ud800"``) in a mark's name (POST, PATCH) and in a visit (POST);
- JSON nested 100,000 deep, to the API and to the job form;
- ``?limit=99999999999999999999`` / ``?offset=...`` (beyond a 64-bit integer) on every list;
- unknown addresses and over-large bodies under /api/.
"""

from __future__ import annotations

import json
import re

import pytest

from registry.api.pagination import MAX_LIMIT
from registry.models import AuditEvent, Job, Mark, Visit
from registry.services.marks import mark_create
from tests.api._shape import assert_error_shape

pytestmark = pytest.mark.django_db

SURROGATE = '"\\ud800"'  # JSON text spelling a lone high surrogate (not a Unicode scalar value)
DEEP = "[" * 100_000 + "]" * 100_000
HUGE = "99999999999999999999"  # > 2**63 - 1 (9223372036854775807)


@pytest.fixture
def mark(manager):
    return mark_create(actor=manager, data={"code": "ED-01", "name": "Edge test mark (invented)"})


def _post_json(client, url, text, method="post"):
    return getattr(client, method)(url, data=text, content_type="application/json")


def _counts():
    return Mark.objects.count(), Visit.objects.count(), Job.objects.count(), AuditEvent.objects.count()


@pytest.mark.parametrize(
    ("method", "url", "body", "who"),
    [
        ("post", "/api/marks/", '{"code": "S-1", "name": @}'.replace("@", SURROGATE), "manager"),
        ("patch", "/api/marks/ED-01/", '{"version": 1, "name": @}'.replace("@", SURROGATE), "manager"),
        ("post", "/api/marks/", '{"code": "S-1", @: "x"}'.replace("@", SURROGATE), "manager"),
        (
            "post",
            "/api/marks/ED-01/visits/",
            '{"visited_on": "2024-05-01", "finding": "intact", "visitor": @, "notes": "a"}'.replace("@", SURROGATE),
            "technician",
        ),
    ],
)
def test_a_lone_surrogate_is_a_400(request, mark, api_client_for, method, url, body, who):
    before = _counts()
    r = _post_json(api_client_for(request.getfixturevalue(who)), url, body, method)
    assert_error_shape(r, 400, "invalid_text")
    assert _counts() == before


@pytest.mark.parametrize("url", ["/api/marks/", "/api/marks/ED-01/visits/", "/api/jobs/", "/api/screening/"])
def test_json_nested_100000_deep_is_a_400(mark, manager, api_client_for, url):
    before = _counts()
    r = _post_json(api_client_for(manager), url, DEEP)
    assert_error_shape(r, 400, "json_too_deep")
    assert _counts() == before


def test_json_33_deep_is_refused_and_32_accepted_by_the_parser(mark, manager, api_client_for):
    client = api_client_for(manager)
    nested32 = '{"code": "S-2", "name": "x", "notes": ' + "[" * 31 + "]" * 31 + "}"  # object + 31 arrays = 32
    r = _post_json(client, "/api/marks/", nested32)
    assert r.status_code == 400 and r.json()["error"]["code"] == "invalid"  # the service's answer, not the parser's
    nested33 = '{"code": "S-2", "name": "x", "notes": ' + "[" * 32 + "]" * 32 + "}"
    assert_error_shape(_post_json(client, "/api/marks/", nested33), 400, "json_too_deep")


JOB_FORM = {
    "code": "J-DEEP",
    "name": "Deep (invented)",
    "status": "planning",
    "frame_epsg": "6319",
    "epoch_yr": "2025.5",
    "tol_h_mm": "20",
    "tol_v_mm": "30",
    "rtk_h_fixed_mm": "8",
    "rtk_h_ppm": "1",
    "rtk_v_fixed_mm": "15",
    "rtk_v_ppm": "1",
    "rtk_combination": "additive",
    "rtk_h_meaning": "per_axis",
    "setup_h_mm": "2",
    "setup_v_mm": "3",
    "assumed_rate_mm_yr": "2",
    "max_baseline_m": "10000",
    "recovery_years": "10",
}


def test_job_form_with_deeply_nested_site_is_a_form_error(client, manager):
    client.force_login(manager)
    for site, words in (
        (DEEP, "nested more than 32 levels deep"),
        ('{"type": "Point", "name": @, "coordinates": [-110.6, 45.0]}'.replace("@", SURROGATE), "not valid Unicode"),
    ):
        r = client.post("/jobs/new/", {**JOB_FORM, "site_geojson": site})
        assert r.status_code == 400  # the form again, with the message
        assert words in r.content.decode(), re.findall(r"class=\"errorlist[^>]*>(.*?)</ul>", r.content.decode(), re.S)
        assert Job.objects.count() == 0


LISTS = [
    "/api/marks/",
    "/api/marks/ED-01/positions/",
    "/api/marks/ED-01/visits/",
    "/api/marks/ED-01/occupations/",
    "/api/marks/ED-01/attachments/",
    "/api/marks/?format=geojson",
]


@pytest.mark.parametrize("url", LISTS)
@pytest.mark.parametrize("param", ["limit", "offset"])
@pytest.mark.parametrize("value", [HUGE, "-1", "abc", "1e3"])
def test_paging_values_out_of_range_are_a_400(mark, viewer, api_client_for, url, param, value):
    sep = "&" if "?" in url else "?"
    r = api_client_for(viewer).get(f"{url}{sep}{param}={value}")
    error = assert_error_shape(r, 400, "invalid")
    assert param in error["details"]


@pytest.mark.parametrize("url", LISTS[:5])
def test_limit_is_capped_at_the_documented_maximum(mark, viewer, api_client_for, url):
    client = api_client_for(viewer)
    assert client.get(f"{url}?limit={MAX_LIMIT}").status_code == 200
    error = assert_error_shape(client.get(f"{url}?limit={MAX_LIMIT + 1}"), 400, "invalid")
    assert error["details"]["limit"][0]["code"] == "max_value"


def test_unknown_api_addresses_answer_the_error_shape(viewer, api_client_for, client):
    assert_error_shape(api_client_for(viewer).get("/api/no-such-thing/"), 404, "not_found")
    assert_error_shape(client.get("/api/no-such-thing/"), 404, "not_found")  # signed out too
    page = client.get("/no-such-page/")
    assert page.status_code in (302, 404) and not page["Content-Type"].startswith("application/json")


def test_a_body_over_the_size_limit_is_a_413(manager, api_client_for, settings):
    settings.DATA_UPLOAD_MAX_MEMORY_SIZE = 1000
    before = _counts()
    r = _post_json(api_client_for(manager), "/api/marks/", json.dumps({"code": "BIG-1", "name": "x" * 2000}))
    assert_error_shape(r, 413, "request_too_large")
    assert _counts() == before
