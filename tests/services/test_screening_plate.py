"""Screening's drift term with the plate motion model (REGISTRY["PLATE"]) for ITRF positions without a velocity.

Invented marks in the fictional district near 45.20° N, 110.60° W (helpers of test_screening.py).
Expected values: the plate velocity from registry.geodesy.platemotion, itself checked against PROJ's
ITRF2020:NOAM evaluation (tests/geodesy/test_platemotion.py); the σ terms by hand.
"""

from __future__ import annotations

import pytest

from registry.geodesy.conversions import geodetic_to_enu
from registry.geodesy.platemotion import velocity_enu_m_yr
from registry.models import Position
from registry.services.screening import job_screen
from tests.services.test_screening import AS_OF, by_code, make_job, make_mark


def with_plate(settings, value):
    settings.REGISTRY = {**settings.REGISTRY, "PLATE": value}


@pytest.mark.django_db
def test_itrf_mark_without_velocity_moves_with_the_plate_and_keeps_the_residual_drift(viewer, settings):
    with_plate(settings, "NOAM")
    make_mark("PM-1", 1500.0, 45.0, frame=7912, epoch=2015.5)  # ITRF2014 at 2015.5, no velocity
    make_job(frame_epsg=7912, epoch_yr=2025.5)
    result = job_screen(actor=viewer, code="J-SCR", as_of=AS_OF)
    c = by_code(result)["PM-1"]
    assert [s["kind"] for s in c.steps] == ["plate_motion"]
    assert "ITRF2020-PMM" in c.steps[0]["description"] and "NOAM" in c.steps[0]["description"]
    # [hand] residual rate 2 mm/yr (job default, common practice) × 10 yr = 20 mm per axis.
    assert c.budget["drift"] == {"h": pytest.approx(20.0), "v": pytest.approx(20.0)}
    p = Position.objects.get(mark__code="PM-1")
    ve, vn, vu = (float(v) for v in velocity_enu_m_yr(p.lat_deg, p.lon_deg, p.h_m, plate="NOAM"))
    e, n, u = (
        float(v)
        for v in geodetic_to_enu(c.lat_deg, c.lon_deg, c.h_m, lat0_deg=p.lat_deg, lon0_deg=p.lon_deg, h0_m=p.h_m)
    )
    assert (e, n, u) == pytest.approx((ve * 10.0, vn * 10.0, vu * 10.0), abs=1e-5)  # ≈ (−154, −85, 0) mm
    assert result.as_dict()["settings"]["plate_model"] == "NOAM"


@pytest.mark.django_db
def test_plate_setting_off_holds_the_mark_with_the_same_drift(viewer, settings):
    with_plate(settings, "")
    make_mark("PM-2", 1500.0, 45.0, frame=7912, epoch=2015.5)
    make_job(frame_epsg=7912, epoch_yr=2025.5)
    c = by_code(job_screen(actor=viewer, code="J-SCR", as_of=AS_OF))["PM-2"]
    assert [s["kind"] for s in c.steps] == ["hold"]
    p = Position.objects.get(mark__code="PM-2")
    assert (c.lat_deg, c.lon_deg) == (p.lat_deg, p.lon_deg)
    assert c.budget["drift"] == {"h": pytest.approx(20.0), "v": pytest.approx(20.0)}
    assert any("NOT modelled" in w for w in c.warnings)
    # Held 10 years in ITRF with no velocity and no plate model: the plate's centimetres a year are
    # missing from the coordinates, so the mark must never serve as a base.
    assert c.unmodelled_hold_yr == pytest.approx(10.0)
    assert "epoch_gap_dynamic_frame" in c.reasons
    assert not c.covers_site


@pytest.mark.django_db
def test_short_unmodelled_hold_in_a_dynamic_frame_is_tolerated(viewer, settings):
    # 0.05 yr (about 18 days) in ITRF without velocity or plate: at most a few mm of plate motion,
    # inside the assumed-rate term; not excluded (limit rtk.DYNAMIC_HOLD_LIMIT_YR = 0.1 yr).
    with_plate(settings, "")
    make_mark("PM-4", 1500.0, 45.0, frame=7912, epoch=2025.45)
    make_job(frame_epsg=7912, epoch_yr=2025.5)
    c = by_code(job_screen(actor=viewer, code="J-SCR", as_of=AS_OF))["PM-4"]
    assert c.unmodelled_hold_yr == pytest.approx(0.05)
    assert "epoch_gap_dynamic_frame" not in c.reasons


@pytest.mark.django_db
def test_plate_fixed_job_frame_is_unaffected_by_the_plate_setting(viewer, settings):
    # NAD83(2011) job: an ITRF2014 position is changed frame at its own epoch and held in the plate-fixed frame.
    make_mark("PM-3", 1500.0, 45.0, frame=7912, epoch=2015.5)
    make_job(frame_epsg=6319, epoch_yr=2025.5)
    with_plate(settings, "NOAM")
    on = by_code(job_screen(actor=viewer, code="J-SCR", as_of=AS_OF))["PM-3"]
    with_plate(settings, "")
    off = by_code(job_screen(actor=viewer, code="J-SCR", as_of=AS_OF))["PM-3"]
    assert [s["kind"] for s in on.steps] == ["frame_change", "hold"]
    assert (on.lat_deg, on.lon_deg, on.h_m) == (off.lat_deg, off.lon_deg, off.h_m)
