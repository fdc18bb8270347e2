"""A grid outside its area of use is converted with a warning (issue 7, item 11), on page, API and command.

Independent sources: EPSG's area of use of EPSG:6341 (NAD83(2011) / UTM zone 12N: 114°W to 108°W,
31.33°N to 49.01°N) as pyproj reports it, and the point scale factor from pyproj's
``Proj.get_factors`` computed in the test; the transverse Mercator rule of thumb
k ≈ k0 (1 + (Δλ cos φ)²/2) (Snyder 1987, USGS PP 1395, eq. 8-11, first term) as a cross-check.
"""

from __future__ import annotations

import json
import math
from io import StringIO

import pyproj
import pytest
from django.core.management import call_command
from django.urls import reverse

from registry.geodesy.grid import resolve_grid, to_grid

ARGS = ["--lat", "45.2", "--lon", "-117.5", "--h", "1000", "--frame", "6319", "--epoch", "2010", "--grid", "6341"]


def run(*args) -> str:
    out = StringIO()
    call_command("convert_point", *args, stdout=out)
    return out.getvalue()


def test_area_of_use_is_epsg_s():
    aou = pyproj.CRS.from_epsg(6341).area_of_use  # EPSG database through pyproj
    assert resolve_grid(6341, frame_epsg=6319).area == (aou.west, aou.south, aou.east, aou.north)


def test_point_outside_the_zone_is_converted_with_its_distortion_stated():
    """Fails on the code before issue 7: k = 1.00266 was returned silently."""
    g = to_grid(45.2, -117.5, frame_epsg=6319, grid=6341)
    k_proj = pyproj.Proj(pyproj.CRS.from_epsg(6341)).get_factors(-117.5, 45.2).meridional_scale
    assert float(g.scale_factor) == pytest.approx(k_proj, abs=1e-9)
    dl = math.radians(-117.5 + 111.0)
    assert k_proj == pytest.approx(0.9996 * (1 + (dl * math.cos(math.radians(45.2))) ** 2 / 2), abs=2e-5)  # Snyder 8-11
    assert k_proj > 1.0025  # 2800 ppm: the kind of figure the issue saw returned silently
    assert len(g.warnings) == 1 and "outside the area of use of NAD83(2011) / UTM zone 12N (EPSG:6341)" in g.warnings[0]
    assert f"{k_proj:.8f}" in g.warnings[0]
    assert to_grid(45.2, -110.6, frame_epsg=6319, grid=6341).warnings == ()


def test_utm_chosen_for_the_point_is_inside_its_zone():
    assert to_grid(45.2, -117.5, frame_epsg=6319, grid="utm").warnings == ()


@pytest.mark.django_db
def test_warning_travels_to_command_api_and_page(client, viewer, api_client_for):
    assert "outside the area of use" in run(*ARGS)
    data = json.loads(run(*ARGS, "--json"))
    assert any("outside the area of use" in w for w in data["warnings"])
    resp = api_client_for(viewer).get(
        "/api/convert/", {"lat": "45.2", "lon": "-117.5", "h": 1000, "frame": "6319", "epoch": 2010, "grid": "6341"}
    )
    assert resp.status_code == 200 and any("outside the area of use" in w for w in resp.json()["warnings"])
    client.force_login(viewer)
    page = client.get(
        reverse("web:convert"),
        {
            "form": "geodetic",
            "lat": "45.2",
            "lon": "-117.5",
            "h": "1000",
            "frame": "6319",
            "epoch": "2010",
            "grid": "6341",
        },
    )
    assert page.status_code == 200 and "outside the area of use" in page.content.decode()
