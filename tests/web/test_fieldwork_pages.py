"""Visit, occupation and status pages: role matrix, success with audit rows, bad input changes nothing.

Check values: slant reduction h_ARP = √(s² − r²) + Δh with s = 2.000 m, r = 0.0953 m,
ARP 0.0483 m below the slant-measure point (Δh = −0.0483 m) → 1.94943 m (antenna radius 0.0953 m / offset 0.0483 m as tabulated in a GNSS receiver manual (unnamed; secondary transcription), result recomputed by hand;
formula: secondary transcription of a GNSS data-preparation tool's documented slant option, dh + √(s² − (d/2)²)).
"""

from __future__ import annotations

from pathlib import Path

import pytest
from django.core.files.uploadedfile import SimpleUploadedFile
from django.urls import reverse

from registry.models import Attachment, AuditEvent, Mark, Occupation, Visit
from tests.web.scenario import tiny_png

ROLES = ["viewer", "technician", "manager", "signatory", "admin_user_role"]
RECORDERS = {"technician", "manager"}


def _counts():
    return (
        Visit.objects.count(),
        Occupation.objects.count(),
        Attachment.objects.count(),
        AuditEvent.objects.count(),
        Mark.objects.get(code="KV-001").version,
    )


def _stored_files(media_root) -> set[str]:
    root = Path(media_root)
    return {str(p.relative_to(root)) for p in root.rglob("*") if p.is_file()} if root.exists() else set()


@pytest.mark.django_db
@pytest.mark.parametrize("role", ROLES)
@pytest.mark.parametrize("name", ["web:visit-create", "web:occupation-create"])
def test_record_pages_role_matrix(request, kestrel, signed_in, role, name):
    response = signed_in(request.getfixturevalue(role)).get(reverse(name, kwargs={"code": "KV-001"}))
    if role in RECORDERS:
        assert response.status_code == 200
        assert b'enctype="multipart/form-data"' in response.content
    else:
        assert response.status_code == 403
        assert b"record fieldwork" in response.content


@pytest.mark.django_db
@pytest.mark.parametrize("role", ROLES)
def test_status_page_only_for_managers(request, kestrel, signed_in, role):
    response = signed_in(request.getfixturevalue(role)).get(reverse("web:mark-status", kwargs={"code": "KV-002"}))
    assert response.status_code == (200 if role == "manager" else 403)


@pytest.mark.django_db
def test_anonymous_post_is_sent_to_sign_in_and_changes_nothing(kestrel, client):
    before = _counts()
    response = client.post(reverse("web:visit-create", kwargs={"code": "KV-001"}), {"finding": "intact"})
    assert response.status_code == 302
    assert _counts() == before


@pytest.mark.django_db
def test_viewer_post_changes_nothing(kestrel, signed_in, viewer):
    before = _counts()
    response = signed_in(viewer).post(
        reverse("web:visit-create", kwargs={"code": "KV-001"}), {"visited_on": "2024-05-01", "finding": "intact"}
    )
    assert response.status_code == 403
    assert _counts() == before


@pytest.mark.django_db
def test_unknown_mark_is_404(kestrel, signed_in, technician):
    assert signed_in(technician).get("/marks/NOPE-1/visits/new/").status_code == 404


@pytest.mark.django_db
def test_visit_with_two_photos(kestrel, signed_in, technician, media_root):
    client = signed_in(technician)
    photos = [
        SimpleUploadedFile("north.png", tiny_png(), content_type="image/png"),
        SimpleUploadedFile("south.png", tiny_png() + b"\x00", content_type="image/png"),
    ]
    response = client.post(
        reverse("web:visit-create", kwargs={"code": "KV-001"}),
        {
            "visited_on": "2024-06-02",
            "finding": "damaged",
            "visitor": "Crew 3 (invented)",
            "notes": "Disk bent.",
            "photos": photos,
        },
    )
    assert response.status_code == 302, response.content.decode()[:2000]
    visit = Visit.objects.get(mark__code="KV-001", visited_on="2024-06-02")
    assert visit.finding == "damaged" and visit.created_by == technician
    attachments = list(visit.attachments.order_by("original_name"))
    assert [a.original_name for a in attachments] == ["north.png", "south.png"]
    assert all(a.kind == "photo" for a in attachments)
    actions = list(AuditEvent.objects.filter(actor=technician).values_list("action", flat=True))
    assert actions.count("visit_record") >= 2  # the scenario's visit and this one
    assert (
        AuditEvent.objects.filter(action="attachment_add", object_id__in=[str(a.pk) for a in attachments]).count() == 2
    )


