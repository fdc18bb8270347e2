"""Exports carry every published frame of a mark; ``--update`` refuses rows older than the registry.

Review items M-4 (optimistic concurrency on re-import) and S-14 (one row per (mark, published
position)). The check values here are the registry's own rules, not outside measurements: a mark
starts at version 1 and each edit adds 1 (``registry.services.marks``); ``position_revision`` counts
the positions ever published in a frame. Marks are invented (a fictional district near 45.20° N,
110.60° W). Frames: EPSG:7912 ITRF2014 and EPSG:6319 NAD83(2011), both geographic 3D in the EPSG
database shipped with PROJ (checked with ``pyproj.CRS.from_epsg``).
"""

from __future__ import annotations

import csv
import io
import json

import pytest
from django.core.exceptions import ValidationError
from django.core.management import CommandError, call_command

from registry.io.export import export_marks_text
from registry.models import AuditEvent, Mark, Position, PositionState
from registry.services.imports import ImportRejected, mark_import
from registry.services.marks import mark_update
from registry.services.positions import position_propose, position_publish, position_withdraw

HEADER = "code,name,frame_epsg,epoch_yr,lat_deg,lon_deg,h_m,sigma_e_mm,sigma_n_mm,sigma_u_mm,source"
TWO_FRAMES = [
    "VF-001,Culvert east,7912,2021.5,45.201234567,-110.601234567,1502.3456,4,5,9,demo campaign 2021",
    "VF-001,Culvert east,6319,2010.0,45.201230001,-110.601219998,1503.1022,5,5,12,demo adjustment 2012",
    "VF-002,Gate pin,,,,,,,,,",
]


def text_of(*rows: str, header: str = HEADER) -> str:
    return "\n".join([header, *rows]) + "\n"


def rows_of(text: str) -> list[dict[str, str]]:
    return list(csv.DictReader(io.StringIO(text, newline="")))


def state():
    """Everything an import may touch, to show that a refused one changed nothing."""
    return (
        list(Mark.objects.order_by("code").values_list("code", "name", "version", "status")),
        list(Position.objects.order_by("id").values_list("id", "state")),
        AuditEvent.objects.count(),
    )


@pytest.fixture
def seeded(manager):
    mark_import(actor=manager, content=text_of(*TWO_FRAMES), filename="seed.csv")


@pytest.fixture
def other_manager(make_user):
    return make_user("otto", "manager")


# --- S-14: several rows per mark ---------------------------------------------------------------------


def test_one_mark_in_two_frames_is_one_mark_with_two_published_positions(manager, seeded):
    mark = Mark.objects.get(code="VF-001")
    published = mark.positions.filter(state=PositionState.PUBLISHED).order_by("frame_epsg")
    assert [p.frame_epsg for p in published] == [6319, 7912]
    assert Mark.objects.count() == 2 and mark.version == 1
    event = AuditEvent.objects.get(action="marks_import")
    assert event.after["rows"] == 3 and event.after["created"] == 2 and event.after["positions_published"] == 2


def test_export_writes_every_published_frame_with_version_and_revision(seeded, manager):
    rows = rows_of(export_marks_text(fmt="csv"))
    assert [(r["code"], r["frame_epsg"], r["version"], r["position_revision"]) for r in rows] == [
        ("VF-001", "6319", "1", "1"),
        ("VF-001", "7912", "1", "1"),
        ("VF-002", "", "1", ""),
    ]
    # A second position in EPSG:7912 supersedes the first: revision 2 there, 1 in the other frame.
    moved = TWO_FRAMES[0].replace("1502.3456", "1502.3611").replace("VF-001,Culvert east,", "VF-001,,")
    proposed = position_propose(actor=manager, mark_code="VF-001", data=_position_data(moved))
    position_publish(actor=manager, position_id=proposed.pk, note="re-observed")
    rows = rows_of(export_marks_text(fmt="csv"))
    assert [(r["frame_epsg"], r["h_m"], r["position_revision"]) for r in rows[:2]] == [
        ("6319", "1503.1022", "1"),
        ("7912", "1502.3611", "2"),
    ]
    # GeoJSON: one frame per file (issue 10, item 18)
    features = json.loads(export_marks_text(fmt="geojson", frame_epsg=6319))["features"]
    assert [(f["properties"]["code"], f["properties"]["frame_epsg"]) for f in features] == [
        ("VF-001", 6319),
        ("VF-002", None),
    ]
    features = json.loads(export_marks_text(fmt="geojson"))["features"]  # the office's export frame, 7912
    assert [(f["properties"]["code"], f["properties"]["frame_epsg"]) for f in features] == [
        ("VF-001", 7912),
        ("VF-002", None),
    ]
    assert [f["properties"]["position_revision"] for f in features] == [2, None]
    # --frame keeps one frame; the mark without a position there still has its row.
    only = rows_of(export_marks_text(fmt="csv", frame_epsg=6319))
    assert [(r["code"], r["frame_epsg"]) for r in only] == [("VF-001", "6319"), ("VF-002", "")]


