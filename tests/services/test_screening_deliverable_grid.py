"""The job's deliverable grid at its site: named on the screening, and a warning when the site lies outside
the grid's area of use (services.screening.deliverable), on the service, page, API and text report.

Independent sources: EPSG's area of use of EPSG:6341 (NAD83(2011) / UTM zone 12N: 114°W to 108°W) and of
EPSG:6340 (zone 11N: 120°W to 114°W) as pyproj reports them; the point scale factor from pyproj's
``Proj.get_factors``. The sites are invented.
"""

from __future__ import annotations

import datetime as dt

import pyproj
import pytest

from registry.services.screening import job_screen
from registry.services.screening.text_report import text_report
from tests.services.test_screening import make_job, make_mark

pytestmark = pytest.mark.django_db
AS_OF = dt.date(2025, 7, 1)


def square(lon_w, lon_e, lat_s=45.19, lat_n=45.21):
    ring = [[lon_w, lat_s], [lon_e, lat_s], [lon_e, lat_n], [lon_w, lat_n], [lon_w, lat_s]]
    return {"type": "Polygon", "coordinates": [ring]}


def test_site_inside_the_grid_names_it_and_warns_nothing(viewer):
    make_mark("DG-1", 1000.0, 0.0)
    make_job(grid_epsg=6341)
    r = job_screen(actor=viewer, code="J-SCR", as_of=AS_OF)
    assert r.grid_label == "NAD83(2011) / UTM zone 12N (EPSG:6341)"
    assert not [w for w in r.warnings if w.startswith("Deliverable grid")]
    assert r.as_dict()["deliverable_grid"] == r.grid_label


def test_point_site_in_the_next_zone_is_warned_with_its_scale_factor(viewer):
    lat, lon = 45.2, -117.5  # zone 11N, 6.5° west of zone 12N's central meridian
    make_job(site={"type": "Point", "coordinates": [lon, lat]}, grid_epsg=6341)
    r = job_screen(actor=viewer, code="J-SCR", as_of=AS_OF)
    found = [w for w in r.warnings if w.startswith("Deliverable grid")]
    assert len(found) == 1, r.warnings
    assert "The site is outside the area of use of NAD83(2011) / UTM zone 12N (EPSG:6341)" in found[0]
    k_proj = pyproj.Proj(pyproj.CRS.from_epsg(6341)).get_factors(lon, lat).meridional_scale
    assert f"{k_proj:.8f}" in found[0]  # ≈ 1.0027: 2,700 ppm a crew would otherwise deliver silently
    # even with no marks near the site (the screening has nothing else to say) the warning stands
    assert "No marks" in r.statement
    assert any(found[0] in line for line in text_report(r))


def test_polygon_across_a_zone_boundary_says_which_part(viewer):
    make_job(site=square(-114.05, -113.85), grid_epsg=6341)  # straddles 114°W, zone 12N's west edge
    r = job_screen(actor=viewer, code="J-SCR", as_of=AS_OF)
    found = [w for w in r.warnings if w.startswith("Deliverable grid")]
    # the two corners at 114.05°W are outside; the centre (≈113.95°W) and the 113.85°W corners are inside
    assert len(found) == 1 and "Part of the site (2 of its 5 corner and centre points)" in found[0], found
    make_job(code="J-WEST", site=square(-115.0, -114.9), grid_epsg=6341)
    west = job_screen(actor=viewer, code="J-WEST", as_of=AS_OF)
    assert any(w.startswith("Deliverable grid: The whole site is outside") for w in west.warnings)


def test_automatic_utm_takes_the_sites_zone(viewer):
    make_job(site={"type": "Point", "coordinates": [-117.5, 45.2]})
    r = job_screen(actor=viewer, code="J-SCR", as_of=AS_OF)
    aou = pyproj.CRS.from_epsg(6340).area_of_use
    assert aou.west <= -117.5 <= aou.east
    assert "UTM zone 11N" in r.grid_label and r.grid_label.endswith("(the site's zone: the job names no grid)")
    assert not [w for w in r.warnings if w.startswith("Deliverable grid")]


def test_page_shows_the_grid_and_the_warning(viewer, client):
    make_job(site={"type": "Point", "coordinates": [-117.5, 45.2]}, grid_epsg=6341)
    client.force_login(viewer)
    page = client.get("/jobs/J-SCR/").content.decode()
    assert "Deliverable grid" in page and "NAD83(2011) / UTM zone 12N (EPSG:6341)" in page
    assert "The site is outside the area of use" in page


def test_an_ad_hoc_site_has_no_deliverable_grid(viewer):
    from registry.services.screening import site_screen

    r = site_screen(
        actor=viewer,
        data={
            "site_geojson": square(-114.05, -113.85),  # across two UTM zones: a job would be asked to choose
            "frame_epsg": 6319,
            "epoch_yr": 2025.5,
            "tol_h_mm": 30,
            "tol_v_mm": 40,
        },
        as_of=AS_OF,
    )
    assert r.grid_label == "" and not [w for w in r.warnings if w.startswith("Deliverable grid")]