@pytest.mark.django_db
@pytest.mark.parametrize(
    "data,field,code_text",
    [
        ({"visited_on": "2999-01-01", "finding": "intact"}, "visited_on", b"future"),
        ({"visited_on": "not a date", "finding": "intact"}, "visited_on", b"valid date"),
        ({"visited_on": "2024-01-01", "finding": "lost"}, "finding", b"valid choice"),
    ],
)
def test_visit_bad_input_changes_nothing(kestrel, signed_in, technician, data, field, code_text):
    before = _counts()
    response = signed_in(technician).post(reverse("web:visit-create", kwargs={"code": "KV-001"}), data)
    assert response.status_code == 400
    assert f'id="id_{field}_errors"'.encode() in response.content
    assert code_text in response.content
    assert _counts() == before


@pytest.mark.django_db
def test_visit_with_an_empty_photo_saves_nothing(kestrel, signed_in, technician, media_root):
    before, files_before = _counts(), _stored_files(media_root)
    response = signed_in(technician).post(
        reverse("web:visit-create", kwargs={"code": "KV-001"}),
        {
            "visited_on": "2024-06-02",
            "finding": "intact",
            "photos": [SimpleUploadedFile("ok.png", tiny_png()), SimpleUploadedFile("empty.png", b"")],
        },
    )
    assert response.status_code == 400
    assert b'id="id_photos_errors"' in response.content
    assert _counts() == before
    assert _stored_files(media_root) == files_before


@pytest.mark.django_db
def test_visit_with_a_too_large_photo_saves_nothing(kestrel, signed_in, technician, media_root, settings):
    settings.REGISTRY = {**settings.REGISTRY, "ATTACHMENT_MAX_BYTES": 100}
    before, files_before = _counts(), _stored_files(media_root)
    response = signed_in(technician).post(
        reverse("web:visit-create", kwargs={"code": "KV-001"}),
        {
            "visited_on": "2024-06-02",
            "finding": "intact",
            # the first file is fine and gets stored before the second is refused: it must be removed again
            "photos": [SimpleUploadedFile("small.png", b"x" * 50), SimpleUploadedFile("big.png", b"x" * 101)],
        },
    )
    assert response.status_code == 400
    assert b"larger than 100 bytes" in response.content
    assert _counts() == before
    assert _stored_files(media_root) == files_before


OCC = {
    "method": "static_gnss",
    "start_utc": "2024-05-03 14:00",
    "end_utc": "2024-05-03 20:00:30",
    "observer": "T. Field (invented)",
    "receiver": "Receiver model A",
    "antenna": "Antenna model B",
    "antenna_height_kind": "vertical",
    "antenna_height_measured_m": "1.502",
    "file_kind": "rinex",
}


@pytest.mark.django_db
def test_occupation_slant_is_reduced_and_files_attached(kestrel, signed_in, manager, media_root):
    data = {
        **OCC,
        "antenna_height_kind": "slant",
        "antenna_height_measured_m": "2.000",
        "antenna_radius_m": "0.0953",
        "arp_offset_m": "-0.0483",  # ARP 48.3 mm below the slant-measure plane: negative by our convention
        "files": [SimpleUploadedFile("kv0011240.24o", b"RINEX header line\n")],
    }
    response = signed_in(manager).post(reverse("web:occupation-create", kwargs={"code": "KV-001"}), data)
    assert response.status_code == 302, response.content.decode()[:2000]
    occ = Occupation.objects.get(mark__code="KV-001", antenna_height_kind="slant")
    # s = 2.000, r = 0.0953, Δh = 0.0483 → 1.94943 m (recomputed by hand: √(2.000² − 0.0953²) − 0.0483)
    assert occ.antenna_height_arp_m == pytest.approx(1.94943, abs=5e-6)
    assert occ.start_utc.isoformat() == "2024-05-03T14:00:00+00:00"  # typed without a zone = UTC
    assert [a.kind for a in occ.attachments.all()] == ["rinex"]
    event = AuditEvent.objects.get(action="occupation_record", object_id=str(occ.pk))
    assert event.actor == manager and event.after["antenna_radius_m"] == 0.0953
    assert event.after["arp_offset_m"] == -0.0483


@pytest.mark.django_db
@pytest.mark.parametrize(
    "changes,field,text",
    [
        ({"end_utc": "2024-05-03 13:59"}, "end_utc", b"ends before it starts"),
        (
            {
                "antenna_height_kind": "slant",
                "antenna_height_measured_m": "0.05",
                "antenna_radius_m": "0.0953",
                "arp_offset_m": "-0.03",
            },
            "antenna_height_measured_m",
            b"shorter than the antenna radius",
        ),
        ({"antenna_height_kind": "slant", "antenna_radius_m": "0.0953"}, "antenna_radius_m", b"or neither"),
        ({"start_utc": "yesterday"}, "start_utc", b"YYYY-MM-DD HH:MM"),
        ({"antenna_height_measured_m": "12"}, "antenna_height_measured_m", b"between 0 and"),
    ],
)
def test_occupation_bad_input_changes_nothing(kestrel, signed_in, technician, media_root, changes, field, text):
    before, files_before = _counts(), _stored_files(media_root)
    data = {**OCC, **changes, "files": [SimpleUploadedFile("x.24o", b"data")]}
    response = signed_in(technician).post(reverse("web:occupation-create", kwargs={"code": "KV-001"}), data)
    assert response.status_code == 400
    assert f'id="id_{field}_errors"'.encode() in response.content
    assert text in response.content
    assert _counts() == before
    assert _stored_files(media_root) == files_before


