"""Importing marks: all or nothing, every bad row reported with its line (CSV) or feature index (GeoJSON).

The marks here are invented (a fictional district near 45.20° N, 110.60° W). Frames: EPSG:7912
(ITRF2014 geographic 3D) and EPSG:6319 (NAD83(2011) geographic 3D) exist in the EPSG database shipped
with PROJ 9.5.1; EPSG:4326 (WGS 84) is 2D — checked with pyproj.CRS.from_epsg.
"""

from __future__ import annotations

import json

import pytest
from django.core.management import CommandError, call_command

from registry.errors import PermissionDeniedError
from registry.models import AuditEvent, Mark, MarkStatus, Position, PositionState
from registry.services.imports import ImportRejected, mark_import

HEADER = "code,name,monument,frame_epsg,epoch_yr,lat_deg,lon_deg,h_m,sigma_e_mm,sigma_n_mm,sigma_u_mm,source"
GOOD = [
    "TST-001,Willow gate,disk_concrete,7912,2021.5,45.201234567,-110.601234567,1502.3456,4,5,9,demo campaign 2021",
    "TST-002,Creek bolt,bolt_structure,7912,2021.5,45.212345678,-110.589876543,1498.1234,3,3,7,demo campaign 2021",
    "TST-003,No position yet,pin_concrete,,,,,,,,,",
]


def csv_text(*rows: str, header: str = HEADER) -> str:
    return "\n".join([header, *rows]) + "\n"


def nothing_written():
    return Mark.objects.count() == 0 and Position.objects.count() == 0 and AuditEvent.objects.count() == 0


def codes(exc: ImportRejected) -> list[tuple[str, str]]:
    return [(e.where, e.code) for e in exc.errors]


def test_good_csv_creates_marks_positions_and_audit_rows(manager):
    summary = mark_import(actor=manager, content=csv_text(*GOOD).encode(), filename="district.csv")
    assert summary.created == ["TST-001", "TST-002", "TST-003"]
    assert summary.positions_published == 2
    p = Position.objects.get(mark__code="TST-001")
    assert p.state == PositionState.PUBLISHED
    assert p.frame_epsg == 7912 and p.epoch_yr == 2021.5
    assert p.lat_deg == 45.201234567 and p.lon_deg == -110.601234567 and p.h_m == 1502.3456
    # sigmas in mm become variances in m²: (4 mm)² = 1.6e-05 m²
    assert p.cov_ee_m2 == pytest.approx(1.6e-05, rel=1e-12) and p.cov_en_m2 == 0.0
    assert p.cov_uu_m2 == pytest.approx(8.1e-05, rel=1e-12)
    assert Mark.objects.get(code="TST-001").search_lat_deg == 45.201234567
    assert AuditEvent.objects.filter(action="mark_create").count() == 3
    assert AuditEvent.objects.filter(action="position_publish").count() == 2
    event = AuditEvent.objects.get(action="marks_import")
    assert event.actor == manager and event.object_repr == "district.csv" and event.after["created"] == 3


def test_one_bad_row_changes_nothing_and_every_bad_row_is_reported(manager):
    text = csv_text(
        GOOD[0],
        "TST-004,,disk_rock,7912,2021.5,95.0,-110.6,1500,4,4,8,x",  # line 3: latitude out of range
        GOOD[1],
        "TST-005,,granite_block,7912,2021.5,45.2,-110.6,1500,4,4,8,x",  # line 5: unknown monument type
    )
    with pytest.raises(ImportRejected) as info:
        mark_import(actor=manager, content=text, filename="bad.csv")
    assert codes(info.value) == [("line 3", "out_of_range"), ("line 5", "invalid_choice")]
    assert info.value.errors[0].field == "lat_deg" and info.value.errors[0].mark_code == "TST-004"
    assert "Nothing was changed" in info.value.message
    assert nothing_written()


def test_line_numbers_count_physical_lines_of_multiline_quoted_fields(manager):
    text = csv_text(
        'TST-001,"two-line\nname",disk_rock,,,,,,,,,',
        "TST-002,,disk_rock,7912,2021.5,45.2,-110.6,1500,4,4,,x",  # starts on line 4
    )
    with pytest.raises(ImportRejected) as info:
        mark_import(actor=manager, content=text, filename="m.csv")
    assert codes(info.value) == [("line 4", "sigmas_incomplete")]


