"""The managers' page to combine repeat solutions of a mark, or fit a velocity (web.combine_views).

Check values: with diagonal covariances the weighted mean is, per axis, Σ(xᵢ/σᵢ²) / Σ(1/σᵢ²), and the
variance of unit weight s0² = Ω / f with Ω = Σ (xᵢ − x̄)²/σᵢ² over the axes and f = 3(n − 1) (Koch 1999
§3.2; hand formulas evaluated here with NumPy, independently of the matrix code). Offsets are built with
pyproj's Geod on GRS80, as in tests/services/test_combination.py.
"""

from __future__ import annotations

import numpy as np
import pytest
from django.urls import reverse

from registry.models import AuditEvent, Position
from registry.services.positions import position_propose
from tests.services.test_combination import at, mark  # noqa: F401  (the fixture)

pytestmark = pytest.mark.django_db
ROLES = ["viewer", "technician", "signatory", "admin_user_role"]
SESSIONS = [(0.004, -0.002, 0.005**2), (-0.003, 0.001, 0.004**2), (0.001, 0.003, 0.008**2)]


@pytest.fixture
def sessions(mark, technician):  # noqa: F811
    return [
        position_propose(actor=technician, mark_code="CB-01", data=at(e, n, cov_ee_m2=v, cov_nn_m2=v)).pk
        for e, n, v in SESSIONS
    ]


def counts():
    return Position.objects.count(), AuditEvent.objects.count()


def url():
    return reverse("web:mark-combine", args=["CB-01"])


def test_manager_combines_and_sees_the_unit_weight_test(sessions, signed_in, manager):
    client = signed_in(manager)
    page = client.get(url()).content.decode()
    assert all(f'value="{pk}"' in page for pk in sessions) and "Combine the chosen solutions" in page
    response = client.post(url(), {"position": sessions, "action": "combine"})
    assert response.status_code == 302
    proposal = Position.objects.order_by("-pk").first()
    assert response["Location"].endswith(f"?made={proposal.pk}")
    w = np.array([1 / v for *_, v in SESSIONS])
    e = np.array([s[0] for s in SESSIONS])
    n = np.array([s[1] for s in SESSIONS])
    mean_e, mean_n = (w * e).sum() / w.sum(), (w * n).sum() / w.sum()
    want = at(mean_e, mean_n)
    assert proposal.lat_deg == pytest.approx(want["lat_deg"], abs=1e-10)
    assert proposal.lon_deg == pytest.approx(want["lon_deg"], abs=1e-10)
    omega = float((w * (e - mean_e) ** 2).sum() + (w * (n - mean_n) ** 2).sum())
    s0 = (omega / 6) ** 0.5
    page = client.get(response["Location"]).content.decode()
    assert f"Proposed: position {proposal.pk}" in page
    assert f"s0 = {s0:.3f}" in page and "with 6 degrees of freedom" in page
    assert "the spread agrees with the stated sigmas" in page
    assert "Movement check against the published position: nothing to compare with." in page  # none published
    assert AuditEvent.objects.filter(action="positions_combine", object_id=str(proposal.pk)).exists()


def test_velocity_from_the_page(mark, technician, manager, signed_in):  # noqa: F811
    ids = [
        position_propose(actor=technician, mark_code="CB-01", data=at(0.010 * k, 0.0, epoch_yr=2020.0 + k)).pk
        for k in range(4)
    ]
    client = signed_in(manager)
    response = client.post(url(), {"position": ids, "action": "velocity"})
    assert response.status_code == 302
    proposal = Position.objects.order_by("-pk").first()
    assert proposal.vel_e_m_yr == pytest.approx(0.010, abs=1e-6)  # 10 mm/yr east by construction
    assert "Velocity from 4 solutions over 3.00 years" in client.get(response["Location"]).content.decode()


@pytest.mark.parametrize(
    ("chosen", "action", "message"),
    [
        ("one", "combine", "Choose at least 2 different solutions."),
        ("all", "", "Choose whether to combine the solutions or to estimate a velocity."),
        ("all", "velocity", "span"),
        ("other", "combine", "Not usable solutions of CB-01"),
        ("mixed", "combine", "different epochs"),
    ],
)
def test_bad_selections_say_why_and_change_nothing(sessions, technician, signed_in, manager, chosen, action, message):
    extra = position_propose(actor=technician, mark_code="CB-01", data=at(0, 0, epoch_yr=2025.0)).pk
    ids = {"one": sessions[:1], "all": sessions, "other": [*sessions[:2], 999999], "mixed": [*sessions, extra]}[chosen]
    before = counts()
    response = signed_in(manager).post(url(), {"position": ids, "action": action})
    assert response.status_code == 400
    page = response.content.decode()
    assert "Nothing was proposed." in page and message in page
    assert counts() == before


@pytest.mark.parametrize("role", ROLES)
def test_only_managers_combine(request, sessions, signed_in, role):
    client = signed_in(request.getfixturevalue(role))
    assert client.get(url()).status_code == 403
    before = counts()
    assert client.post(url(), {"position": sessions, "action": "combine"}).status_code == 403
    assert counts() == before


def test_linked_from_the_mark_page_and_the_queue(sessions, signed_in, manager, technician):
    link = f'href="{url()}"'
    assert link in signed_in(manager).get(reverse("web:mark-detail", args=["CB-01"])).content.decode()
    assert link in signed_in(manager).get(reverse("web:proposals")).content.decode()
    assert link not in signed_in(technician).get(reverse("web:mark-detail", args=["CB-01"])).content.decode()


def test_a_second_click_on_combine_makes_no_second_proposal(sessions, signed_in, manager):
    client = signed_in(manager)
    assert client.post(url(), {"position": sessions, "action": "combine"}).status_code == 302
    before = counts()
    again = client.post(url(), {"position": sessions, "action": "combine"})
    assert again.status_code == 400
    assert "already proposed" in again.content.decode() and "waits for a decision" in again.content.decode()
    assert counts() == before