def _position_data(row: str) -> dict:
    values = dict(zip(HEADER.split(","), row.split(","), strict=True))
    s = [float(values[f"sigma_{a}_mm"]) / 1000.0 for a in "enu"]
    return {
        "frame_epsg": int(values["frame_epsg"]),
        "epoch_yr": float(values["epoch_yr"]),
        "lat_deg": float(values["lat_deg"]),
        "lon_deg": float(values["lon_deg"]),
        "h_m": float(values["h_m"]),
        "cov_ee_m2": s[0] ** 2,
        "cov_nn_m2": s[1] ** 2,
        "cov_uu_m2": s[2] ** 2,
        "source": values["source"],
    }


def test_rows_of_one_mark_must_agree_on_its_fields(manager):
    renamed = TWO_FRAMES[1].replace("Culvert east", "Culvert west")
    with pytest.raises(ImportRejected) as info:
        mark_import(actor=manager, content=text_of(TWO_FRAMES[0], renamed), filename="x.csv")
    assert [(e.where, e.field, e.code) for e in info.value.errors] == [("line 3", "name", "mark_fields_differ")]
    assert Mark.objects.count() == 0


def test_a_row_may_add_a_new_frame_to_an_existing_mark(seeded, manager):
    export = export_marks_text(fmt="csv")
    itrf2020 = (
        "VF-002,Gate pin,active,1,9989,2024.0,45.211,-110.59,1499.0,3,3,8,demo campaign 2024,0"  # revision 0: new
    )
    header = "code,name,status,version,frame_epsg,epoch_yr,lat_deg,lon_deg,h_m,sigma_e_mm,sigma_n_mm,sigma_u_mm,source,position_revision"
    summary = mark_import(actor=manager, content=text_of(itrf2020, header=header), filename="add.csv", update=True)
    assert summary.updated == ["VF-002"] and summary.positions_published == 1
    assert Position.objects.get(mark__code="VF-002").frame_epsg == 9989
    assert export != export_marks_text(fmt="csv")


# --- M-4: --update is optimistic ----------------------------------------------------------------------


def test_stale_export_is_refused_and_a_fresh_one_accepted(seeded, manager, other_manager):
    old_export = export_marks_text(fmt="csv")
    mark_update(actor=other_manager, code="VF-001", expected_version=1, changes={"name": "Culvert east (reset)"})
    before = state()
    with pytest.raises(ImportRejected) as info:
        mark_import(actor=manager, content=old_export, filename="old.csv", update=True)
    assert [(e.where, e.field, e.code) for e in info.value.errors] == [
        ("line 2", "version", "stale_row"),
        ("line 3", "version", "stale_row"),
    ]
    message = info.value.errors[0].message
    assert "file version 1, registry version 2, last changed by otto at " in message and message.endswith("UTC")
    assert "Nothing was changed" in info.value.message
    assert state() == before
    assert Mark.objects.get(code="VF-001").name == "Culvert east (reset)"

    fresh = export_marks_text(fmt="csv")
    summary = mark_import(actor=manager, content=fresh, filename="fresh.csv", update=True)
    assert summary.unchanged == ["VF-001", "VF-002"] and summary.updated == []
    edited = fresh.replace("Gate pin", "Gate pin (north post)")
    summary = mark_import(actor=manager, content=edited, filename="edited.csv", update=True)
    assert summary.updated == ["VF-002"]
    assert Mark.objects.get(code="VF-002").version == 2


def test_stale_position_revision_is_refused(seeded, manager, other_manager):
    old_export = export_marks_text(fmt="csv")
    row = TWO_FRAMES[0].replace("1502.3456", "1502.3611")
    proposed = position_propose(actor=other_manager, mark_code="VF-001", data=_position_data(row))
    position_publish(actor=other_manager, position_id=proposed.pk, note="re-observed")
    before = state()
    with pytest.raises(ImportRejected) as info:
        mark_import(actor=manager, content=old_export, filename="old.csv", update=True)
    (error,) = info.value.errors
    assert (error.where, error.field, error.code) == ("line 3", "position_revision", "stale_row")
    assert (
        "EPSG:7912" in error.message and "file revision 1, registry revision 2, last published by otto" in error.message
    )
    assert state() == before


def test_withdrawn_position_makes_the_row_stale(seeded, manager, other_manager):
    old_export = export_marks_text(fmt="csv")
    published = Position.objects.get(mark__code="VF-001", frame_epsg=6319, state=PositionState.PUBLISHED)
    position_withdraw(actor=other_manager, position_id=published.pk, note="disturbed by grading")
    with pytest.raises(ImportRejected) as info:
        mark_import(actor=manager, content=old_export, filename="old.csv", update=True)
    (error,) = info.value.errors
    assert error.code == "stale_row" and "(withdrawn, none published)" in error.message
    assert "last withdrawn by otto" in error.message
    assert not Position.objects.filter(mark__code="VF-001", frame_epsg=6319, state=PositionState.PUBLISHED).exists()


