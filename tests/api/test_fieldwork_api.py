"""Visits, occupations and attachments API: role matrix, success with audit rows, errors in the one shape.

Check values: SHA-256 of b"abc" = ba7816bf...f20015ad (FIPS 180-2, Appendix B.1 example);
slant reduction s = 2.000 m, r = 0.0953 m, ARP 0.0483 m below (Δh = −0.0483) → 1.94943 m
(antenna radius/offset as tabulated in a GNSS receiver manual, unnamed, secondary transcription;
result recomputed by hand, √(2.000² − 0.0953²) − 0.0483).
"""

from __future__ import annotations

import hashlib

import pytest
from django.core.files.uploadedfile import SimpleUploadedFile

from registry.models import Attachment, AuditEvent, Occupation, Visit
from registry.services.marks import mark_create
from tests.api._shape import assert_error_shape

pytestmark = pytest.mark.django_db
ROLES = ["viewer", "technician", "manager", "signatory", "admin_user_role"]
WRITERS = {"technician", "manager"}
SHA256_ABC = "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"  # FIPS 180-2 App. B.1


@pytest.fixture
def mark(manager, settings, tmp_path):
    settings.MEDIA_ROOT = tmp_path / "media"
    return mark_create(actor=manager, data={"code": "FW-01", "name": "Fieldwork test mark (invented)"})


def _state():
    return (Visit.objects.count(), Occupation.objects.count(), Attachment.objects.count(), AuditEvent.objects.count())


VISIT = {"visited_on": "2024-05-01", "finding": "intact", "visitor": "Crew 2 (invented)", "notes": "Clean."}
OCC = {
    "method": "static_gnss",
    "start_utc": "2024-05-01T14:00:00Z",
    "end_utc": "2024-05-01T20:00:00Z",
    "antenna_height_measured_m": 2.0,
    "antenna_height_kind": "slant",
    "antenna_radius_m": 0.0953,
    "arp_offset_m": -0.0483,
}


@pytest.mark.parametrize("role", ROLES)
@pytest.mark.parametrize("kind", ["visits", "occupations", "attachments"])
def test_every_role_reads(request, mark, api_client_for, role, kind):
    response = api_client_for(request.getfixturevalue(role)).get(f"/api/marks/FW-01/{kind}/")
    assert response.status_code == 200
    assert response.json()["count"] == 0


@pytest.mark.parametrize("role", ROLES)
def test_write_role_matrix(request, mark, api_client_for, role):
    client = api_client_for(request.getfixturevalue(role))
    before = _state()
    r1 = client.post("/api/marks/FW-01/visits/", VISIT, format="json")
    r2 = client.post("/api/marks/FW-01/occupations/", OCC, format="json")
    r3 = client.post(
        "/api/marks/FW-01/attachments/",
        {"file": SimpleUploadedFile("a.txt", b"abc"), "kind": "other"},
        format="multipart",
    )
    if role in WRITERS:
        assert (r1.status_code, r2.status_code, r3.status_code) == (201, 201, 201)
    else:
        for r in (r1, r2, r3):
            assert_error_shape(r, 403, "permission_denied")
        assert _state() == before


def test_anonymous_gets_401(mark, api_client_for):
    assert_error_shape(api_client_for(None).get("/api/marks/FW-01/visits/"), 401, "not_authenticated")


def test_unknown_mark_is_404(mark, api_client_for, technician):
    assert_error_shape(api_client_for(technician).get("/api/marks/NOPE/visits/"), 404, "not_found")
    assert_error_shape(
        api_client_for(technician).post("/api/marks/NOPE/visits/", VISIT, format="json"), 404, "not_found"
    )


def test_visit_record_and_list(mark, api_client_for, technician):
    client = api_client_for(technician)
    response = client.post("/api/marks/FW-01/visits/", VISIT, format="json")
    assert response.status_code == 201
    body = response.json()
    assert body["mark"] == "FW-01" and body["finding"] == "intact" and body["created_by"] == "theo"
    assert AuditEvent.objects.filter(action="visit_record", object_id=str(body["id"]), actor=technician).exists()
    listed = client.get("/api/marks/FW-01/visits/").json()
    assert [v["id"] for v in listed["results"]] == [body["id"]]


def test_occupation_slant_reduced(mark, api_client_for, technician):
    response = api_client_for(technician).post("/api/marks/FW-01/occupations/", OCC, format="json")
    assert response.status_code == 201, response.content
    body = response.json()
    assert body["antenna_height_arp_m"] == pytest.approx(1.949, abs=0.0005)  # rounded to mm in the API
    occ = Occupation.objects.get(pk=body["id"])
    assert occ.antenna_height_arp_m == pytest.approx(1.94943, abs=5e-6)  # recomputed by hand
    assert AuditEvent.objects.filter(action="occupation_record", object_id=str(occ.pk)).exists()


