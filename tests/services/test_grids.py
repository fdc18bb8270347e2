"""Custom grids stored by a manager (issue 7, item 12) and used wherever a grid is accepted.

The reference values are computed in the tests with pyproj on a PROJ string written out here
(independent of the registry's builder).
"""

from __future__ import annotations

import json
from io import StringIO

import pyproj
import pytest
from django.core.exceptions import ValidationError
from django.core.management import call_command
from django.urls import reverse

from registry.errors import PermissionDeniedError
from registry.models import AuditEvent, CustomGrid, Job
from registry.services.grids import custom_grid_create
from registry.services.jobs import job_create

pytestmark = pytest.mark.django_db

DATA = {
    "code": "crv-ldp",
    "name": "Corvid Ridge low-distortion grid",
    "frame_epsg": 6319,
    "method": "tm",
    "unit": "US survey foot",
    "lat0_deg": 45.0,
    "lon0_deg": -110.6,
    "k0": 1.00021,
    "false_easting": 100000,
    "false_northing": 50000,
    "area_west_deg": -110.9,
    "area_south_deg": 45.0,
    "area_east_deg": -110.3,
    "area_north_deg": 45.4,
}
# Reference: the same projection written as a PROJ string, false easting/northing converted by hand
# (US survey foot = 1200/3937 m); pyproj.Proj returns metres.
REF = pyproj.Proj(
    "+proj=tmerc +lat_0=45 +lon_0=-110.6 +k_0=1.00021 +x_0=30480.06096012192 +y_0=15240.03048006096 +ellps=GRS80"
)


def test_manager_stores_a_grid_once_audited(manager, technician):
    with pytest.raises(PermissionDeniedError):
        custom_grid_create(actor=technician, data=DATA)
    grid = custom_grid_create(actor=manager, data=DATA)
    assert grid.code == "CRV-LDP" and "+proj=tmerc" in grid.proj_definition
    assert AuditEvent.objects.filter(action="custom_grid_create").count() == 1
    with pytest.raises(ValidationError) as err:
        custom_grid_create(actor=manager, data=DATA)
    assert err.value.error_dict["code"][0].code == "unique"


@pytest.mark.parametrize(
    ("change", "field", "code"),
    [
        ({"k0": 2.0}, "k0", "out_of_range"),
        ({"code": "6341"}, "code", "invalid_code"),
        ({"code": "utm"}, "code", "invalid_code"),
        ({"method": "polyconic"}, "method", "invalid_choice"),
        ({"area_north_deg": None}, "area_north_deg", "required"),
        ({"frame_epsg": 6341}, "frame_epsg", "invalid_frame"),
        ({"colour": "red"}, "colour", "unknown_field"),
    ],
)
def test_bad_grid_changes_nothing(manager, change, field, code):
    with pytest.raises(ValidationError) as err:
        custom_grid_create(actor=manager, data={**DATA, **change})
    assert err.value.error_dict[field][0].code == code
    assert not CustomGrid.objects.exists() and not AuditEvent.objects.filter(action="custom_grid_create").exists()


