"""Combining repeat solutions into a proposal, and a velocity from a series (services.combination).

Check values: with diagonal covariances the weighted mean is, per axis, Σ(xᵢ/σᵢ²) / Σ(1/σᵢ²) and its
variance 1 / Σ(1/σᵢ²) (Koch 1999 §3.2; hand formula evaluated here with NumPy, independently of the
matrix code). Offsets are built with pyproj's Geod on GRS80 (Karney's geodesic) at h = 0.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from django.core.exceptions import ValidationError
from pyproj import Geod

from registry.models import AuditEvent, Position
from registry.services.combination import positions_combine, positions_velocity
from registry.services.marks import mark_create
from registry.services.positions import position_propose

pytestmark = pytest.mark.django_db
GEOD = Geod(ellps="GRS80")
LAT0, LON0 = 45.21, -110.62


def at(east_m, north_m, **kw):
    az = math.degrees(math.atan2(east_m, north_m)) if (east_m or north_m) else 0.0
    lon, lat, _ = GEOD.fwd(LON0, LAT0, az, math.hypot(east_m, north_m))
    data = {
        "frame_epsg": 6319,
        "epoch_yr": 2024.0,
        "lat_deg": lat,
        "lon_deg": lon,
        "h_m": 0.0,
        "cov_ee_m2": 0.005**2,
        "cov_nn_m2": 0.005**2,
        "cov_uu_m2": 0.010**2,
        "source": "session (invented)",
    }
    data.update(kw)
    return data


@pytest.fixture
def mark(manager):
    return mark_create(actor=manager, data={"code": "CB-01", "name": "Combination (invented)"})


def test_weighted_mean_of_three_sessions(mark, technician, manager):
    sessions = [(0.004, -0.002, 0.005**2), (-0.003, 0.001, 0.004**2), (0.001, 0.003, 0.008**2)]
    ids = [
        position_propose(actor=technician, mark_code="CB-01", data=at(e, n, cov_ee_m2=v, cov_nn_m2=v)).pk
        for e, n, v in sessions
    ]
    proposal, result = positions_combine(actor=manager, mark_code="CB-01", position_ids=ids)
    w = np.array([1 / v for *_, v in sessions])
    mean_e = float(np.sum(w * np.array([e for e, *_ in sessions])) / w.sum())
    mean_n = float(np.sum(w * np.array([n for _, n, _ in sessions])) / w.sum())
    # x̄ is relative to the first session; check the proposed point against the Geod point of (mean_e, mean_n)
    want = at(mean_e, mean_n)
    assert proposal.lat_deg == pytest.approx(want["lat_deg"], abs=1e-10)
    assert proposal.lon_deg == pytest.approx(want["lon_deg"], abs=1e-10)
    assert proposal.state == "proposed" and proposal.cov_ee_m2 == pytest.approx(1 / w.sum(), rel=1e-6)
    assert result.spread == "consistent" and result.dof == 6
    assert "Weighted combination of 3 solutions" in proposal.note
    event = AuditEvent.objects.get(action="positions_combine")
    assert event.after["from_position_ids"] == sorted(ids) and event.after["s0"] == pytest.approx(result.s0)


def test_combination_refuses_mixed_epochs_and_frames(mark, technician, manager):
    a = position_propose(actor=technician, mark_code="CB-01", data=at(0, 0)).pk
    b = position_propose(actor=technician, mark_code="CB-01", data=at(0, 0, epoch_yr=2025.0)).pk
    c = position_propose(actor=technician, mark_code="CB-01", data=at(0, 0, frame_epsg=7912)).pk
    for ids, code in (([a, b], "mixed_epochs"), ([a, c], "mixed_frames"), ([a], "too_few_solutions")):
        with pytest.raises(ValidationError) as info:
            positions_combine(actor=manager, mark_code="CB-01", position_ids=ids)
        assert info.value.error_dict["position_ids"][0].code == code
    assert Position.objects.count() == 3


def test_ids_past_the_key_range_are_unknown_not_a_server_error(mark, technician, manager):
    """Found by the schemathesis run: an id of 2**70 overflowed SQLite's integer parameter (a 500)."""
    a = position_propose(actor=technician, mark_code="CB-01", data=at(0, 0)).pk
    for service in (positions_combine, positions_velocity):
        with pytest.raises(ValidationError) as info:
            service(actor=manager, mark_code="CB-01", position_ids=[a, 2**70, -(2**70), 0])
        assert info.value.error_dict["position_ids"][0].code in ("unknown_solution", "too_few_solutions")
    assert Position.objects.count() == 1