@pytest.mark.django_db
def test_status_retire_needs_a_note_then_works(kestrel, signed_in, manager):
    url = reverse("web:mark-status", kwargs={"code": "KV-002"})
    client = signed_in(manager)
    version = Mark.objects.get(code="KV-002").version
    before = AuditEvent.objects.count()
    response = client.post(url, {"version": version, "status": "retired", "note": ""})
    assert response.status_code == 400
    assert b'id="id_note_errors"' in response.content
    assert AuditEvent.objects.count() == before
    assert Mark.objects.get(code="KV-002").status == "active"

    response = client.post(url, {"version": version, "status": "destroyed", "note": "Bridge deck replaced; bolt gone."})
    assert response.status_code == 302
    mark = Mark.objects.get(code="KV-002")
    assert (mark.status, mark.version) == ("destroyed", version + 1)
    event = AuditEvent.objects.filter(action="mark_set_status", object_id=str(mark.pk)).latest("at")
    assert event.note == "Bridge deck replaced; bolt gone." and event.after["status"] == "destroyed"


@pytest.mark.django_db
def test_status_with_a_stale_version_is_refused(kestrel, signed_in, manager):
    url = reverse("web:mark-status", kwargs={"code": "KV-002"})
    version = Mark.objects.get(code="KV-002").version
    response = signed_in(manager).post(url, {"version": version - 0 + 5, "status": "retired", "note": "old form"})
    assert response.status_code == 409
    assert Mark.objects.get(code="KV-002").status == "active"
    assert f'value="{version}"'.encode() in response.content  # the form now carries the stored version


@pytest.mark.django_db
def test_mark_page_shows_actions_by_role(kestrel, signed_in, viewer, technician, manager):
    url = reverse("web:mark-detail", kwargs={"code": "KV-001"})
    page = signed_in(viewer).get(url).content
    assert b"Record visit" not in page and b"Check and publish" not in page
    page = signed_in(technician).get(url).content
    assert b"Record visit" in page and b"Propose position" in page and b"Check and publish" not in page
    page = signed_in(manager).get(url).content
    assert b"Check and publish" in page and b"Withdraw" in page and b"Change status" in page


@pytest.mark.django_db
def test_visit_form_defaults_and_one_caption_per_photo(kestrel, signed_in, technician, media_root):
    """Issue 10, item 14: date today, visitor the signed-in user, no default finding, a caption per photo."""
    import datetime as dt

    technician.first_name, technician.last_name = "Theo", "Fieldman"
    technician.save()
    client = signed_in(technician)
    url = reverse("web:visit-create", kwargs={"code": "KV-001"})
    page = client.get(url).content.decode()
    assert f'value="{dt.datetime.now(dt.UTC).date().isoformat()}"' in page
    assert 'value="Theo Fieldman"' in page
    finding = page.split('name="finding"')[1].split("</select>")[0]
    assert "selected" not in finding.replace('value="" selected', "")  # no finding is pre-chosen
    # a visit without a finding is refused with words
    response = client.post(url, {"visited_on": "2024-06-02"})
    assert response.status_code == 400 and b"Say what the crew found at the mark." in response.content
    response = client.post(
        url,
        {
            "visited_on": "2024-06-03",
            "finding": "intact",
            "photo_1": SimpleUploadedFile("n.png", tiny_png(), content_type="image/png"),
            "caption_1": "Looking north at the disk",
            "photo_2": SimpleUploadedFile("s.png", tiny_png() + b"\x01", content_type="image/png"),
            "caption_2": "Witness post from the south",
        },
    )
    assert response.status_code == 302
    visit = Visit.objects.get(mark__code="KV-001", visited_on="2024-06-03")
    captions = dict(visit.attachments.values_list("original_name", "caption"))
    assert captions == {"n.png": "Looking north at the disk", "s.png": "Witness post from the south"}
    # a caption without its photo is refused
    response = client.post(url, {"visited_on": "2024-06-04", "finding": "intact", "caption_3": "Lost picture"})
    assert response.status_code == 400 and b"A caption was given without its photo." in response.content
