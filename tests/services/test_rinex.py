"""Recording an occupation from a RINEX file (registry.services.rinex) and ``manage.py import_rinex``."""

from __future__ import annotations

import datetime as dt
import hashlib
import io
import json
from pathlib import Path

import pytest
from django.core.exceptions import ValidationError
from django.core.management import CommandError, call_command

from fixtures_demo.rinex.write_headers import rec, v2_header
from registry.errors import PermissionDeniedError
from registry.models import Attachment, AuditEvent, Occupation
from registry.services.positions import position_propose, position_publish
from registry.services.rinex import occupation_from_rinex
from tests.services._data import NAD83_2011_EPSG, make_mark, position_data

pytestmark = pytest.mark.django_db

DEMO = Path(__file__).resolve().parents[2] / "fixtures_demo" / "rinex"
# The demo district's NAD83(2011) positions of the marks in the demo RINEX files (fixtures_demo/district.py).
DEMO_MARKS = {
    "ASH-012": (45.19341101739792, -110.61224830391963, 1388.149),
    "CRV-031": (45.14419391136913, -110.6545310785781, 1419.9563),
}


@pytest.fixture
def media(settings, tmp_path):
    settings.MEDIA_ROOT = tmp_path
    return tmp_path


@pytest.fixture
def demo_mark(manager, technician):
    def make(code: str, lat_lon_h=None):
        lat, lon, h = lat_lon_h or DEMO_MARKS[code]
        make_mark(manager, code)
        p = position_propose(
            actor=technician,
            mark_code=code,
            data=position_data(frame_epsg=NAD83_2011_EPSG, epoch_yr=2010.0, lat_deg=lat, lon_deg=lon, h_m=h),
        )
        position_publish(actor=manager, position_id=p.pk)
        return code

    return make


def state():
    return (Occupation.objects.count(), Attachment.objects.count(), AuditEvent.objects.count())


def test_rinex_211_fills_and_records_an_occupation(media, technician, demo_mark):
    demo_mark("ASH-012")
    content = (DEMO / "ash012_2024.24o").read_bytes()
    occupation, prefill = occupation_from_rinex(
        actor=technician, mark_code="ASH-012", content=content, filename="ash012_2024.24o"
    )
    occupation.refresh_from_db()
    assert occupation.method == "static_gnss"
    assert occupation.start_utc == dt.datetime(2024, 3, 18, 15, 3, 42, tzinfo=dt.UTC)
    assert occupation.end_utc == dt.datetime(2024, 3, 18, 17, 19, 27, tzinfo=dt.UTC)
    assert occupation.receiver == "OFFICE GNSS RX2 (s/n RX-0451, firmware 4.10)"
    assert occupation.antenna == "OFFICE GEOD ANT1 (s/n AN-0188)"
    assert occupation.antenna_height_measured_m == occupation.antenna_height_arp_m == 1.523
    assert occupation.observer == "L. Marchetti"
    assert "Interval 15 s" in occupation.notes and "L1 L2 C1 P2 S1 S2" in occupation.notes
    attachment = Attachment.objects.get(occupation=occupation)
    assert attachment.kind == "rinex"
    assert attachment.sha256 == hashlib.sha256(content).hexdigest()
    assert attachment.file.read() == content
    assert prefill.offset_m < 1.0  # the demo file's approximate position is 0.5 m off the mark
    event = AuditEvent.objects.get(action="occupation_from_rinex")
    assert event.after["sha256"] == attachment.sha256 and event.after["header"]["rinex_version"] == "2.11"


def test_gzip_305_file(media, technician, demo_mark):
    demo_mark("CRV-031")
    occupation, prefill = occupation_from_rinex(
        actor=technician,
        mark_code="CRV-031",
        content=(DEMO / "crv031_2025.rnx.gz").read_bytes(),
        filename="crv031_2025.rnx.gz",
        data={"notes": "Tripod over the disk."},
    )
    assert prefill.header.compressed == "gzip"
    assert occupation.notes == "Tripod over the disk."
    assert occupation.antenna_height_arp_m == 1.812


def bad(technician, code, content, name="x.rnx"):
    before = state()
    with pytest.raises(ValidationError) as info:
        occupation_from_rinex(actor=technician, mark_code=code, content=content, filename=name)
    assert state() == before
    return [e.code for e in info.value.error_dict["file"]]