def test_duplicate_codes_and_frames_inside_one_file(manager):
    """A mark may take one row per frame; the same frame twice, or two rows without a position, are errors."""
    text = csv_text(GOOD[0], GOOD[1], GOOD[0].replace("Willow gate", "Willow gate again"), GOOD[2], GOOD[2])
    with pytest.raises(ImportRejected) as info:
        mark_import(actor=manager, content=text, filename="dup.csv")
    assert codes(info.value) == [("line 4", "duplicate_frame"), ("line 6", "duplicate_code")]
    assert "EPSG:7912 at line 2" in info.value.errors[0].message
    assert "line 5" in info.value.errors[1].message
    assert nothing_written()


@pytest.mark.parametrize(
    ("row", "field", "code"),
    [
        ("TST-009,,disk_rock,7912,2021.5,north,-110.6,1500,4,4,8,x", "lat_deg", "not_a_number"),
        ("TST-009,,disk_rock,7912.5,2021.5,45.2,-110.6,1500,4,4,8,x", "frame_epsg", "not_a_number"),
        ("TST-009,,disk_rock,7912,2021.5,45.2,-110.6,1500,four,4,8,x", "sigma_e_mm", "not_a_number"),
        ("TST-009,,disk_rock,7912,2021.5,45.2,-110.6,nan,4,4,8,x", "h_m", "not_a_number"),
        ("tst-009,,disk_rock,,,,,,,,,", "code", "invalid_code"),
        ("TST-009,,Disk_Rock,,,,,,,,,", "monument", "invalid_choice"),
        ("TST-009,,disk_rock,7912,2021.5,45.2,-181.0,1500,4,4,8,x", "lon_deg", "out_of_range"),
        ("TST-009,,disk_rock,7912,2021.5,-90.5,-110.6,1500,4,4,8,x", "lat_deg", "out_of_range"),
        ("TST-009,,disk_rock,7912,1850.0,45.2,-110.6,1500,4,4,8,x", "epoch_yr", "out_of_range"),
        ("TST-009,,disk_rock,,2021.5,45.2,-110.6,1500,4,4,8,x", "frame_epsg", "frame_required"),
        ("TST-009,,disk_rock,4326,2021.5,45.2,-110.6,1500,4,4,8,x", "frame_epsg", "invalid_frame"),
        ("TST-009,,disk_rock,6341,2021.5,45.2,-110.6,1500,4,4,8,x", "frame_epsg", "invalid_frame"),
        ("TST-009,,disk_rock,7912,,45.2,-110.6,1500,4,4,8,x", "epoch_yr", "epoch_required"),
        ("TST-009,,disk_rock,7912,2021.5,45.2,-110.6,,4,4,8,x", "h_m", "coordinate_required"),
        ("TST-009,,disk_rock,7912,2021.5,45.2,-110.6,1500,,,,x", "sigma_e_mm", "uncertainty_required"),
        ("TST-009,,disk_rock,7912,2021.5,45.2,-110.6,1500,0,4,8,x", "sigma_e_mm", "zero_variance"),
        ("TST-009,,disk_rock,7912,2021.5,45.2,-110.6,1500,100000.001,4,8,x", "sigma_e_mm", "variance_too_large"),
        ("TST-009,,disk_rock,7912,2021.5,45.2,-110.6,1500,4,4,8,", "source", "source_required"),
    ],
)
def test_each_kind_of_bad_value_is_reported_with_field_and_code(manager, row, field, code):
    with pytest.raises(ImportRejected) as info:
        mark_import(actor=manager, content=csv_text(GOOD[0], row), filename="x.csv")
    assert [(e.where, e.field, e.code) for e in info.value.errors] == [("line 3", field, code)]
    assert nothing_written()


