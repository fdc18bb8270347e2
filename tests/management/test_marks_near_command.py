"""``manage.py marks_near``: table and JSON output, errors. Invented marks near 45.2°N 110.6°W."""

from __future__ import annotations

import json
from io import StringIO

import pytest
from django.core.management import CommandError, call_command
from geographiclib.geodesic import Geodesic

from registry.models import Mark

pytestmark = pytest.mark.django_db

# GRS80 (Moritz 1980): a = 6 378 137 m, 1/f = 298.257222101; GeographicLib 2.1 as the reference.
GRS80 = Geodesic(6378137.0, 1 / 298.257222101)


@pytest.fixture
def marks():
    out = []
    for code, az, dist in [("CMD-E", 90.0, 1500.0), ("CMD-S", 180.0, 700.0), ("CMD-FAR", 0.0, 30000.0)]:
        p = GRS80.Direct(45.2, -110.6, az, dist)
        out.append(Mark(code=code, search_lat_deg=p["lat2"], search_lon_deg=p["lon2"]))
    Mark.objects.bulk_create(out)


def _run(*args) -> str:
    buf = StringIO()
    call_command("marks_near", *args, stdout=buf)
    return buf.getvalue()


def test_json_lists_marks_nearest_first(marks):
    data = json.loads(_run("45.2", "-110.6", "--radius-km", "5", "--json"))
    assert [m["code"] for m in data["marks"]] == ["CMD-S", "CMD-E"]
    assert data["marks"][0]["distance_m"] == 700.0
    assert data["marks"][0]["azimuth_deg"] == pytest.approx(180.0, abs=1e-6)
    assert data["marks"][1]["azimuth_deg"] == pytest.approx(90.0, abs=1e-6)
    assert data["cautions"] and "GRS80" in data["search"]["location_note"]


def test_table_is_right_aligned_and_notes_the_search_frame(marks):
    text = _run("45.2", "-110.6", "--radius-km", "50", "--limit", "2")
    lines = text.splitlines()
    header = next(line for line in lines if line.startswith("#"))
    rows = [line for line in lines if line[:1].isdigit()]
    assert [r.split()[1] for r in rows] == ["CMD-S", "CMD-E"]
    # Distances right-aligned: the column ends at the same place in every row and the header.
    end = header.index("distance m") + len("distance m")
    assert all(r[:end].endswith(d) for r, d in zip(rows, ["700.000", "1500.000"], strict=True))
    assert "WGS 84 / ITRF-aligned" in text and "search location" in text
    assert "Caution:" in text


def test_bad_input_is_a_command_error(marks):
    with pytest.raises(CommandError, match="out_of_range"):
        _run("95", "0", "--radius-km", "1")