def test_file_from_another_mark_is_refused(media, technician, demo_mark, settings):
    demo_mark("CRV-031")
    # ash012's approximate position is about 8 km from CRV-031
    assert bad(technician, "CRV-031", (DEMO / "ash012_2024.24o").read_bytes()) == ["rinex_far_from_mark"]
    settings.REGISTRY = {**settings.REGISTRY, "RINEX_MAX_OFFSET_M": 0.1}
    demo_mark("ASH-012")
    assert bad(technician, "ASH-012", (DEMO / "ash012_2024.24o").read_bytes()) == ["rinex_far_from_mark"]
    assert not list(Path(media).rglob("*.24o"))


def test_hatanaka_truncated_not_rinex_and_lying_are_refused(media, technician, demo_mark):
    demo_mark("CRV-031")
    assert bad(technician, "CRV-031", (DEMO / "crv031_2025.crx").read_bytes()) == ["rinex_hatanaka"]
    assert bad(technician, "CRV-031", b"hello") == ["rinex_not_rinex"]
    assert bad(technician, "CRV-031", "\n".join(v2_header()[:8]).encode()) == ["rinex_truncated"]
    lines = [
        rec("  2024     3    18    12     0    0.0000000     GPS", "TIME OF LAST OBS")
        if line[60:].strip() == "TIME OF LAST OBS"
        else line
        for line in v2_header()
    ]
    assert bad(technician, "CRV-031", "\n".join(lines).encode()) == ["rinex_end_before_start"]
    assert bad(technician, "CRV-031", b"") == ["empty_file"]


def test_same_file_twice_is_refused(media, technician, demo_mark):
    demo_mark("ASH-012")
    content = (DEMO / "ash012_2024.24o").read_bytes()
    occupation_from_rinex(actor=technician, mark_code="ASH-012", content=content, filename="a.24o")
    assert bad(technician, "ASH-012", content) == ["rinex_already_attached"]


def test_dry_run_changes_nothing(media, technician, demo_mark):
    demo_mark("ASH-012")
    before = state()
    occupation, prefill = occupation_from_rinex(
        actor=technician,
        mark_code="ASH-012",
        content=(DEMO / "ash012_2024.24o").read_bytes(),
        filename="a.24o",
        dry_run=True,
    )
    assert occupation is None and prefill.data["receiver"].startswith("OFFICE GNSS RX2")
    assert state() == before
    assert not [p for p in Path(media).rglob("*") if p.is_file()]


def test_viewer_cannot_import(media, viewer, demo_mark):
    demo_mark("ASH-012")
    with pytest.raises(PermissionDeniedError):
        occupation_from_rinex(
            actor=viewer, mark_code="ASH-012", content=(DEMO / "ash012_2024.24o").read_bytes(), filename="a"
        )


def test_mark_without_position_records_with_a_warning(media, technician, manager):
    make_mark(manager, "CRV-104")
    _occ, prefill = occupation_from_rinex(
        actor=technician, mark_code="CRV-104", content=(DEMO / "crv104_2026.rnx").read_bytes(), filename="c.rnx"
    )
    assert prefill.offset_m is None
    assert any("no published position" in w for w in prefill.warnings)


def test_command_json_and_dry_run(media, technician, demo_mark):
    demo_mark("CRV-031")
    out = io.StringIO()
    call_command(
        "import_rinex",
        str(DEMO / "crv031_2025.rnx.gz"),
        "--mark",
        "CRV-031",
        "--as",
        technician.username,
        "--dry-run",
        "--json",
        stdout=out,
    )
    doc = json.loads(out.getvalue())
    assert doc["recorded"] is False and doc["header"]["systems"] == ["GPS", "GLONASS", "Galileo"]
    assert doc["occupation"]["start_utc"] == "2025-06-09T13:59:42Z"
    assert Occupation.objects.count() == 0
    out = io.StringIO()
    call_command(
        "import_rinex", str(DEMO / "crv031_2025.rnx.gz"), "--mark", "CRV-031", "--as", technician.username, stdout=out
    )
    assert "Occupation recorded for CRV-031" in out.getvalue()
    assert Occupation.objects.count() == 1
    with pytest.raises(CommandError, match="Hatanaka"):
        call_command("import_rinex", str(DEMO / "crv031_2025.crx"), "--mark", "CRV-031", "--as", technician.username)
