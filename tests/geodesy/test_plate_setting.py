"""REGISTRY["PLATE"]: the plate motion model in the command, the page, the API and the system checks.

The plate velocity itself is checked against PROJ in test_platemotion.py / test_frames.py; here the
setting's wiring: on (the chain names the model, the point moves), off (old behaviour, warning).
"""

from __future__ import annotations

import json
from io import StringIO

import pytest
from django.core.management import call_command
from django.urls import reverse

from registry.checks import check_proj
from registry.geodesy.conversions import geodetic_to_enu
from registry.selectors.conversion import configured_plate, point_convert

MODEL_TEXT = "ITRF2020-PMM (Altamimi et al. 2023) North American plate (NOAM)"
# ITRF2014 at 2013.0 → ITRF2014 at 2026.0, invented point in the demo district.
ARGS = ["--lat", "45.2", "--lon", "-110.6", "--h", "1500", "--frame", "7912", "--epoch", "2013", "--to-epoch", "2026"]


def with_plate(settings, value):
    settings.REGISTRY = {**settings.REGISTRY, "PLATE": value}


def run(*args) -> str:
    out = StringIO()
    call_command("convert_point", *args, stdout=out)
    return out.getvalue()


def test_configured_plate_reads_the_setting(settings):
    with_plate(settings, " noam ")
    assert configured_plate() == "NOAM"
    with_plate(settings, "")
    assert configured_plate() is None


def test_command_chain_names_the_plate_model_and_the_point_moves(settings):
    with_plate(settings, "NOAM")
    text = run(*ARGS)
    assert "Chain of operations:" in text and MODEL_TEXT in text
    assert "σ added 26.0 mm per axis for residual motion" in text  # [hand] 2 mm/yr × 13 yr
    data = json.loads(run(*ARGS, "--json"))
    e, n, _ = (
        float(v)
        for v in geodetic_to_enu(
            data["lat_deg"], data["lon_deg"], data["h_m"], lat0_deg=45.2, lon0_deg=-110.6, h0_m=1500.0
        )
    )
    # |v_horizontal| · 13 yr = √(15.407² + 8.536²) mm/yr × 13 = 17.614 × 13 ≈ 229 mm (see test_frames, PROJ value);
    # the JSON carries degrees unrounded.
    assert (e**2 + n**2) ** 0.5 == pytest.approx(0.2290, abs=5e-4)
    assert data["added_sigma_mm"] == pytest.approx(26.0, abs=1e-9)
    assert data["chain"][0]["kind"] == "plate_motion"


def test_setting_off_holds_and_warns(settings):
    with_plate(settings, "")
    data = json.loads(run(*ARGS, "--json"))
    assert data["lat_deg"] == 45.2 and data["lon_deg"] == -110.6
    assert [s["kind"] for s in data["chain"]] == ["hold"]
    assert any("NOT modelled" in w for w in data["warnings"])


@pytest.mark.django_db
def test_page_and_api_show_the_plate_model(client, viewer, api_client_for, settings):
    with_plate(settings, "NOAM")
    client.force_login(viewer)
    query = {
        "form": "geodetic",
        "lat": "45.2",
        "lon": "-110.6",
        "h": "1500",
        "frame": "7912",
        "epoch": "2013",
        "to_frame": "",
        "to_epoch": "2026",
        "grid": "utm",
    }
    html = client.get(reverse("web:convert"), query).content.decode()
    assert "Chain of operations" in html and MODEL_TEXT in html
    resp = api_client_for(viewer).post(
        "/api/convert/",
        {"lat": "45.2", "lon": "-110.6", "h": 1500, "frame": "7912", "epoch": 2013, "to_epoch": 2026},
        format="json",
    )
    assert resp.status_code == 200
    assert MODEL_TEXT in resp.json()["chain"][0]["description"]


def test_selector_result_matches_the_pure_function_with_the_plate(settings):
    from registry.geodesy.frames import transform_position

    with_plate(settings, "NOAM")
    c = point_convert(frame_epsg=7912, epoch_yr=2013.0, lat=45.2, lon=-110.6, h_m=1500.0, to_epoch_yr=2026.0)
    r = transform_position(
        45.2, -110.6, 1500.0, from_epsg=7912, from_epoch_yr=2013.0, to_epsg=7912, to_epoch_yr=2026.0, plate="NOAM"
    )
    assert c.lat_deg == float(r.lat_deg) and c.lon_deg == float(r.lon_deg)


def test_unknown_plate_setting_is_a_system_check_error(settings):
    with_plate(settings, "ATLANTIS")
    assert "registry.E013" in [m.id for m in check_proj()]
    with_plate(settings, "NOAM")
    assert "registry.E013" not in [m.id for m in check_proj()]