def test_header_problems_are_reported_before_any_row(manager):
    with pytest.raises(ImportRejected) as info:
        mark_import(
            actor=manager, content=csv_text(GOOD[0], header=HEADER.replace("lat_deg", "latitude")), filename="x.csv"
        )
    assert codes(info.value) == [("line 1", "unknown_column")]
    with pytest.raises(ImportRejected) as info:
        mark_import(actor=manager, content="", filename="x.csv")
    assert codes(info.value) == [("file", "empty_file")]
    with pytest.raises(ImportRejected) as info:
        mark_import(actor=manager, content=b"code\n\xff\xfe\n", filename="x.csv")
    assert codes(info.value) == [("file", "not_utf8")]
    assert nothing_written()


def test_wrong_field_count(manager):
    with pytest.raises(ImportRejected) as info:
        mark_import(actor=manager, content=csv_text(GOOD[0] + ",extra"), filename="x.csv")
    assert codes(info.value) == [("line 2", "wrong_field_count")]


def test_covariance_columns_and_sigma_agreement(manager):
    header = "code,frame_epsg,epoch_yr,lat_deg,lon_deg,h_m,sigma_e_mm,sigma_n_mm,sigma_u_mm,cov_ee_m2,cov_en_m2,cov_nn_m2,cov_uu_m2,source"
    ok = "TST-010,7912,2024.0,45.2,-110.6,1500,3.0,4.0,10.0,9e-06,1e-06,1.6e-05,0.0001,adj 7"
    mismatch = "TST-011,7912,2024.0,45.2,-110.6,1500,3.0,4.1,10.0,9e-06,1e-06,1.6e-05,0.0001,adj 7"
    not_pd = "TST-012,7912,2024.0,45.2,-110.6,1500,,,,9e-06,2e-05,1.6e-05,0.0001,adj 7"  # |ρ| = 2e-5/1.2e-5 > 1
    with pytest.raises(ImportRejected) as info:
        mark_import(actor=manager, content=csv_text(ok, mismatch, not_pd, header=header), filename="c.csv")
    assert [(e.where, e.field, e.code) for e in info.value.errors] == [
        ("line 3", "sigma_n_mm", "sigma_covariance_mismatch"),
        ("line 4", "cov_ee_m2", "covariance_not_positive_definite"),
    ]
    mark_import(actor=manager, content=csv_text(ok, header=header), filename="c.csv")
    p = Position.objects.get(mark__code="TST-010")
    assert (p.cov_ee_m2, p.cov_en_m2, p.cov_nn_m2, p.cov_uu_m2, p.cov_eu_m2) == (9e-06, 1e-06, 1.6e-05, 0.0001, 0.0)


def test_existing_code_refused_by_default_and_updated_with_update(manager):
    mark_import(actor=manager, content=csv_text(*GOOD), filename="a.csv")
    before = AuditEvent.objects.count()
    with pytest.raises(ImportRejected) as info:
        mark_import(actor=manager, content=csv_text(GOOD[0]), filename="a.csv")
    assert codes(info.value) == [("line 2", "code_exists")]
    assert AuditEvent.objects.count() == before

    moved = GOOD[0].replace("Willow gate", "Willow gate (reset)").replace("1502.3456", "1502.3912")
    # A hand-made file has no version column: under update it needs overwrite (tests/io/test_versions_and_frames.py).
    summary = mark_import(
        actor=manager, content=csv_text(moved, GOOD[1]), filename="b.csv", update=True, overwrite=True
    )
    assert summary.updated == ["TST-001"] and summary.unchanged == ["TST-002"]
    assert summary.positions_published == 1
    mark = Mark.objects.get(code="TST-001")
    assert mark.name == "Willow gate (reset)" and mark.version == 2
    old, new = Position.objects.filter(mark=mark).order_by("id")
    assert old.state == PositionState.SUPERSEDED and old.superseded_by == new
    assert new.state == PositionState.PUBLISHED and new.h_m == 1502.3912
    # the file carried no status column: the status stays as it was
    assert mark.status == MarkStatus.ACTIVE


