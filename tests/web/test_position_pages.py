"""Propose a position; publish / reject / withdraw with the movement check shown before publishing.

Check values and their sources:
- Worked example: d = (E, N, U) = (0.018, −0.021, 0) m, σ_pub = (0.010, 0.012, 0.015) m,
  σ_obs = (0.008, 0.010, 0.012) m, uncorrelated → one 3D test T = 0.018²/1.64e-4 + 0.021²/2.44e-4 =
  3.7830 (hand computation), p = 0.2859, critical χ²(0.95, 3) = 7.815 (recomputed with SciPy 1.17.1,
  scipy.stats.chi2) → no movement shown. Detectable movement √(λ₀ σ²) with λ₀(α = 0.05, power 0.80,
  3 dof) = 10.9026 (scipy.stats.ncx2, SciPy 1.17.1): 42.3 / 51.6 / 63.4 mm.
- d = (0.050, 0, 0): T = 0.050² / (0.010² + 0.008²) = 15.2439 (hand computation) > 7.815 → possible
  movement, localised horizontal (T_h = 15.2439 > χ²(0.95, 2) = 5.991).
- DMS: 45°12′03.51234″ N = 45 + 12/60 + 3.51234/3600 degrees; the sign belongs to the whole
  angle (common practice; as in the ICSM GDA Technical Manual v2.3 examples).
- Points offset by a given east/north distance are built with pyproj's Geod (Karney's geodesic,
  an independent reference library) on GRS80, not with the code under test.
"""

from __future__ import annotations

import math

import pytest
from django.urls import reverse
from pyproj import Geod

from registry.models import AuditEvent, Mark, Position
from registry.services.marks import mark_create
from registry.services.positions import position_propose, position_publish
from tests.web.scenario import position_data

ROLES = ["viewer", "technician", "manager", "signatory", "admin_user_role"]
GEOD = Geod(ellps="GRS80")
# h = 0: a geodesic on the ellipsoid surface has the same east/north length as the ENU offset only at h = 0
# (at height h distances scale by (R + h)/R, 2.5e-4 at 1600 m, which moves T in the 4th decimal).
LAT0, LON0, H0 = 45.21, -110.62, 0.0


def offset(east_m: float, north_m: float, lat=LAT0, lon=LON0):
    """The point east_m/north_m away on GRS80 at h = 0 (geodesic forward; tangent-plane error ~ d²/R, < 1e-9 m)."""
    az = math.degrees(math.atan2(east_m, north_m))
    lon2, lat2, _ = GEOD.fwd(lon, lat, az, math.hypot(east_m, north_m))
    return lat2, lon2


def _pos(**kw):
    base = {
        "frame_epsg": 7912,
        "epoch_yr": 2024.0,
        "lat_deg": LAT0,
        "lon_deg": LON0,
        "h_m": H0,
        "cov_ee_m2": 0.010**2,
        "cov_nn_m2": 0.012**2,
        "cov_uu_m2": 0.015**2,
        "source": "invented test solution",
    }
    base.update(kw)
    return base


@pytest.fixture
def pair(manager, technician, media_root):
    """A mark with a published position and a proposed one offset by (0.018, −0.021) m (invented worked example)."""

    def build(*, east=0.018, north=-0.021, published=None, proposed=None):
        mark_create(actor=manager, data={"code": "TS-01", "name": "Test Saddle (invented)"})
        pub = position_propose(actor=technician, mark_code="TS-01", data=_pos(**(published or {})))
        position_publish(actor=manager, position_id=pub.pk)
        lat, lon = offset(east, north)
        obs_kw = {"lat_deg": lat, "lon_deg": lon, "cov_ee_m2": 0.008**2, "cov_nn_m2": 0.010**2, "cov_uu_m2": 0.012**2}
        obs_kw.update(proposed or {})
        obs = position_propose(actor=technician, mark_code="TS-01", data=_pos(**obs_kw))
        return pub, obs

    return build


def _decide_url(position, action):
    return reverse(
        "web:position-decide", kwargs={"code": position.mark.code, "position_id": position.pk, "action": action}
    )


# ----------------------------------------------------------------------------- role matrix


@pytest.mark.django_db
@pytest.mark.parametrize("role", ROLES)
def test_propose_page_role_matrix(request, kestrel, signed_in, role):
    response = signed_in(request.getfixturevalue(role)).get(reverse("web:position-create", kwargs={"code": "KV-001"}))
    assert response.status_code == (200 if role in ("technician", "manager") else 403)