def test_conversion_command_api_and_page_take_the_grid_code(manager, viewer, client, api_client_for):
    custom_grid_create(actor=manager, data=DATA)
    x_m, y_m = REF(-110.55, 45.25)
    out = StringIO()
    call_command(
        "convert_point",
        *("--lat", "45.25", "--lon", "-110.55", "--h", "1400", "--frame", "6319", "--epoch", "2010"),
        *("--grid", "CRV-LDP", "--json"),
        stdout=out,
    )
    data = json.loads(out.getvalue())
    assert data["grid_crs"] == {"epsg": None, "name": DATA["name"], "custom_code": "CRV-LDP"}
    assert data["easting_m"] == pytest.approx(x_m, abs=1e-6)
    assert data["grid_native"]["easting_us_ft"] == pytest.approx(x_m * 3937 / 1200, abs=1e-6)
    assert data["grid_native"]["northing_us_ft"] == pytest.approx(y_m * 3937 / 1200, abs=1e-6)
    assert data["grid_native"]["easting_ft"] == pytest.approx(x_m / 0.3048, abs=1e-6)
    assert data["scale_factor"] == pytest.approx(REF.get_factors(-110.55, 45.25).meridional_scale, abs=1e-10)
    # Grid input by code, back to latitude/longitude.
    resp = api_client_for(viewer).post(
        "/api/convert/",
        {
            "easting": data["easting_m"],
            "northing": data["northing_m"],
            "grid_in": "crv-ldp",
            "h": 1400,
            "frame": "6319",
            "epoch": 2010,
            "grid": "CRV-LDP",
        },
        format="json",
    )
    assert resp.status_code == 200
    assert resp.json()["lat_deg"] == pytest.approx(45.25, abs=1e-10) and resp.json()["lon_deg"] == pytest.approx(
        -110.55, abs=1e-10
    )
    resp = api_client_for(viewer).get(
        "/api/convert/", {"lat": "45.2", "lon": "-110.6", "h": 1, "frame": "6319", "epoch": 2010, "grid": "NOPE"}
    )
    assert resp.status_code == 400 and resp.json()["error"]["code"] == "unknown_grid"
    client.force_login(viewer)
    page = client.get(
        reverse("web:convert"),
        {
            "form": "geodetic",
            "lat": "45.25",
            "lon": "-110.55",
            "h": "1400",
            "frame": "6319",
            "epoch": "2010",
            "grid": "CRV-LDP",
        },
    )
    html = page.content.decode()
    assert page.status_code == 200 and "custom grid CRV-LDP" in html and "US survey ft (legacy)" in html


def test_grid_pages_and_api_list_and_create(manager, viewer, technician, client, api_client_for):
    resp = api_client_for(technician).post("/api/grids/", DATA, format="json")
    assert resp.status_code == 403
    resp = api_client_for(manager).post("/api/grids/", DATA, format="json")
    assert resp.status_code == 201 and resp.json()["code"] == "CRV-LDP"
    assert api_client_for(viewer).get("/api/grids/").json()[0]["code"] == "CRV-LDP"
    resp = api_client_for(manager).post("/api/grids/", {**DATA, "code": "X2", "k0": 5}, format="json")
    assert resp.status_code == 400 and "k0" in resp.json()["error"]["details"]
    client.force_login(viewer)
    html = client.get(reverse("web:grid-list")).content.decode()
    assert "CRV-LDP" in html and "Store a custom grid" not in html
    assert client.post(reverse("web:grid-list"), {**DATA, "code": "X3"}).status_code == 403
    client.force_login(manager)
    page = client.post(reverse("web:grid-list"), {**DATA, "code": "X4", "k0": "7"})
    assert page.status_code == 400 and "between 0.99 and 1.01" in page.content.decode()
    page = client.post(reverse("web:grid-list"), {**DATA, "code": "X5"})
    assert page.status_code == 302 and CustomGrid.objects.filter(code="X5").exists()


def test_job_takes_a_custom_grid_but_not_two_grids(manager):
    custom_grid_create(actor=manager, data=DATA)
    base = {
        "code": "J-1",
        "name": "LDP job",
        "site_geojson": {"type": "Point", "coordinates": [-110.6, 45.2]},
        "frame_epsg": 6319,
        "epoch_yr": 2010.0,
        "tol_h_mm": 30,
        "tol_v_mm": 50,
    }
    job = job_create(actor=manager, data={**base, "custom_grid": "crv-ldp"})
    assert Job.objects.get(pk=job.pk).custom_grid_id == "CRV-LDP"
    with pytest.raises(ValidationError) as err:
        job_create(actor=manager, data={**base, "code": "J-2", "custom_grid": "CRV-LDP", "grid_epsg": 6341})
    assert err.value.error_dict["custom_grid"][0].code == "two_grids"
    with pytest.raises(ValidationError) as err:  # the grid is on NAD83(2011), the job in ITRF2014
        job_create(actor=manager, data={**base, "code": "J-3", "custom_grid": "CRV-LDP", "frame_epsg": 7912})
    assert err.value.error_dict["custom_grid"][0].code == "invalid_grid"
    with pytest.raises(ValidationError) as err:
        job_create(actor=manager, data={**base, "code": "J-4", "custom_grid": "NOPE"})
    assert err.value.error_dict["custom_grid"][0].code == "invalid_grid"
