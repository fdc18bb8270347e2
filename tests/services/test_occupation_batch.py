"""Batch occupation results from CSV (registry.services.occupation_batch, ``manage.py import_occupations``).

Check value: the slant row (s = 2.000 m, r = 0.0953 m, Δh = −0.0483 m) reduces to h_ARP = √(s² − r²) + Δh
= 1.94943 m (antenna radius and offset as tabulated in a GNSS receiver manual, secondary transcription; the
formula as in tests/web/test_fieldwork_pages.py; recomputed by hand).
"""

from __future__ import annotations

import io
from pathlib import Path

import pytest
from django.core.exceptions import ValidationError
from django.core.management import CommandError, call_command

from registry.errors import PermissionDeniedError
from registry.models import AuditEvent, Occupation, Position
from registry.selectors.audit import audit_verify_chain
from registry.services.imports import ImportRejected
from registry.services.occupation_batch import occupation_batch_import
from tests.services._data import make_mark

pytestmark = pytest.mark.django_db

SAMPLE = Path(__file__).resolve().parents[2] / "fixtures_demo" / "sample_occupations.csv"
HEADER = "mark,method,start_utc,end_utc,antenna_height_m,frame_epsg,epoch_yr,lat_deg,lon_deg,h_m,sigma_e_mm,sigma_n_mm,sigma_u_mm\n"


@pytest.fixture
def marks(manager):
    for code in ("CRV-031", "ASH-012", "CRV-104"):
        make_mark(manager, code)


def counts():
    return (Occupation.objects.count(), Position.objects.count(), AuditEvent.objects.count())


def test_sample_file_records_occupations_and_proposes_results(technician, marks):
    summary = occupation_batch_import(actor=technician, content=SAMPLE.read_bytes(), filename=SAMPLE.name)
    assert (summary.occupations, summary.positions_proposed) == (3, 2)
    assert [r.line for r in summary.rows] == [2, 3, 4]
    rtk = Occupation.objects.get(mark__code="ASH-012")
    assert rtk.antenna_height_arp_m == pytest.approx(1.94943, abs=5e-6)
    position = rtk.result_position
    assert position.state == "proposed" and position.frame_epsg == 6319
    assert position.cov_ee_m2 == pytest.approx(0.008**2) and position.source == "Demo batch 2025-06 (invented)"
    static = Occupation.objects.get(mark__code="CRV-031").result_position
    assert static.cov_en_m2 == pytest.approx(0.05 * 0.0021 * 0.0024)  # ρ σe σn
    assert Occupation.objects.get(mark__code="CRV-104").result_position is None
    assert AuditEvent.objects.filter(action="occupation_record").count() == 3
    assert AuditEvent.objects.filter(action="position_propose").count() == 2
    report = audit_verify_chain()
    assert report.intact and report.rows == report.total == AuditEvent.objects.count(), report


def test_every_bad_row_is_listed_and_nothing_changes(technician, marks):
    text = (
        HEADER
        + "\n".join(
            [
                "CRV-031,static_gnss,2025-06-09T14:00:00Z,2025-06-09T20:00:00Z,1.5,6319,2025.4,45.1,-110.6,1400,2,2,5",  # 2 ok
                "NOPE-1,rtk,2025-06-09T14:00:00Z,2025-06-09T14:05:00Z,,,,,,,,,",  # 3 unknown mark
                "ASH-012,rtk,2025-06-09T14:00:00Z,2025-06-09T13:00:00Z,,,,,,,,,",  # 4 end before start
                "ASH-012,dance,2025-06-09T15:00:00Z,2025-06-09T15:05:00Z,,,,,,,,,",  # 5 bad method
                "CRV-104,rtk,2025-06-09T14:00:00Z,2025-06-09T14:05:00Z,,6319,2025.4,45.2,,1400,2,2,5",  # 6 incomplete
                "CRV-104,rtk,2025-06-09T16:00:00Z,2025-06-09T16:05:00Z,,6319,2025.4,95.2,-110.6,1400,2,2,5",  # 7 lat
                "CRV-104,rtk,2025-06-09T17:00:00Z,2025-06-09T17:05:00Z,,6319,2025.4,45.2,-110.6,1400,x,2,5",  # 8 number
                "CRV-031,static_gnss,2025-06-09T14:00:00Z,2025-06-09T20:00:00Z,1.5,,,,,,,,",  # 9 duplicate of 2
                "CRV-104,rtk,2025-06-09 18:00:00,2025-06-09 18:05:00,,,,,,,,,",  # 10 no zone
            ]
        )
    )
    before = counts()
    with pytest.raises(ImportRejected) as info:
        occupation_batch_import(actor=technician, content=text.encode(), filename="bad.csv")
    assert counts() == before
    got = {(e.index, e.code) for e in info.value.errors}
    assert got == {
        (3, "not_found"),
        (4, "end_before_start"),
        (5, "invalid_choice"),
        (6, "result_incomplete"),
        (7, "lat_out_of_range"),
        (8, "invalid_number"),
        (9, "duplicate_row"),
        (10, "naive_datetime"),
    }, got
    assert "in 8 row(s)" in info.value.message and "Nothing was changed" in info.value.message
    assert len(info.value.errors) == 9  # line 10: start and end both lack a zone


