"""compare_position and publish_position: the service's movement check from the shell.

Check values: the 50 mm east shift at the same epoch with σ (5, 5, 10) mm on both solutions gives
T = 0.050² / (2 × 0.005²) = 50.0 (hand computation) > χ²(0.95, 3) = 7.815 (SciPy 1.17.1); detectable
movement east √(λ₀ · 2 · 0.005²) with λ₀(0.05, 0.80, 3) = 10.9026 (scipy.stats.ncx2) = 23.35 mm.
Points offset east are built with pyproj's Geod on GRS80.
"""

from __future__ import annotations

import io
import json

import pytest
from django.core.management import CommandError, call_command
from pyproj import Geod

from registry.models import AuditEvent, Position
from registry.services.marks import mark_create
from registry.services.positions import position_propose, position_publish

pytestmark = pytest.mark.django_db
LAT0, LON0 = 45.21, -110.62


def _data(**kw):
    base = {
        "frame_epsg": 6319,
        "epoch_yr": 2020.0,
        "lat_deg": LAT0,
        "lon_deg": LON0,
        "h_m": 1500.0,
        "cov_ee_m2": 0.005**2,
        "cov_nn_m2": 0.005**2,
        "cov_uu_m2": 0.010**2,
        "source": "invented",
    }
    base.update(kw)
    return base


@pytest.fixture
def moved(manager, technician):
    mark_create(actor=manager, data={"code": "CP-01", "name": "Command test (invented)"})
    first = position_propose(actor=technician, mark_code="CP-01", data=_data())
    position_publish(actor=manager, position_id=first.pk)
    lon, lat, _ = Geod(ellps="GRS80").fwd(LON0, LAT0, 90.0, 0.050)
    return first, position_propose(actor=technician, mark_code="CP-01", data=_data(lat_deg=lat, lon_deg=lon))


def run(*args) -> str:
    out = io.StringIO()
    call_command(*args, stdout=out)
    return out.getvalue()


def test_compare_position_by_id_prints_the_check_as_json(moved):
    first, proposed = moved
    data = json.loads(run("compare_position", "--mark", "CP-01", "--id", str(proposed.pk), "--json"))
    assert data["verdict"] == "possible_movement" and data["compared_with"] == first.pk
    assert data["d_east_mm"] == pytest.approx(50.0, abs=0.05) and data["dof"] == 3 and data["level"] == 0.05
    assert data["t_global"] == pytest.approx(50.0, rel=1e-3)
    assert data["detectable_mm"]["east"] == pytest.approx(23.35, abs=0.01)
    assert data["frame_chain"] and data["p_value"] < 1e-9


def test_compare_position_with_coordinates_given_stores_nothing(moved):
    first, _ = moved
    before = (Position.objects.count(), AuditEvent.objects.count())
    text = run(
        "compare_position",
        "--mark",
        "CP-01",
        "--lat",
        str(LAT0),
        "--lon",
        str(LON0),
        "--h",
        "1500",
        "--frame",
        "6319",
        "--epoch",
        "2020.0",
        "--cov-enu",
        "2.5e-5",
        "2.5e-5",
        "1e-4",
    )
    assert "no movement shown" in text and "T = 0.000" in text
    assert (Position.objects.count(), AuditEvent.objects.count()) == before


def test_compare_position_refuses_bad_input_clearly(moved):
    with pytest.raises(CommandError, match="variance of zero"):
        run(
            "compare_position",
            "--mark",
            "CP-01",
            "--lat",
            "45.2",
            "--lon",
            "-110.6",
            "--h",
            "1500",
            "--frame",
            "6319",
            "--epoch",
            "2020",
            "--cov-enu",
            "2.5e-5",
            "2.5e-5",
            "0",
        )
    with pytest.raises(CommandError, match="Give --id, or all of"):
        run("compare_position", "--mark", "CP-01", "--lat", "45.2")


def test_publish_position_needs_a_note_against_possible_movement(moved):
    _, proposed = moved
    with pytest.raises(CommandError, match="give the reason for publishing anyway"):
        run("publish_position", str(proposed.pk), "--as", "mona")
    assert Position.objects.get(pk=proposed.pk).state == "proposed"
    data = json.loads(
        run("publish_position", str(proposed.pk), "--as", "mona", "--note", "Reset (invented).", "--json")
    )
    assert data["state"] == "published" and data["movement_check"]["verdict"] == "possible_movement"
    assert data["movement_check"]["stage"] == "published"