@pytest.mark.django_db
@pytest.mark.parametrize("role", ROLES)
@pytest.mark.parametrize("action", ["publish", "reject"])
def test_decide_page_only_for_managers(request, kestrel, signed_in, role, action):
    url = _decide_url(kestrel["proposed"], action)
    user = request.getfixturevalue(role)
    assert signed_in(user).get(url).status_code == (200 if role == "manager" else 403)
    before = AuditEvent.objects.count()
    response = signed_in(user).post(url, {"note": "try"})
    if role != "manager":
        assert response.status_code == 403
        assert AuditEvent.objects.count() == before
        assert Position.objects.get(pk=kestrel["proposed"].pk).state == "proposed"


@pytest.mark.django_db
def test_decide_page_for_a_position_of_another_mark_is_404(kestrel, signed_in, manager):
    url = reverse(
        "web:position-decide", kwargs={"code": "KV-002", "position_id": kestrel["proposed"].pk, "action": "publish"}
    )
    assert signed_in(manager).get(url).status_code == 404
    bad_action = reverse(
        "web:position-decide", kwargs={"code": "KV-001", "position_id": kestrel["proposed"].pk, "action": "delete"}
    )
    assert signed_in(manager).get(bad_action).status_code == 404


# ----------------------------------------------------------------------------- propose


FORM = {
    "frame_choice": "7912",
    "epoch_yr": "2024.25",
    "lat": "45 12 03.51234 N",
    "lon": "110 36 00.5 W",
    "h_m": "1523.4512",
    "sigma_e_mm": "4",
    "sigma_n_mm": "3",
    "sigma_u_mm": "9",
    "source": "2024 static session, 6 h (invented)",
}


@pytest.mark.django_db
def test_propose_with_dms_writes_position_and_audit(kestrel, signed_in, technician):
    response = signed_in(technician).post(reverse("web:position-create", kwargs={"code": "KV-002"}), FORM)
    assert response.status_code == 302, response.content.decode()[:3000]
    p = Position.objects.filter(mark__code="KV-002", state="proposed").get()
    assert p.lat_deg == pytest.approx(45 + 12 / 60 + 3.51234 / 3600, abs=1e-12)
    assert p.lon_deg == pytest.approx(-(110 + 36 / 60 + 0.5 / 3600), abs=1e-12)
    assert p.cov_ee_m2 == pytest.approx(0.004**2) and p.cov_uu_m2 == pytest.approx(0.009**2)
    assert (p.frame_epsg, p.epoch_yr, p.created_by) == (7912, 2024.25, technician)
    assert AuditEvent.objects.filter(action="position_propose", object_id=str(p.pk), actor=technician).exists()


@pytest.mark.django_db
@pytest.mark.parametrize(
    "changes,field,text",
    [
        ({"lat": "45 61 00 N"}, "lat", b"minutes must be below 60"),
        ({"lat": "45 12 03 E"}, "lat", b"does not fit a latitude"),
        ({"lon": "-110 36 00 W"}, "lon", b"not both"),
        ({"sigma_e_mm": "0"}, "sigma_e_mm", b"zero"),
        ({"frame_choice": "other", "frame_other": ""}, "frame_other", b"EPSG code of the frame"),
        ({"frame_choice": "other", "frame_other": "4326"}, "frame_other", b"geographic 3D"),
        ({"epoch_yr": "1850"}, "epoch_yr", b"1900"),
        ({"source": ""}, "source", b"required"),
        # Regression: 1e300 mm used to overflow when squared into m² and gave a server error.
        ({"sigma_e_mm": "1e300"}, "sigma_e_mm", b"less than or equal to"),
        ({"vel_e_mm_yr": "1e300", "vel_n_mm_yr": "0", "vel_u_mm_yr": "0"}, "vel_e_mm_yr", b"less than or equal to"),
    ],
)
def test_propose_bad_input_changes_nothing(kestrel, signed_in, technician, changes, field, text):
    before = (Position.objects.count(), AuditEvent.objects.count())
    response = signed_in(technician).post(
        reverse("web:position-create", kwargs={"code": "KV-002"}), {**FORM, **changes}
    )
    assert response.status_code == 400
    assert f'id="id_{field}_errors"'.encode() in response.content, response.content.decode()[:3000]
    assert text in response.content
    assert (Position.objects.count(), AuditEvent.objects.count()) == before


@pytest.mark.django_db
def test_propose_offers_frames_in_use_and_free_entry(kestrel, signed_in, technician):
    page = signed_in(technician).get(reverse("web:position-create", kwargs={"code": "KV-002"})).content.decode()
    assert "ITRF2014 (EPSG:7912)" in page and "ITRF2020 (EPSG:9989)" in page and "NAD83(2011) (EPSG:6319)" in page
    assert 'value="other"' in page and 'name="frame_other"' in page