def test_dry_run_and_reimport(technician, marks):
    before = counts()
    summary = occupation_batch_import(actor=technician, content=SAMPLE.read_bytes(), filename="s.csv", dry_run=True)
    assert summary.occupations == 3 and counts() == before
    occupation_batch_import(actor=technician, content=SAMPLE.read_bytes(), filename="s.csv")
    with pytest.raises(ImportRejected) as info:
        occupation_batch_import(actor=technician, content=SAMPLE.read_bytes(), filename="s.csv")
    assert {e.code for e in info.value.errors} == {"already_recorded"}


@pytest.mark.parametrize(
    ("content", "code"),
    [(b"\xff\xfe\x00m", "not_utf8"), (b"", None), (b"mark,method,start_utc,end_utc\n", "no_rows")],
)
def test_unreadable_files(technician, marks, content, code):
    with pytest.raises((ValidationError, ImportRejected)) as info:
        occupation_batch_import(actor=technician, content=content, filename="x.csv")
    if code:
        assert info.value.code == code


def test_header_problems(technician, marks):
    with pytest.raises(ImportRejected) as info:
        occupation_batch_import(actor=technician, content=b"mark,method,start,end_utc,colour\n", filename="x.csv")
    assert {(e.code, e.field) for e in info.value.errors} == {
        ("unknown_column", "start"),
        ("unknown_column", "colour"),
        ("missing_column", "start_utc"),
    }


def test_viewer_is_refused(viewer, marks):
    with pytest.raises(PermissionDeniedError):
        occupation_batch_import(actor=viewer, content=SAMPLE.read_bytes(), filename="s.csv")


def test_command(technician, marks, tmp_path):
    out = io.StringIO()
    call_command("import_occupations", str(SAMPLE), "--as", technician.username, "--dry-run", stdout=out)
    assert "would record 3 occupation(s) of 3 mark(s), 2 with a result" in out.getvalue()
    assert Occupation.objects.count() == 0
    bad = tmp_path / "bad.csv"
    bad.write_text(HEADER + "NOPE-1,rtk,2025-06-09T14:00:00Z,2025-06-09T14:05:00Z,,,,,,,,,\n")
    err = io.StringIO()
    with pytest.raises(CommandError, match="Nothing was changed"):
        call_command("import_occupations", str(bad), "--as", technician.username, stderr=err)
    assert "line 2 [NOPE-1]" in err.getvalue()
    call_command("import_occupations", str(SAMPLE), "--as", technician.username, stdout=out)
    assert Occupation.objects.count() == 3


def test_preview_compares_each_result_with_the_published_position(manager, technician, marks, tmp_path):
    """Each row's result against the published position, in words (movement service, computed in the preview).

    Check value: ASH-012 is published 0.9 µdeg of latitude south of the file's result; the north difference
    is the geodesic distance between the two points on GRS80 (pyproj.Geod, a reference library), about 100 mm,
    far outside σ 8 mm + 5 mm → possible movement. CRV-031 is published 4 mm higher than its result (σU 6.3 and
    10 mm) → no movement shown. CRV-104's row has no result (nothing to compare); a mark without a published
    position gives "nothing to compare with".
    """
    from pyproj import Geod

    from tests.services._data import make_published

    make_published(
        manager,
        technician,
        "CRV-031",
        frame_epsg=6319,
        epoch_yr=2025.437,
        lat_deg=45.144193920,
        lon_deg=-110.654531070,
        h_m=1419.9611,
    )
    make_published(
        manager,
        technician,
        "ASH-012",
        frame_epsg=6319,
        epoch_yr=2025.439,
        lat_deg=45.193411030 - 9e-7,
        lon_deg=-110.612248290,
        h_m=1388.1556,
    )
    before = counts()
    summary = occupation_batch_import(actor=technician, content=SAMPLE.read_bytes(), filename="s.csv", dry_run=True)
    assert counts() == before
    checks = {r.mark: r.check for r in summary.rows}
    assert checks["CRV-104"] is None
    assert checks["CRV-031"]["verdict"] == "no_movement"
    assert checks["CRV-031"]["words"].startswith("no movement shown: d E +0.0 mm, N +0.0 mm, U -4.0 mm")
    _, _, north_m = Geod(ellps="GRS80").inv(-110.612248290, 45.193411030 - 9e-7, -110.612248290, 45.193411030)
    ash = checks["ASH-012"]
    assert ash["verdict"] == "possible_movement"
    assert ash["d_enu_mm"][1] == pytest.approx(north_m * 1000.0, abs=0.1)
    assert ash["words"].startswith("possible movement: d E +0.0 mm, N +100.0 mm")
    out = io.StringIO()
    call_command("import_occupations", str(SAMPLE), "--as", technician.username, "--dry-run", stdout=out)
    text = out.getvalue()
    assert "line 3, ASH-012: against the published position, possible movement: d E +0.0 mm, N +100.0 mm" in text
    assert "line 2, CRV-031: against the published position, no movement shown" in text
    assert counts() == before


def test_preview_says_nothing_to_compare_with(technician, marks):
    summary = occupation_batch_import(actor=technician, content=SAMPLE.read_bytes(), filename="s.csv", dry_run=True)
    checks = {r.mark: r.check for r in summary.rows}
    assert checks["CRV-031"]["words"] == "nothing to compare with" == checks["ASH-012"]["words"]
    assert (
        "nothing is published" in checks["CRV-031"]["reason"].lower()
        or "no position" in checks["CRV-031"]["reason"].lower()
    )
