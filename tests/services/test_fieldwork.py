"""Service rules for fieldwork: visits, occupations (antenna height reduction), attachments."""

from __future__ import annotations

import datetime as dt
import hashlib

import pytest
from django.core.exceptions import ValidationError
from django.core.files.base import ContentFile
from django.core.files.storage import default_storage
from django.core.files.uploadedfile import SimpleUploadedFile
from django.utils import timezone

from registry.errors import NotFound, PermissionDeniedError
from registry.models import Attachment, AuditEvent, Occupation, Visit
from registry.services.fieldwork import attachment_add, occupation_record, visit_record
from registry.services.positions import position_propose
from tests.services._data import make_mark, position_data

pytestmark = pytest.mark.django_db


def codes_of(exc: ValidationError) -> dict[str, list[str]]:
    return {field: [e.code for e in errors] for field, errors in exc.error_dict.items()}


@pytest.fixture
def mark(manager):
    return make_mark(manager)


@pytest.fixture
def media(settings, tmp_path):
    settings.MEDIA_ROOT = tmp_path
    return tmp_path


def session(**overrides):
    data = {"method": "static_gnss", "start_utc": "2024-05-01T15:00:00Z", "end_utc": "2024-05-01T19:00:00Z"}
    data.update(overrides)
    return data


# ---- visits ---------------------------------------------------------------------------------------


def test_visit_is_recorded_and_audited(mark, technician):
    visit = visit_record(
        actor=technician,
        mark_code="QR-101",
        data={"visited_on": "2024-05-01", "finding": "destroyed", "notes": "Gone under new pavement"},
    )
    assert visit.visited_on == dt.date(2024, 5, 1) and visit.finding == "destroyed"
    event = AuditEvent.objects.get(action="visit_record")
    assert event.after["visited_on"] == "2024-05-01" and event.mark_id == mark.pk
    mark.refresh_from_db()
    assert mark.status == "active"  # a destroyed report does not change the status by itself: the manager decides


@pytest.mark.parametrize(
    ("data", "field", "code"),
    [
        ({"visited_on": "2024-13-01", "finding": "intact"}, "visited_on", "invalid_date"),
        ({"finding": "intact"}, "visited_on", "required"),
        ({"visited_on": "2024-05-01", "finding": "lost"}, "finding", "invalid_choice"),
        ({"visited_on": "2024-05-01"}, "finding", "required"),
        ({"visited_on": "2024-05-01", "finding": "intact", "weather": "rain"}, "weather", "unknown_field"),
    ],
)
def test_visit_rejects_bad_input(mark, technician, data, field, code):
    with pytest.raises(ValidationError) as info:
        visit_record(actor=technician, mark_code="QR-101", data=data)
    assert code in codes_of(info.value)[field]
    assert not Visit.objects.exists()


def test_visit_cannot_be_in_the_future(mark, technician):
    tomorrow = (timezone.now() + dt.timedelta(days=2)).date().isoformat()
    with pytest.raises(ValidationError) as info:
        visit_record(actor=technician, mark_code="QR-101", data={"visited_on": tomorrow, "finding": "intact"})
    assert codes_of(info.value) == {"visited_on": ["date_in_future"]}


def test_visit_roles(mark, viewer, signatory, make_user):
    data = {"visited_on": "2024-05-01", "finding": "intact"}
    for user in (viewer, signatory):
        with pytest.raises(PermissionDeniedError):
            visit_record(actor=user, mark_code="QR-101", data=data)
    with pytest.raises(NotFound):
        visit_record(actor=make_user("nils", None), mark_code="QR-101", data=data)
    assert not Visit.objects.exists()


# ---- occupations ----------------------------------------------------------------------------------


def test_vertical_height_passes_through(mark, technician):
    occupation = occupation_record(
        actor=technician,
        mark_code="QR-101",
        data=session(antenna_height_measured_m=1.8, antenna_height_kind="vertical"),
    )
    assert occupation.antenna_height_arp_m == 1.8
    assert occupation.start_utc == dt.datetime(2024, 5, 1, 15, 0, tzinfo=dt.UTC)