# ----------------------------------------------------------------------------- compatibility


@pytest.mark.django_db
def test_compatibility_worked_example_same_epoch(pair, signed_in, manager):
    _, obs = pair()
    page = signed_in(manager).get(_decide_url(obs, "publish")).content.decode()
    assert "3.7830" in page and "7.815" in page and "0.2859" in page  # see the module docstring
    assert "same frame at the same epoch" in page
    assert "No movement shown at the 95 % level" in page
    assert "18.0" in page and "-21.0" in page  # d in mm
    assert "42.3" in page and "51.6" in page and "63.4" in page  # detectable movement per axis, mm
    assert "this check could not have seen" in page  # above the office's 20 mm / 40 mm default


@pytest.mark.django_db
def test_compatibility_flags_movement(pair, signed_in, manager):
    _, obs = pair(east=0.050, north=0.0)
    page = signed_in(manager).get(_decide_url(obs, "publish")).content.decode()
    assert "15.2439" in page  # 0.050² / (0.010² + 0.008²), hand computation
    assert "Possible movement, horizontal." in page


@pytest.mark.django_db
def test_compatibility_brings_published_along_its_velocity(pair, signed_in, manager):
    # Published at 2019.0 with velocity (10, −5, 0) mm/yr; proposed at 2024.0 displaced by exactly 5 years of it.
    v_e, v_n = 0.010, -0.005
    _, obs = pair(
        east=5 * v_e,
        north=5 * v_n,
        published={"epoch_yr": 2019.0, "vel_e_m_yr": v_e, "vel_n_m_yr": v_n, "vel_u_m_yr": 0.0},
    )
    page = signed_in(manager).get(_decide_url(obs, "publish")).content.decode()
    assert "along the published position&#x27;s velocity" in page or "along the published position's velocity" in page
    assert "propagated along (10.0, -5.0, 0.0) mm/yr" in page
    assert "No movement shown at the 95 % level" in page
    assert page.count('<td class="num">0.0</td>') == 3  # d after propagation, mm
    # The velocity has no stated σ: the assumed rate stands in, as in base screening
    # (2 mm/yr default, common practice, × 5 yr = 10.0 mm per axis added to the published covariance).
    assert "10.0 / 10.0 / 10.0" in page


@pytest.mark.django_db
def test_compatibility_without_velocity_uses_assumed_rate_and_warns(pair, signed_in, manager, settings):
    settings.REGISTRY = {**settings.REGISTRY, "ASSUMED_RATE_MM_YR": 2.0}
    _, obs = pair(published={"epoch_yr": 2019.0})
    page = signed_in(manager).get(_decide_url(obs, "publish")).content.decode()
    assert "2019.000" in page
    assert "2 mm/yr per axis × 5.000 yr" in page
    # σ added = 2 mm/yr × 5 yr = 10.0 mm per axis (the rule stated in registry.geodesy.frames)
    assert "10.0 / 10.0 / 10.0" in page
    assert 'class="warn"' in page  # ITRF2014 without the mark's velocity: the page carries the frames module's warning


@pytest.mark.django_db
def test_first_position_in_a_frame_is_compared_across_frames(kestrel, signed_in, manager):
    # KV-001 has a published ITRF2014 position; the proposal is in ITRF2020 (scenario: moved along its velocity)
    page = signed_in(manager).get(_decide_url(kestrel["proposed"], "publish")).content.decode()
    assert "was brought to EPSG:9989 at epoch 2024.250" in page
    assert "No movement shown at the 95 % level" in page
    assert 'name="compared_with" value="' in page


@pytest.mark.django_db
def test_first_position_of_a_mark_has_nothing_to_compare(manager, technician, signed_in):
    mark_create(actor=manager, data={"code": "TS-02", "name": "New mark (invented)"})
    first = position_propose(actor=technician, mark_code="TS-02", data=_pos())
    page = signed_in(manager).get(_decide_url(first, "publish")).content.decode()
    assert "there is nothing to compare with" in page and 'value="none"' in page


# ----------------------------------------------------------------------------- decisions


@pytest.mark.django_db
def test_publish_supersedes_and_audits(pair, signed_in, manager):
    pub, obs = pair()
    response = signed_in(manager).post(_decide_url(obs, "publish"), {"note": "Compatible re-observation."})
    assert response.status_code == 302
    pub.refresh_from_db()
    obs.refresh_from_db()
    assert (pub.state, obs.state, pub.superseded_by_id) == ("superseded", "published", obs.pk)
    mark = Mark.objects.get(code="TS-01")
    assert (mark.search_lat_deg, mark.search_lon_deg) == (obs.lat_deg, obs.lon_deg)
    assert AuditEvent.objects.filter(
        action="position_publish", object_id=str(obs.pk), note="Compatible re-observation."
    ).exists()
    assert AuditEvent.objects.filter(action="position_supersede", object_id=str(pub.pk)).exists()