def test_update_reports_service_rules_for_every_row_and_rolls_back(manager):
    """Rules only the services enforce (a destroyed mark takes no positions) are reported per row too."""
    header = HEADER + ",status"
    mark_import(
        actor=manager,
        content=csv_text(GOOD[0] + ",destroyed", GOOD[1] + ",destroyed", GOOD[2] + ",active", header=header),
        filename="a.csv",
    )
    assert Mark.objects.get(code="TST-001").status == MarkStatus.DESTROYED
    n_positions, n_events = Position.objects.count(), AuditEvent.objects.count()
    rows = [
        GOOD[2].replace("No position yet", "Renamed") + ",active",  # fine on its own
        GOOD[0].replace("1502.3456", "1502.5") + ",destroyed",
        GOOD[1].replace("1498.1234", "1498.2") + ",destroyed",
    ]
    with pytest.raises(ImportRejected) as info:
        mark_import(
            actor=manager, content=csv_text(*rows, header=header), filename="b.csv", update=True, overwrite=True
        )
    assert codes(info.value) == [("line 3", "mark_destroyed"), ("line 4", "mark_destroyed")]
    assert Mark.objects.get(code="TST-003").name == "No position yet"  # the good row was rolled back
    assert (Position.objects.count(), AuditEvent.objects.count()) == (n_positions, n_events)


def test_dry_run_changes_nothing(manager):
    summary = mark_import(actor=manager, content=csv_text(*GOOD), filename="a.csv", dry_run=True)
    assert summary.dry_run and summary.created == ["TST-001", "TST-002", "TST-003"]
    assert nothing_written()


def test_only_managers_import(technician, viewer):
    for user in (technician, viewer):
        with pytest.raises(PermissionDeniedError):
            mark_import(actor=user, content=csv_text(*GOOD), filename="a.csv")
    assert nothing_written()


def feature(code, coords=None, **props):
    geometry = None if coords is None else {"type": "Point", "coordinates": coords}
    return {"type": "Feature", "geometry": geometry, "properties": {"code": code, **props}}


POS = {"frame_epsg": 6319, "epoch_yr": 2010.0, "sigma_e_mm": 5, "sigma_n_mm": 5, "sigma_u_mm": 12, "source": "demo adj"}


def test_geojson_import_and_feature_index_errors(manager):
    good = [
        feature("GJ-001", [-110.6, 45.2, 1500.25], monument="deep_rod", **POS),
        feature("GJ-002", [-110.61, 45.21], h_m=1490.5, **POS),  # 2D coordinates + h_m property
        feature("GJ-003", None, name="no position"),
    ]
    mark_import(
        actor=manager, content=json.dumps({"type": "FeatureCollection", "features": good}), filename="g.geojson"
    )
    assert Position.objects.get(mark__code="GJ-002").h_m == 1490.5
    assert Position.objects.get(mark__code="GJ-001").frame_epsg == 6319

    bad = [
        feature("GJ-010", [-110.6, 45.2, 1500.0], **POS),
        feature("GJ-011", [-110.6, 95.0, 1500.0], **POS),  # [1] latitude out of range
        feature("GJ-012", None, **POS),  # [2] position properties without a geometry
        {"type": "Feature", "geometry": {"type": "LineString", "coordinates": []}, "properties": {"code": "GJ-013"}},
        feature("GJ-014", [-110.6, 45.2, 1500.0], colour="red", **POS),  # [4] unknown property
        feature("GJ-015", [-110.6, 45.2, 1500.0], **{**POS, "frame_epsg": None}),  # [5] missing frame
        feature("GJ-016", [-110.6, 45.2], **POS),  # [6] no height
        feature("GJ-010", [-110.6, 45.2, 1500.0], **POS),  # [7] same mark and frame as [0]
        feature("GJ-017", ["-110.6", 45.2, 1500.0], **POS),  # [8] text coordinate
    ]
    with pytest.raises(ImportRejected) as info:
        mark_import(
            actor=manager, content=json.dumps({"type": "FeatureCollection", "features": bad}), filename="g.json"
        )
    assert codes(info.value) == [
        ("features[1]", "out_of_range"),
        ("features[2]", "geometry_required"),
        ("features[3]", "not_a_point"),
        ("features[4]", "unknown_property"),
        ("features[5]", "frame_required"),
        ("features[6]", "coordinate_required"),
        ("features[7]", "duplicate_frame"),
        ("features[8]", "not_a_number"),
    ]
    assert Mark.objects.count() == 3