@pytest.mark.parametrize(
    ("slant_m", "radius_m", "offset_m", "arp_m"),
    [
        # secondary transcription of an antenna-height calculator page (unnamed web page): s = 1.532 m, r = 0.0921 m, SHMP→ARP 0.0516 m
        # with the ARP below the rim → h_ARP = 1.47763 m.
        (1.532, 0.0921, -0.0516, 1.47763),
        # s = 2.000 m, r = 0.0953 m, offset 0.0483 m (ARP below) → 1.94943 m: antenna radius 0.0953 m / offset 0.0483 m as tabulated in a GNSS receiver manual (unnamed; secondary transcription), result recomputed by hand,
        # √(2.000² − 0.0953²) − 0.0483.
        (2.000, 0.0953, -0.0483, 1.94943),
    ],
)
def test_slant_height_is_reduced_to_the_arp(mark, technician, slant_m, radius_m, offset_m, arp_m):
    occupation = occupation_record(
        actor=technician,
        mark_code="QR-101",
        data=session(
            antenna_height_measured_m=slant_m,
            antenna_height_kind="slant",
            antenna_radius_m=radius_m,
            arp_offset_m=offset_m,
        ),
    )
    assert occupation.antenna_height_measured_m == slant_m
    assert occupation.antenna_height_arp_m == pytest.approx(arp_m, abs=5e-6)
    event = AuditEvent.objects.get(action="occupation_record")
    assert (event.after["antenna_radius_m"], event.after["arp_offset_m"]) == (radius_m, offset_m)


def test_slant_without_antenna_geometry_is_stored_unreduced(mark, technician):
    occupation = occupation_record(
        actor=technician, mark_code="QR-101", data=session(antenna_height_measured_m=1.532, antenna_height_kind="slant")
    )
    assert occupation.antenna_height_measured_m == 1.532
    assert occupation.antenna_height_arp_m is None  # never treated as vertical


@pytest.mark.parametrize(
    ("overrides", "field", "code"),
    [
        ({"end_utc": "2024-05-01T14:00:00Z"}, "end_utc", "end_before_start"),
        ({"start_utc": "2024-05-01T15:00:00"}, "start_utc", "naive_datetime"),
        ({"start_utc": "yesterday"}, "start_utc", "invalid_datetime"),
        ({"method": "dowsing"}, "method", "invalid_choice"),
        ({"antenna_height_measured_m": 12.0}, "antenna_height_measured_m", "antenna_height_out_of_range"),
        ({"antenna_height_measured_m": -0.1}, "antenna_height_measured_m", "antenna_height_out_of_range"),
        (
            {
                "antenna_height_measured_m": 0.05,
                "antenna_height_kind": "slant",
                "antenna_radius_m": 0.0921,
                "arp_offset_m": 0,
            },
            "antenna_height_measured_m",
            "slant_shorter_than_radius",
        ),
        (
            {"antenna_height_measured_m": 1.5, "antenna_height_kind": "slant", "antenna_radius_m": 0.0921},
            "antenna_radius_m",
            "slant_geometry_incomplete",
        ),
        (
            {"antenna_height_measured_m": 1.5, "antenna_radius_m": 0.0921, "arp_offset_m": 0.0},
            "antenna_radius_m",
            "slant_fields_for_vertical",
        ),
        ({"result_position_id": 987654}, "result_position_id", "position_other_mark"),
    ],
)
def test_occupation_rejects_bad_input(mark, technician, overrides, field, code):
    with pytest.raises(ValidationError) as info:
        occupation_record(actor=technician, mark_code="QR-101", data=session(**overrides))
    assert code in codes_of(info.value)[field]
    assert not Occupation.objects.exists()


def test_occupation_in_the_future_is_refused(mark, technician):
    start = timezone.now() + dt.timedelta(days=1)
    with pytest.raises(ValidationError) as info:
        occupation_record(
            actor=technician,
            mark_code="QR-101",
            data=session(start_utc=start.isoformat(), end_utc=(start + dt.timedelta(hours=1)).isoformat()),
        )
    assert codes_of(info.value) == {"start_utc": ["in_future"]}


