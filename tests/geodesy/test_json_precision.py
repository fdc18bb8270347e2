"""Machine output keeps its precision (issue 7): JSON of the commands and the API is not rounded.

References: FGDC-STD-007.2-1998 Part 2, r95 = K(C)·σmax with K = 1.960790 + 0.004071 C + 0.114276 C²
+ 0.371625 C³ (hand formula below); PROJ's own geocentric → geodetic conversion (pyproj, computed here)
for the ECEF point of the ICSM GDA Technical Manual example (Flinders Peak, secondary transcription).
"""

from __future__ import annotations

import json
import math
from io import StringIO

import pyproj
import pytest
from django.core.management import call_command


def run(name, *args) -> dict:
    out = StringIO()
    call_command(name, *args, "--json", stdout=out)
    return json.loads(out.getvalue())


def test_accuracy_statement_json_is_unrounded(api_client_for, viewer, db):
    """Fails on the code before issue 7: 0.0438 (0.1 mm rounding) for 0.043791…"""
    var = 3.1928e-4  # equal east/north variances, no correlation: C = 1
    k = 1.960790 + 0.004071 + 0.114276 + 0.371625  # [hand] K(1)
    want = k * math.sqrt(var)
    data = run("accuracy_statement", "--cov-en", str(var), "0", str(var))
    assert data["horizontal_95_m"] == pytest.approx(want, rel=1e-12)
    assert round(want, 6) == 0.043791 and data["horizontal_95_m"] != 0.0438
    resp = api_client_for(viewer).post("/api/accuracy/", {"cov_en_m2": [var, 0.0, var]}, format="json")
    assert resp.json()["horizontal_95_m"] == pytest.approx(want, rel=1e-12)


def test_convert_point_json_is_unrounded():
    xyz = (-4096088.424, 2929823.084, -3901375.454)  # Flinders Peak, GDA Technical Manual v2.3
    lon, lat, h = pyproj.Transformer.from_crs(7789, 7912, always_xy=True).transform(*xyz)  # ITRF2014 XYZ → geodetic
    data = run("convert_point", "--xyz", *map(str, xyz), "--frame", "7912", "--epoch", "2020")
    assert data["lat_deg"] == pytest.approx(lat, abs=1e-12) and data["lon_deg"] == pytest.approx(lon, abs=1e-12)
    assert data["h_m"] == pytest.approx(h, abs=1e-8)  # 0.01 µm
    assert data["x_m"] == pytest.approx(xyz[0], abs=1e-8)
    # 9-decimal rounding would have moved the latitude by more than 1e-11°.
    assert abs(round(lat, 9) - lat) > 1e-11 or abs(round(lon, 9) - lon) > 1e-11