@pytest.mark.django_db
def test_publish_twice_is_refused_and_changes_nothing(pair, signed_in, manager):
    _, obs = pair()
    client = signed_in(manager)
    assert client.post(_decide_url(obs, "publish"), {}).status_code == 302
    before = AuditEvent.objects.count()
    response = client.post(_decide_url(obs, "publish"), {})
    assert response.status_code == 409
    assert AuditEvent.objects.count() == before
    assert b"disabled" in client.get(_decide_url(obs, "publish")).content


@pytest.mark.django_db
def test_reject_needs_a_note(kestrel, signed_in, manager):
    url = _decide_url(kestrel["proposed"], "reject")
    client = signed_in(manager)
    before = AuditEvent.objects.count()
    response = client.post(url, {"note": "  "})
    assert response.status_code == 400
    assert b"Give the reason" in response.content
    assert AuditEvent.objects.count() == before
    assert Position.objects.get(pk=kestrel["proposed"].pk).state == "proposed"
    assert client.post(url, {"note": "Wrong frame recorded."}).status_code == 302
    assert Position.objects.get(pk=kestrel["proposed"].pk).state == "rejected"
    assert AuditEvent.objects.filter(action="position_reject", note="Wrong frame recorded.").exists()


@pytest.mark.django_db
def test_withdraw_published(kestrel, signed_in, manager):
    current = Position.objects.get(mark__code="KV-002", state="published")
    url = _decide_url(current, "withdraw")
    client = signed_in(manager)
    assert client.post(url, {"note": ""}).status_code == 400
    assert client.post(url, {"note": "Bridge rebuilt; mark reset."}).status_code == 302
    current.refresh_from_db()
    assert current.state == "withdrawn"
    mark = Mark.objects.get(code="KV-002")
    assert mark.search_lat_deg is None  # no other published position left


@pytest.mark.django_db
def test_scenario_positions_unchanged_by_the_page_reads(kestrel, signed_in, manager):
    """Opening the confirmation page computes, never writes."""
    before = (AuditEvent.objects.count(), list(Position.objects.values_list("pk", "state")))
    signed_in(manager).get(_decide_url(kestrel["proposed"], "publish"))
    signed_in(manager).get(_decide_url(Position.objects.get(mark__code="KV-002", state="published"), "withdraw"))
    assert (AuditEvent.objects.count(), list(Position.objects.values_list("pk", "state"))) == before
    assert position_data()["frame_epsg"] == 7912


# ----------------------------------------------------------------------------- movement rules on the page


@pytest.mark.django_db
def test_publish_against_possible_movement_needs_a_note(pair, signed_in, manager):
    pub, obs = pair(east=0.050, north=0.0)
    assert Mark.objects.get(code="TS-01").status == "suspect"  # the check made on proposing
    client = signed_in(manager)
    response = client.post(_decide_url(obs, "publish"), {"compared_with": str(pub.pk)})
    assert response.status_code == 400 and b"give the reason for publishing anyway" in response.content
    assert Position.objects.get(pk=obs.pk).state == "proposed"
    note = "Mark reset by the county in 2023 (invented)."
    response = client.post(_decide_url(obs, "publish"), {"compared_with": str(pub.pk), "note": note})
    assert response.status_code == 302
    event = AuditEvent.objects.get(action="position_publish", object_id=str(obs.pk))
    assert event.note == note and event.after["movement_verdict"] == "possible_movement"
    assert event.after["compared_with_id"] == pub.pk
    assert Mark.objects.get(code="TS-01").status == "active"  # publishing answered the suspicion


@pytest.mark.django_db
def test_page_refuses_when_the_published_position_changed_meanwhile(pair, signed_in, manager, technician):
    pub, obs = pair()
    client = signed_in(manager)
    assert f'name="compared_with" value="{pub.pk}"'.encode() in client.get(_decide_url(obs, "publish")).content
    # another manager publishes another proposal in between
    other = position_propose(actor=technician, mark_code="TS-01", data=_pos(source="second crew (invented)"))
    position_publish(actor=manager, position_id=other.pk, compared_with=pub.pk)
    response = client.post(_decide_url(obs, "publish"), {"compared_with": str(pub.pk), "note": "ok"})
    assert response.status_code == 409
    page = response.content.decode()
    assert "Someone decided in between" in page
    assert f'name="compared_with" value="{other.pk}"' in page  # the form now names the new one
    assert Position.objects.get(pk=obs.pk).state == "proposed"