def test_geojson_file_level_errors(manager):
    for text, code in [
        ("{", "malformed_json"),
        ('{"type": "Feature"}', "not_feature_collection"),
        ("[NaN]", "malformed_json"),
    ]:
        with pytest.raises(ImportRejected) as info:
            mark_import(actor=manager, content=text, filename="g.geojson")
        assert codes(info.value) == [("file", code)]


def test_command_reports_every_bad_row_and_exits_non_zero(manager, technician, tmp_path, capsys):
    path = tmp_path / "marks.csv"
    path.write_text(csv_text(GOOD[0], "TST-004,,disk_rock,7912,2021.5,95.0,-110.6,1500,4,4,8,x", GOOD[0]))
    with pytest.raises(CommandError, match="Nothing was changed"):
        call_command("import_marks", str(path), "--as", manager.username)
    err = capsys.readouterr().err
    assert "marks.csv: line 3 [TST-004]: lat_deg: latitude 95.0 is outside -90 … 90 (out_of_range)" in err
    assert "marks.csv: line 4 [TST-001]: frame_epsg: mark TST-001 already has a position in EPSG:7912 at line 2" in err
    assert nothing_written()

    with pytest.raises(CommandError, match="manager role"):
        call_command("import_marks", str(path), "--as", technician.username)
    with pytest.raises(CommandError, match="no user named"):
        call_command("import_marks", str(path), "--as", "nobody")

    path.write_text(csv_text(*GOOD))
    call_command("import_marks", str(path), "--as", manager.username, "--dry-run")
    assert "Dry run" in capsys.readouterr().out and nothing_written()
    call_command("import_marks", str(path), "--as", manager.username)
    assert "3 created" in capsys.readouterr().out
    assert Mark.objects.count() == 3

    other = tmp_path / "marks.txt"
    other.write_text(csv_text(*GOOD))
    with pytest.raises(CommandError, match="Cannot tell the format"):
        call_command("import_marks", str(other), "--as", manager.username)


# --- The page ----------------------------------------------------------------------------------------


def upload(client, text, name="marks.csv", **extra):
    from django.core.files.uploadedfile import SimpleUploadedFile

    data = {"file": SimpleUploadedFile(name, text.encode(), content_type="text/csv"), **extra}
    return client.post("/marks/import/", data)


def test_page_refuses_technician_and_anonymous(client, technician):
    response = client.get("/marks/import/")
    assert response.status_code == 302 and "/signin/" in response["Location"]
    client.force_login(technician)
    assert client.get("/marks/import/").status_code == 403
    assert upload(client, csv_text(*GOOD)).status_code == 403
    assert nothing_written()


def test_page_lists_every_bad_row_and_changes_nothing(client, manager):
    client.force_login(manager)
    page = client.get("/marks/import/")
    assert page.status_code == 200 and b"Import marks" in page.content
    text = csv_text(GOOD[0], "TST-004,,disk_rock,7912,2021.5,95.0,-110.6,1500,4,4,8,x", GOOD[1], GOOD[1])
    response = upload(client, text)
    assert response.status_code == 400
    body = response.content.decode()
    assert "Refused — nothing was changed" in body
    assert "line 3" in body and "latitude 95.0 is outside" in body
    assert "line 5" in body and "a mark takes at most one position per frame in a file" in body
    assert "duplicate_frame" not in body  # codes stay in the API and the command output (issue 10, item 9)
    assert nothing_written()


def test_page_success_summary(client, manager):
    client.force_login(manager)
    response = upload(client, csv_text(*GOOD), dry_run="on")
    assert response.status_code == 200 and "Check passed — nothing was changed" in response.content.decode()
    assert nothing_written()
    response = upload(client, csv_text(*GOOD))
    body = response.content.decode()
    assert response.status_code == 200 and "Imported" in body
    assert 'href="/marks/TST-001/"' in body
    assert Mark.objects.count() == 3
    assert AuditEvent.objects.filter(action="marks_import", actor=manager).count() == 1


# --- The sample files in fixtures_demo/ (the README points to them) ----------------------------------


