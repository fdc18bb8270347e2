"""Exports: the API (viewer role), the command, the number formats.

Invented marks near 45.20° N, 110.60° W. The media type of GeoJSON is application/geo+json (RFC 7946
§12); CSV is text/csv (RFC 4180), with CRLF line ends (RFC 4180 §2.1).
"""

from __future__ import annotations

import csv
import io
import json

import pytest
from django.core.management import CommandError, call_command
from django.urls import reverse

from registry.io.common import CSV_COLUMNS, format_exact
from registry.services.imports import mark_import

HEADER = "code,name,monument,stability,frame_epsg,epoch_yr,lat_deg,lon_deg,h_m,cov_ee_m2,cov_en_m2,cov_nn_m2,cov_uu_m2,source"
ROWS = [
    "EXP-002,Creek bolt,bolt_structure,moderate,7912,2021.5,45.2,-110.6,1500,1.6e-05,-2.5e-06,2.5e-05,8.1e-05,demo 2021",
    "EXP-001,Willow gate,disk_concrete,high,6319,2010.0,45.19999522590536,-110.59998285610777,1500.6182599775493,9e-06,0,9e-06,4e-05,demo 2010",
    "EXP-003,,pin_concrete,unknown,,,,,,,,,,",
]


@pytest.fixture
def three_marks(manager):
    mark_import(actor=manager, content="\n".join([HEADER, *ROWS]) + "\n", filename="seed.csv")


def parse_csv(text):
    return list(csv.DictReader(io.StringIO(text, newline="")))


def test_csv_export_by_api(three_marks, viewer, api_client_for):
    response = api_client_for(viewer).get("/api/marks/export.csv")
    assert response.status_code == 200
    assert response["Content-Type"] == "text/csv; charset=utf-8"
    assert 'filename="marks.csv"' in response["Content-Disposition"]
    text = response.content.decode()
    assert text.startswith(",".join(CSV_COLUMNS) + "\r\n")
    rows = parse_csv(text)
    assert [r["code"] for r in rows] == ["EXP-001", "EXP-002", "EXP-003"]  # ordered by code
    one, two, three = rows
    # latitude/longitude at least 9 decimals, metres at least 4, both exact
    assert (two["lat_deg"], two["lon_deg"], two["h_m"]) == ("45.200000000", "-110.600000000", "1500.0000")
    assert (one["lat_deg"], one["h_m"]) == ("45.19999522590536", "1500.6182599775493")
    # covariance via repr; sigmas derived to 0.01 mm: √1.6e-05 m² = 4 mm, √2.5e-05 = 5 mm, √8.1e-05 = 9 mm
    assert (two["cov_ee_m2"], two["cov_en_m2"], two["cov_eu_m2"]) == ("1.6e-05", "-2.5e-06", "0.0")
    assert (two["sigma_e_mm"], two["sigma_n_mm"], two["sigma_u_mm"]) == ("4.00", "5.00", "9.00")
    assert three["frame_epsg"] == "" and three["lat_deg"] == ""


def test_geojson_export_by_api_and_query_format(three_marks, viewer, api_client_for):
    client = api_client_for(viewer)
    for url in ("/api/marks/export.geojson?frame=6319", "/api/marks/export?format=geojson&frame=6319"):
        response = client.get(url)
        assert response.status_code == 200
        assert response["Content-Type"] == "application/geo+json; charset=utf-8"
        doc = json.loads(response.content)
        assert doc["type"] == "FeatureCollection"
        f1, f2, f3 = doc["features"]
        assert f1["geometry"] == {
            "type": "Point",
            "coordinates": [-110.59998285610777, 45.19999522590536, 1500.6182599775493],
        }
        assert f1["properties"]["frame_epsg"] == 6319 and f1["properties"]["cov_uu_m2"] == 4e-05
        assert f2["geometry"] is None  # EXP-002 is published in ITRF2014 only: not in this file's frame
        assert f3["geometry"] is None and f3["properties"]["frame_epsg"] is None
        assert doc["frame"]["epsg"] == 6319 and doc["frame"]["name"] == "NAD83(2011)"
    assert client.get("/api/marks/export?format=csv").content == client.get("/api/marks/export.csv").content


def test_export_frame_filter(three_marks, viewer, api_client_for):
    rows = parse_csv(api_client_for(viewer).get("/api/marks/export.csv?frame=7912").content.decode())
    assert [(r["code"], r["frame_epsg"]) for r in rows] == [("EXP-001", ""), ("EXP-002", "7912"), ("EXP-003", "")]


@pytest.mark.parametrize(
    ("url", "code"),
    [
        ("/api/marks/export?format=xlsx", "unknown_format"),
        ("/api/marks/export.csv?frame=4326", "invalid_frame"),
        ("/api/marks/export.csv?frame=abc", "invalid_frame"),
    ],
)
def test_export_bad_parameters_get_the_error_shape(viewer, api_client_for, url, code):
    response = api_client_for(viewer).get(url)
    assert response.status_code == 400
    assert response.json()["error"]["code"] == code


def test_export_needs_a_role(make_user, api_client_for):
    assert api_client_for(None).get("/api/marks/export.csv").status_code in (401, 403)
    no_role = make_user("norole")
    response = api_client_for(no_role).get("/api/marks/export.csv")
    assert response.status_code == 403 and "error" in response.json()


def test_export_command(three_marks, tmp_path, capsys):
    call_command("export_marks")
    out = capsys.readouterr().out
    assert out.splitlines()[0] == ",".join(CSV_COLUMNS)
    target = tmp_path / "marks.geojson"
    call_command("export_marks", "--output", str(target))  # format from the extension
    assert json.loads(target.read_text())["type"] == "FeatureCollection"
    call_command("export_marks", "--format", "csv", "--frame", "6319", "--output", str(tmp_path / "m.csv"))
    rows = parse_csv((tmp_path / "m.csv").read_bytes().decode())
    assert [r["frame_epsg"] for r in rows] == ["6319", "", ""]
    with pytest.raises(CommandError, match="2D CRS"):
        call_command("export_marks", "--frame", "4326")


def test_export_of_empty_registry(db):
    call_command("export_marks", "--output", "/dev/null")
    from registry.io.export import export_marks_text

    assert export_marks_text(fmt="csv") == ",".join(CSV_COLUMNS) + "\r\n"
    assert json.loads(export_marks_text(fmt="geojson")) == {
        "type": "FeatureCollection",
        "frame": {
            "epsg": 7912,
            "name": "ITRF2014",
            "note": "Coordinates are in ITRF2014 (EPSG:7912) at each feature's epoch_yr, not WGS 84; one frame per file.",
        },
        "features": [],
    }


@pytest.mark.parametrize("value", [45.2, -110.6, 45.123456789012345, 1e-3, 1500.61825997755, 0.1 + 0.2, -0.0])
@pytest.mark.parametrize("decimals", [4, 9])
def test_format_exact_reads_back_exactly(value, decimals):
    text = format_exact(value, decimals)
    assert float(text) == value
    assert len(text.split(".")[1]) >= decimals


def test_export_url_names_resolve():
    assert reverse("api:marks-export-csv") == "/api/marks/export.csv"
    assert reverse("api:marks-export-geojson") == "/api/marks/export.geojson"
    assert reverse("web:import") == "/marks/import/"