def test_velocity_from_four_solutions(mark, technician, manager):
    ve, vn = -0.012, 0.004
    ids = [
        position_propose(
            actor=technician, mark_code="CB-01", data=at(ve * (t - 2015), vn * (t - 2015), epoch_yr=float(t))
        ).pk
        for t in (2015, 2017, 2019, 2021)
    ]
    proposal, fit = positions_velocity(actor=manager, mark_code="CB-01", position_ids=ids)
    assert proposal.vel_e_m_yr == pytest.approx(ve, abs=1e-6) and proposal.vel_n_m_yr == pytest.approx(vn, abs=1e-6)
    assert fit.span_yr == pytest.approx(6.0)
    assert AuditEvent.objects.filter(action="positions_velocity").count() == 1
    print(
        f"velocity example: {proposal.vel_e_m_yr * 1000:.2f}, {proposal.vel_n_m_yr * 1000:.2f} mm/yr "
        f"± {proposal.vel_sigma_e_m_yr * 1000:.2f}"
    )


def test_velocity_needs_a_long_enough_span(mark, technician, manager):
    ids = [
        position_propose(actor=technician, mark_code="CB-01", data=at(0, 0, epoch_yr=t)).pk
        for t in (2020.0, 2021.0, 2022.0)
    ]
    with pytest.raises(ValidationError) as info:
        positions_velocity(actor=manager, mark_code="CB-01", position_ids=ids)
    assert info.value.error_dict["position_ids"][0].code == "velocity_span_too_short"


def test_api_and_command_propose_a_combination(mark, technician, manager, viewer, api_client_for):
    import io
    import json

    from django.core.management import call_command

    ids = [position_propose(actor=technician, mark_code="CB-01", data=at(0.001 * k, 0)).pk for k in range(3)]
    assert (
        api_client_for(viewer).post("/api/marks/CB-01/combine/", {"position_ids": ids}, format="json").status_code
        == 403
    )
    response = api_client_for(manager).post("/api/marks/CB-01/combine/", {"position_ids": ids}, format="json")
    assert response.status_code == 201 and response.json()["state"] == "proposed"
    bad = api_client_for(manager).post("/api/marks/CB-01/combine/", {"position_ids": ids[:1]}, format="json")
    assert bad.status_code == 400 and bad.json()["error"]["details"]["position_ids"][0]["code"] == "too_few_solutions"
    out = io.StringIO()
    # the API's proposal of these three waits for a decision, so the command combines two of them
    call_command(
        "combine_positions", "--mark", "CB-01", "--ids", *map(str, ids[1:]), "--as", "mona", "--json", stdout=out
    )
    data = json.loads(out.getvalue())
    assert "Weighted combination of 2 solutions" in data["statement"]
    again = api_client_for(manager).post("/api/marks/CB-01/combine/", {"position_ids": ids}, format="json")
    assert again.status_code == 400
    assert again.json()["error"]["details"]["position_ids"][0]["code"] == "already_proposed"


def test_the_same_proposal_is_not_made_twice_until_the_first_is_decided(mark, technician, manager):
    """A double click or a resent form: the second request for the same combination changes nothing."""
    from registry.services.positions import position_reject

    ids = [position_propose(actor=technician, mark_code="CB-01", data=at(0.002 * k, 0)).pk for k in range(3)]
    first, _ = positions_combine(actor=manager, mark_code="CB-01", position_ids=ids)
    before = (Position.objects.count(), AuditEvent.objects.count())
    with pytest.raises(ValidationError) as info:
        positions_combine(actor=manager, mark_code="CB-01", position_ids=list(reversed(ids)))
    error = info.value.error_dict["position_ids"][0]
    assert error.code == "already_proposed"
    assert "already proposed" in error.message and "CB-01" in error.message and "3 solutions" in error.message
    assert (Position.objects.count(), AuditEvent.objects.count()) == before
    # Another choice of solutions is another proposal.
    other, _ = positions_combine(actor=manager, mark_code="CB-01", position_ids=ids[:2])
    assert other.pk != first.pk
    # Once the first is rejected, the same solutions may be combined again.
    position_reject(actor=manager, position_id=first.pk, note="Combined again after checking the antenna heights.")
    again, _ = positions_combine(actor=manager, mark_code="CB-01", position_ids=ids)
    assert again.pk not in (first.pk, other.pk)


def test_the_same_velocity_fit_is_not_proposed_twice(mark, technician, manager):
    ids = [
        position_propose(actor=technician, mark_code="CB-01", data=at(-0.01 * (t - 2015), 0, epoch_yr=float(t))).pk
        for t in (2015, 2018, 2021)
    ]
    positions_velocity(actor=manager, mark_code="CB-01", position_ids=ids)
    with pytest.raises(ValidationError) as info:
        positions_velocity(actor=manager, mark_code="CB-01", position_ids=ids)
    assert info.value.error_dict["position_ids"][0].code == "already_proposed"
    assert "velocity fit" in info.value.error_dict["position_ids"][0].message
    # A combination of the same solutions is a different proposal (here refused for its own reason: epochs differ).
    with pytest.raises(ValidationError) as info:
        positions_combine(actor=manager, mark_code="CB-01", position_ids=ids)
    assert info.value.error_dict["position_ids"][0].code == "mixed_epochs"