def test_sample_files_behave_as_documented(manager):
    from django.conf import settings

    folder = settings.BASE_DIR / "fixtures_demo"
    ok = mark_import(actor=manager, content=(folder / "sample_marks.csv").read_bytes(), filename="sample_marks.csv")
    assert ok.created == ["SMP-001", "SMP-002", "SMP-003", "SMP-004"] and ok.positions_published == 3
    gj = (folder / "sample_marks.geojson").read_bytes()
    assert mark_import(actor=manager, content=gj, filename="sample_marks.geojson").positions_published == 2
    with pytest.raises(ImportRejected) as info:
        mark_import(
            actor=manager,
            content=(folder / "sample_marks_with_errors.csv").read_bytes(),
            filename="sample_marks_with_errors.csv",
        )
    assert [(e.where, e.field, e.code) for e in info.value.errors] == [
        ("line 3", "lat_deg", "dms_without_hemisphere"),
        ("line 4", "frame_epsg", "frame_required"),
        ("line 5", "frame_epsg", "invalid_frame"),
        ("line 6", "frame_epsg", "duplicate_frame"),
        ("line 7", "monument", "invalid_choice"),
        ("line 7", "lon_deg", "out_of_range"),
        ("line 7", "sigma_e_mm", "sigmas_incomplete"),
    ]
    assert not Mark.objects.filter(code="SMP-101").exists()


def test_dms_with_the_hemisphere_is_accepted(manager):
    """Issue 10, item 15: D M S as on the forms; the value is that of registry.geodesy.dms.parse_angle,
    checked here against the arithmetic d + m/60 + s/3600 (the definition of sexagesimal degrees)."""
    text = csv_text("TST-010,DMS row,disk_rock,7912,2021.5,45 12 03.25 N,110°36′12.5″W,1502.3456,4,5,9,demo (invented)")
    mark_import(actor=manager, content=text, filename="marks.csv")
    p = Position.objects.get(mark__code="TST-010")
    assert p.lat_deg == pytest.approx(45 + 12 / 60 + 3.25 / 3600, abs=1e-12)
    assert p.lon_deg == pytest.approx(-(110 + 36 / 60 + 12.5 / 3600), abs=1e-12)


def test_dms_errors_are_row_errors(manager):
    text = csv_text(
        "TST-011,No letter,disk_rock,7912,2021.5,45 12 03.25,-110.6,1500,4,5,9,x",
        "TST-012,Wrong letter,disk_rock,7912,2021.5,45 12 03.25 E,-110.6,1500,4,5,9,x",
        "TST-013,Seconds,disk_rock,7912,2021.5,45 12 61 N,-110.6,1500,4,5,9,x",
    )
    with pytest.raises(ImportRejected) as info:
        mark_import(actor=manager, content=text, filename="marks.csv")
    assert [(e.where, e.field, e.code) for e in info.value.errors] == [
        ("line 2", "lat_deg", "dms_without_hemisphere"),
        ("line 3", "lat_deg", "not_an_angle"),
        ("line 4", "lat_deg", "not_an_angle"),
    ]
    assert nothing_written()


def test_page_keeps_the_checked_file_for_the_import(client, manager, make_user, settings, tmp_path):
    """Issue 10, item 15: after a dry run the page imports the checked file without choosing it again."""
    import re

    settings.DATA_DIR = tmp_path
    client.force_login(manager)
    response = upload(client, csv_text(*GOOD), dry_run="on", update="on")
    body = response.content.decode()
    assert "Check passed — nothing was changed" in body and "Import this checked file" in body
    reference = re.search(r'name="checked" value="([^"]+)"', body).group(1)
    assert nothing_written() and len(list((tmp_path / "import-checks").iterdir())) == 1
    # another manager cannot use my reference
    other = make_user("olga", "manager")
    client.force_login(other)
    response = client.post("/marks/import/", {"checked": reference})
    assert response.status_code == 400 and "not known" in response.content.decode() and nothing_written()
    # a tampered reference is refused
    client.force_login(manager)
    response = client.post("/marks/import/", {"checked": reference[:-2] + "xx"})
    assert response.status_code == 400 and nothing_written()
    # the import itself
    response = client.post("/marks/import/", {"checked": reference})
    assert response.status_code == 200 and "Imported" in response.content.decode()
    assert Mark.objects.count() == 3
    assert list((tmp_path / "import-checks").iterdir()) == []  # used once
    response = client.post("/marks/import/", {"checked": reference})
    assert response.status_code == 400 and Mark.objects.count() == 3