def test_occupation_result_position_must_belong_to_the_mark(mark, manager, technician):
    make_mark(manager, code="QR-102")
    other = position_propose(actor=technician, mark_code="QR-102", data=position_data())
    with pytest.raises(ValidationError) as info:
        occupation_record(actor=technician, mark_code="QR-101", data=session(result_position_id=other.pk))
    assert codes_of(info.value) == {"result_position_id": ["position_other_mark"]}
    own = position_propose(actor=technician, mark_code="QR-101", data=position_data())
    occupation = occupation_record(actor=technician, mark_code="QR-101", data=session(result_position_id=own.pk))
    assert occupation.result_position == own


# ---- attachments ----------------------------------------------------------------------------------


def test_attachment_is_stored_with_its_sha256(mark, technician, media):
    # FIPS 180-2, Appendix B.1: SHA-256("abc") = ba7816bf 8f01cfea 414140de 5dae2223 b00361a3 96177a9c b410ff61 f20015ad.
    expected = "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
    upload = SimpleUploadedFile("site photo (north).jpg", b"abc", content_type="image/jpeg")
    attachment = attachment_add(
        actor=technician, mark_code="QR-101", file=upload, kind="photo", caption=" Looking north "
    )
    assert attachment.sha256 == expected
    assert attachment.size_bytes == 3
    assert attachment.original_name == "site photo (north).jpg"
    assert attachment.caption == "Looking north"
    assert attachment.file.name.startswith(f"marks/QR-101/ba/{expected}/")
    with default_storage.open(attachment.file.name, "rb") as fh:
        assert fh.read() == b"abc"
    assert AuditEvent.objects.get(action="attachment_add").after["sha256"] == expected


def test_large_attachment_is_hashed_in_chunks(mark, technician, media):
    payload = bytes(range(256)) * 12_000  # about 3 MB: several chunks
    attachment = attachment_add(
        actor=technician, mark_code="QR-101", file=ContentFile(payload, name="base.24o"), kind="rinex"
    )
    assert attachment.sha256 == hashlib.sha256(payload).hexdigest()  # reference: Python's hashlib
    assert attachment.size_bytes == len(payload)


@pytest.mark.parametrize(
    ("content", "kind", "field", "code"),
    [
        (b"", "photo", "file", "empty_file"),
        (b"abc", "video", "kind", "invalid_choice"),
        (None, "photo", "file", "required"),
    ],
)
def test_attachment_refusals(mark, technician, media, content, kind, field, code):
    upload = ContentFile(content, name="x.jpg") if content is not None else None
    with pytest.raises(ValidationError) as info:
        attachment_add(actor=technician, mark_code="QR-101", file=upload, kind=kind)
    assert code in codes_of(info.value)[field]
    assert not Attachment.objects.exists()
    assert not any(media.rglob("*.jpg"))


def test_attachment_link_must_belong_to_the_mark(mark, manager, technician, media):
    make_mark(manager, code="QR-102")
    other_visit = visit_record(
        actor=technician, mark_code="QR-102", data={"visited_on": "2024-05-01", "finding": "intact"}
    )
    with pytest.raises(ValidationError) as info:
        attachment_add(
            actor=technician,
            mark_code="QR-101",
            file=ContentFile(b"abc", name="a.jpg"),
            kind="photo",
            visit_id=other_visit.pk,
        )
    assert codes_of(info.value) == {"visit_id": ["visit_other_mark"]}
    with pytest.raises(ValidationError) as info:
        attachment_add(
            actor=technician, mark_code="QR-101", file=ContentFile(b"abc", name="a.jpg"), kind="photo", occupation_id=5
        )
    assert codes_of(info.value) == {"occupation_id": ["occupation_other_mark"]}
    assert not Attachment.objects.exists()
    assert not any(media.rglob("*.jpg"))


def test_attachment_needs_the_record_role(mark, viewer, media):
    with pytest.raises(PermissionDeniedError):
        attachment_add(actor=viewer, mark_code="QR-101", file=ContentFile(b"abc", name="a.jpg"), kind="photo")
    assert not any(media.rglob("*"))
