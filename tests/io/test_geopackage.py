"""Issue 10, item 18: GeoJSON holds one frame per file; the GeoPackage holds one layer per frame, each
with its own EPSG CRS. Read back with GDAL's own command-line reader (Debian's gdal-bin: ``ogrinfo``),
an independent program: layer CRS, feature counts and coordinates. Invented marks near 45.2° N, 110.6° W."""

from __future__ import annotations

import json
import re
import shutil
import subprocess

import pytest
from django.core.management import call_command

from registry.models import Position
from registry.services.imports import mark_import

OGRINFO = shutil.which("ogrinfo")
needs_ogrinfo = pytest.mark.skipif(OGRINFO is None, reason="ogrinfo missing: install Debian's gdal-bin")

HEADER = "code,name,monument,frame_epsg,epoch_yr,lat_deg,lon_deg,h_m,sigma_e_mm,sigma_n_mm,sigma_u_mm,source"
ROWS = [
    # the same mark in three frames (invented figures; the frames differ by about a metre here, as in the field)
    "GP-001,Twin frames,disk_rock,6319,2010.0,45.19999522590536,-110.59998285610777,1500.6182599775493,3,3,8,demo",
    "GP-001,Twin frames,disk_rock,7912,2024.5,45.2000000001,-110.6000000002,1499.9,3,3,8,demo",
    "GP-001,Twin frames,disk_rock,9989,2024.5,45.2000000003,-110.6000000004,1499.91,3,3,8,demo",
    "GP-002,Second,pillar,7912,2024.5,45.21,-110.61,1510.25,2,2,6,demo",
    "GP-003,No position,other,,,,,,,,,",
]


@pytest.fixture
def marks(manager):
    mark_import(actor=manager, content="\n".join([HEADER, *ROWS]) + "\n", filename="seed.csv")


def _ogrinfo(*args: str) -> str:
    return subprocess.run([OGRINFO, "-ro", *args], check=True, capture_output=True, text=True).stdout


def test_geojson_holds_one_frame_named_in_the_file(marks, viewer, api_client_for):
    doc = api_client_for(viewer).get("/api/marks/export.geojson").json()
    assert doc["frame"]["epsg"] == 7912 and doc["frame"]["name"] == "ITRF2014"
    frames = {f["properties"]["frame_epsg"] for f in doc["features"] if f["geometry"]}
    assert frames == {7912}
    codes = [f["properties"]["code"] for f in doc["features"]]
    assert codes == ["GP-001", "GP-002", "GP-003"]  # one feature per mark, never one per frame
    other = api_client_for(viewer).get("/api/marks/export.geojson?frame=9989").json()
    assert other["frame"]["epsg"] == 9989
    assert [f["properties"]["code"] for f in other["features"] if f["geometry"]] == ["GP-001"]


@needs_ogrinfo
def test_geojson_reads_back_with_ogrinfo(marks, tmp_path):
    target = tmp_path / "marks.geojson"
    call_command("export_marks", "--output", str(target))
    out = _ogrinfo("-so", "-al", str(target))
    assert "Feature Count: 3" in out and "3D Point" in out


@needs_ogrinfo
def test_geopackage_one_layer_per_frame_with_its_crs(marks, viewer, api_client_for, tmp_path):
    response = api_client_for(viewer).get("/api/marks/export.gpkg")
    assert response.status_code == 200 and response["Content-Type"] == "application/geopackage+sqlite3"
    assert 'filename="marks.gpkg"' in response["Content-Disposition"]
    target = tmp_path / "marks.gpkg"
    target.write_bytes(response.content)
    listing = _ogrinfo(str(target))
    assert re.findall(r"\d+: (marks_epsg\d+) \(3D Point\)", listing) == [
        "marks_epsg6319",
        "marks_epsg7912",
        "marks_epsg9989",
    ]
    for epsg, count in ((6319, 1), (7912, 2), (9989, 1)):
        summary = _ogrinfo("-so", str(target), f"marks_epsg{epsg}")
        assert f"Feature Count: {count}" in summary
        assert re.search(rf'ID\["EPSG",{epsg}\]\]\s*$', summary.split("Data axis to CRS axis mapping")[0])
        assert "Warning" not in summary
    # coordinates: longitude, latitude, ellipsoidal height as published, to the last digit ogrinfo prints
    for p in Position.objects.select_related("mark"):
        feature = _ogrinfo("-q", str(target), f"marks_epsg{p.frame_epsg}", "-where", f"code = '{p.mark.code}'")
        x, y, z = (float(v) for v in re.search(r"POINT Z \(([-\d.e]+) ([-\d.e]+) ([-\d.e]+)\)", feature).groups())
        assert (x, y, z) == pytest.approx((p.lon_deg, p.lat_deg, p.h_m), abs=1e-9)
        assert f"epoch_yr (Real) = {p.epoch_yr:g}" in feature or f"epoch_yr (Real) = {p.epoch_yr}" in feature


@needs_ogrinfo
def test_geopackage_by_command_and_frame_filter(marks, tmp_path):
    target = tmp_path / "one.gpkg"
    call_command("export_marks", "--frame", "7912", "--output", str(target))
    listing = _ogrinfo(str(target))
    assert re.findall(r"\d+: (marks_epsg\d+)", listing) == ["marks_epsg7912"]


def test_geopackage_needs_an_output_file(marks):
    from django.core.management import CommandError

    with pytest.raises(CommandError, match="--output"):
        call_command("export_marks", "--format", "gpkg")


def test_the_geojson_frame_member_is_ignored_on_import(marks, manager):
    """The export re-imports (the importer reads RFC 7946 members and skips foreign ones)."""
    from registry.io.export import export_marks_text

    text = export_marks_text(fmt="geojson")
    assert json.loads(text)["frame"]["epsg"] == 7912
    summary = mark_import(actor=manager, content=text, filename="x.geojson", update=True, dry_run=True)
    assert summary.rows == 3
