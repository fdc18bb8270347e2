"""Import files with the earlier column names (accepted for one more release), export with the new ones only,
and suspect marks in files. Marks are invented (a fictional district near 45.20° N, 110.60° W)."""

from __future__ import annotations

import csv
import io
import json

import pytest
from django.utils import timezone

from registry.io.common import CSV_COLUMNS
from registry.io.export import export_marks_text
from registry.models import AuditEvent, Mark
from registry.services.fieldwork import visit_record
from registry.services.imports import ImportRejected, mark_import
from tests.services._data import make_mark, make_published

pytestmark = pytest.mark.django_db

OLD_HEADER = "code,name,monument_type,setting,stamping,to_reach,custodian,frame_epsg,epoch_yr,lat_deg,lon_deg,h_m,sigma_e_mm,sigma_n_mm,sigma_u_mm,source"
OLD_ROW = (
    'OLD-001,Willow gate,disk_concrete,bronze disk in a concrete post,OLD-001 2021,"From the gate, 40 m north.",'
    "Willow Township,7912,2021.5,45.201234567,-110.601234567,1502.3456,4,5,9,campaign 2021 (invented)"
)
EARLIER_NAMES = {
    "monument_type": "monument",
    "setting": "monument_detail",
    "stamping": "marking",
    "to_reach": "access_directions",
    "custodian": "keeper",
}


def test_a_csv_with_the_earlier_column_names_is_read_as_the_new_ones(manager):
    mark_import(actor=manager, content=f"{OLD_HEADER}\n{OLD_ROW}\n", filename="old.csv")
    mark = Mark.objects.get(code="OLD-001")
    assert (mark.monument, mark.monument_detail, mark.marking, mark.keeper) == (
        "disk_concrete",
        "bronze disk in a concrete post",
        "OLD-001 2021",
        "Willow Township",
    )
    assert mark.access_directions == "From the gate, 40 m north."
    header = export_marks_text(fmt="csv").splitlines()[0].split(",")
    assert header == list(CSV_COLUMNS)
    assert not set(EARLIER_NAMES) & set(header)  # the export writes only the new names
    assert header[2:9] == [
        "access_directions",
        "monument",
        "monument_detail",
        "marking",
        "stability",
        "sky_view",
        "keeper",
    ]


def test_a_geojson_with_the_earlier_property_names_is_read_as_the_new_ones(manager):
    feature = {
        "type": "Feature",
        "geometry": None,
        "properties": {"code": "OLD-002", "monument_type": "pillar", "custodian": "Ridge Trust", "to_reach": "Trail"},
    }
    text = json.dumps({"type": "FeatureCollection", "features": [feature]})
    mark_import(actor=manager, content=text, filename="old.geojson")
    mark = Mark.objects.get(code="OLD-002")
    assert (mark.monument, mark.keeper, mark.access_directions) == ("pillar", "Ridge Trust", "Trail")
    props = json.loads(export_marks_text(fmt="geojson"))["features"][0]["properties"]
    assert props["monument"] == "pillar" and not set(EARLIER_NAMES) & set(props)


def test_an_earlier_and_a_new_name_of_one_column_is_refused(manager):
    with pytest.raises(ImportRejected) as info:
        mark_import(actor=manager, content="code,custodian,keeper\nOLD-003,A,B\n", filename="both.csv")
    assert [(e.where, e.code, e.field) for e in info.value.errors] == [("line 1", "old_and_new_column", "custodian")]
    feature = {"type": "Feature", "geometry": None, "properties": {"code": "OLD-004", "stamping": "A", "marking": "B"}}
    with pytest.raises(ImportRejected) as info:
        mark_import(
            actor=manager, content=json.dumps({"type": "FeatureCollection", "features": [feature]}), filename="b.json"
        )
    assert [(e.where, e.code) for e in info.value.errors] == [("features[0]", "old_and_new_column")]
    assert not Mark.objects.exists()


# ---- suspect marks in files --------------------------------------------------------------------------


def _rows(text: str) -> list[dict[str, str]]:
    return list(csv.DictReader(io.StringIO(text, newline="")))


@pytest.fixture
def suspect_registry(manager, technician):
    """SU-1 suspect (a visit today found it disturbed, after its position was published), SU-2 active."""
    for code in ("SU-1", "SU-2"):
        make_mark(manager, code=code, keeper="Survey office (invented)")
        make_published(manager, technician, code=code, lat_deg=45.2 + 0.01 * int(code[-1]))
    visit_record(
        actor=technician,
        mark_code="SU-1",
        data={"visited_on": timezone.now().date().isoformat(), "finding": "disturbed"},
    )
    assert Mark.objects.get(code="SU-1").status == "suspect"


def test_a_suspect_mark_survives_export_and_import(suspect_registry, manager):
    first = export_marks_text(fmt="csv")
    row = _rows(first)[0]
    assert (row["status"], row["suspect_since"]) == ("suspect", timezone.now().date().isoformat())
    assert row["suspect_reason"].endswith("found it disturbed")
    # The same file under new codes: marks created, positions published, then SV-1 made suspect.
    mark_import(actor=manager, content=first.replace("SU-", "SV-"), filename="again.csv")
    copy, original = Mark.objects.get(code="SV-1"), Mark.objects.get(code="SU-1")
    assert (copy.status, copy.suspect_since, copy.suspect_reason) == (
        "suspect",
        original.suspect_since,
        original.suspect_reason,
    )
    assert Mark.objects.get(code="SV-2").status == "active"
    made = AuditEvent.objects.filter(action="mark_make_suspect", mark=copy).get()
    assert made.actor == manager and "again.csv" in made.note
    # Its export row equals the original's but for the code and the version columns.
    again = {r["code"]: r for r in _rows(export_marks_text(fmt="csv"))}
    skip = ("code", "version", "position_revision")
    assert {k: v for k, v in again["SV-1"].items() if k not in skip} == {
        k: v for k, v in again["SU-1"].items() if k not in skip
    }


def test_a_file_cannot_make_a_suspect_mark_active(suspect_registry, manager):
    text = export_marks_text(fmt="csv")
    rows = _rows(text)
    rows[0].update(status="active", suspect_since="", suspect_reason="")
    out = io.StringIO(newline="")
    writer = csv.DictWriter(out, fieldnames=CSV_COLUMNS, lineterminator="\r\n")
    writer.writeheader()
    writer.writerows(rows)
    with pytest.raises(ImportRejected) as info:
        mark_import(actor=manager, content=out.getvalue(), filename="edited.csv", update=True)
    assert [e.code for e in info.value.errors] == ["suspect_needs_clearance"]
    assert Mark.objects.get(code="SU-1").status == "suspect"


def test_suspect_columns_need_status_suspect(manager):
    with pytest.raises(ImportRejected) as info:
        mark_import(
            actor=manager,
            content="code,status,suspect_since,suspect_reason\nSU-9,active,2025-01-02,leaning\nSU-8,suspect,2025-13-01,x\n",
            filename="bad.csv",
        )
    assert [(e.where, e.code, e.field) for e in info.value.errors] == [
        ("line 2", "suspect_fields_without_suspect", "suspect_since"),
        ("line 3", "invalid_date", "suspect_since"),
    ]