def test_rows_without_version_need_overwrite_which_is_audited(seeded, manager):
    unversioned = text_of(
        TWO_FRAMES[0].replace("Culvert east", "Culvert east (painted)"),
        TWO_FRAMES[1].replace("Culvert east", "Culvert east (painted)"),
    )
    before = state()
    with pytest.raises(ImportRejected) as info:
        mark_import(actor=manager, content=unversioned, filename="hand.csv", update=True)
    assert [(e.where, e.field, e.code) for e in info.value.errors] == [
        ("line 2", "version", "version_required"),
        ("line 3", "version", "version_required"),
    ]
    assert state() == before
    with pytest.raises(ValidationError) as refused:
        mark_import(actor=manager, content=unversioned, filename="hand.csv", overwrite=True)
    assert refused.value.code == "overwrite_needs_update"

    summary = mark_import(actor=manager, content=unversioned, filename="hand.csv", update=True, overwrite=True)
    assert summary.updated == ["VF-001"] and summary.unversioned == ["VF-001"]
    event = AuditEvent.objects.filter(action="marks_import").latest("id")
    assert event.after["overwrite"] is True and event.after["unversioned"] == ["VF-001"]
    assert "without a version check (overwrite)" in event.note
    assert Mark.objects.get(code="VF-001").name == "Culvert east (painted)"


def test_overwrite_does_not_let_a_stale_version_through(seeded, manager, other_manager):
    old_export = export_marks_text(fmt="csv")
    mark_update(actor=other_manager, code="VF-002", expected_version=1, changes={"keeper": "Ashby public works"})
    with pytest.raises(ImportRejected) as info:
        mark_import(actor=manager, content=old_export, filename="old.csv", update=True, overwrite=True)
    assert [(e.where, e.code) for e in info.value.errors] == [("line 4", "stale_row")]


def test_version_cells_are_checked(manager):
    header = HEADER + ",version"
    with pytest.raises(ImportRejected) as info:
        mark_import(
            actor=manager,
            content=text_of(TWO_FRAMES[2] + ",0", TWO_FRAMES[0] + ",v1", header=header),
            filename="v.csv",
        )
    assert [(e.where, e.field, e.code) for e in info.value.errors] == [
        ("line 2", "version", "out_of_range"),
        ("line 3", "version", "not_a_number"),
    ]


def test_command_update_refuses_stale_file_and_overwrite_needs_update(seeded, manager, other_manager, tmp_path, capsys):
    path = tmp_path / "marks.csv"
    call_command("export_marks", "--output", str(path))
    mark_update(actor=other_manager, code="VF-001", expected_version=1, changes={"notes": "lid replaced"})
    with pytest.raises(CommandError, match="Nothing was changed"):
        call_command("import_marks", str(path), "--as", manager.username, "--update")
    assert "(stale_row)" in capsys.readouterr().err
    with pytest.raises(CommandError, match="--overwrite needs --update"):
        call_command("import_marks", str(path), "--as", manager.username, "--overwrite")
    call_command("export_marks", "--output", str(path))
    call_command("import_marks", str(path), "--as", manager.username, "--update")
    assert "2 unchanged" in capsys.readouterr().out


def test_command_help_shows_as_first_and_says_what_an_export_carries():
    from django.core.management import load_command_class

    parser = load_command_class("registry", "import_marks").create_parser("manage.py", "import_marks")
    text = parser.format_help()
    first_example = next(line for line in text.splitlines() if "python manage.py import_marks" in line)
    assert "--as USERNAME" in first_example
    assert "managers" in text and "publish" in text
    assert "superseded positions, occupations, visits, attachments" in text
    export_help = load_command_class("registry", "export_marks").help
    assert "all its currently published positions" in export_help and "superseded positions" in export_help


def test_page_overwrite_needs_update(client, manager, seeded):
    from django.core.files.uploadedfile import SimpleUploadedFile

    client.force_login(manager)
    upload = SimpleUploadedFile("hand.csv", text_of(TWO_FRAMES[2]).encode(), content_type="text/csv")
    response = client.post("/marks/import/", {"file": upload, "overwrite": "on"})
    assert response.status_code == 400 and "tick the option above too" in response.content.decode()
    upload = SimpleUploadedFile("hand.csv", text_of(TWO_FRAMES[2]).encode(), content_type="text/csv")
    response = client.post("/marks/import/", {"file": upload, "update": "on"})
    assert response.status_code == 400 and "this row has no version" in response.content.decode()


def test_a_file_ahead_of_the_registry_is_refused_with_its_own_words(seeded, manager):
    """A file from another registry (or an edited version cell) is not 'changed since': it says so."""
    ahead = export_marks_text(fmt="csv").replace(
        "Gate pin,,other,,,unknown,unknown,,active,,,,1,", "Gate pin,,other,,,unknown,unknown,,active,,,,7,"
    )
    with pytest.raises(ImportRejected) as info:
        mark_import(actor=manager, content=ahead, filename="other.csv", update=True)
    (error,) = info.value.errors
    assert error.code == "stale_row" and "file version 7, registry version 1" in error.message
    assert "the file is ahead of the registry" in error.message