@pytest.mark.parametrize(
    "changes,field,code",
    [
        ({"end_utc": "2024-05-01T13:00:00Z"}, "end_utc", "end_before_start"),
        ({"antenna_height_measured_m": 0.05}, "antenna_height_measured_m", "slant_shorter_than_radius"),
        ({"start_utc": "2024-05-01T14:00:00"}, "start_utc", "naive_datetime"),
        ({"method": "telepathy"}, "method", "invalid_choice"),
        ({"colour": "red"}, "colour", "unknown_field"),
    ],
)
def test_occupation_bad_input_changes_nothing(mark, api_client_for, technician, changes, field, code):
    before = _state()
    response = api_client_for(technician).post("/api/marks/FW-01/occupations/", {**OCC, **changes}, format="json")
    error = assert_error_shape(response, 400, "invalid")
    assert error["details"][field][0]["code"] == code
    assert _state() == before


def test_attachment_upload_list_and_download(mark, api_client_for, technician, client, settings):
    settings.DEBUG = True  # the development media view serves the download
    api = api_client_for(technician)
    visit_id = api.post("/api/marks/FW-01/visits/", VISIT, format="json").json()["id"]
    response = api.post(
        "/api/marks/FW-01/attachments/",
        {"file": SimpleUploadedFile("abc.txt", b"abc"), "kind": "photo", "caption": "test", "visit_id": visit_id},
        format="multipart",
    )
    assert response.status_code == 201, response.content
    body = response.json()
    assert body["sha256"] == SHA256_ABC == hashlib.sha256(b"abc").hexdigest()
    assert (body["size_bytes"], body["visit"], body["kind"]) == (3, visit_id, "photo")
    assert body["download_url"].startswith("http://testserver/media/marks/FW-01/")
    assert AuditEvent.objects.filter(action="attachment_add", object_id=str(body["id"])).exists()
    listed = api.get("/api/marks/FW-01/attachments/").json()["results"]
    assert [a["sha256"] for a in listed] == [SHA256_ABC]
    client.force_login(technician)
    download = client.get(body["download_url"].replace("http://testserver", ""))
    assert download.status_code == 200
    assert b"".join(download.streaming_content) == b"abc"


@pytest.mark.parametrize(
    "payload,field,code",
    [
        ({"file": SimpleUploadedFile("empty.bin", b""), "kind": "other"}, "file", "empty_file"),
        ({"file": SimpleUploadedFile("big.bin", b"x" * 101), "kind": "other"}, "file", "file_too_large"),
        ({"file": SimpleUploadedFile("a.bin", b"abc"), "kind": "movie"}, "kind", "invalid_choice"),
        ({"kind": "other"}, "file", "required"),
        (
            {"file": SimpleUploadedFile("a.bin", b"abc"), "kind": "other", "visit_id": "999999"},
            "visit_id",
            "visit_other_mark",
        ),
    ],
)
def test_attachment_bad_input_changes_nothing(mark, api_client_for, technician, settings, payload, field, code):
    settings.REGISTRY = {**settings.REGISTRY, "ATTACHMENT_MAX_BYTES": 100}
    before = _state()
    stored_before = sorted(p.name for p in (settings.MEDIA_ROOT).rglob("*")) if settings.MEDIA_ROOT.exists() else []
    response = api_client_for(technician).post("/api/marks/FW-01/attachments/", payload, format="multipart")
    error = assert_error_shape(response, 400, "invalid")
    assert error["details"][field][0]["code"] == code
    assert _state() == before
    stored_after = sorted(p.name for p in (settings.MEDIA_ROOT).rglob("*")) if settings.MEDIA_ROOT.exists() else []
    assert stored_after == stored_before


def test_schema_lists_fieldwork_paths_without_warnings():
    from drf_spectacular.drainage import GENERATOR_STATS
    from drf_spectacular.generators import SchemaGenerator
    from drf_spectacular.validation import validate_schema

    GENERATOR_STATS.reset()
    schema = SchemaGenerator().get_schema(request=None, public=True)
    validate_schema(schema)
    for path in ("/api/marks/{code}/visits/", "/api/marks/{code}/occupations/", "/api/marks/{code}/attachments/"):
        assert set(schema["paths"][path]) >= {"get", "post"}, path
    assert "multipart/form-data" in schema["paths"]["/api/marks/{code}/attachments/"]["post"]["requestBody"]["content"]
    ours = [
        m
        for m in [*GENERATOR_STATS._warn_cache, *GENERATOR_STATS._error_cache]
        if "fieldwork" in m or any(v in m for v in ("MarkVisitsView", "MarkOccupationsView", "MarkAttachmentsView"))
    ]
    assert ours == []
