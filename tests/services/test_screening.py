"""Base screening service: candidates from the registry, every exclusion, budgets, pair, check marks.

Invented data: a fictional district near 45.20° N, 110.60° W. Marks are placed with pyproj's
geodesic forward problem (GRS80) at chosen distances from the site. Check values are computed by
hand beside each assertion; constants from FGDC-STD-007.3-1998 (2.4477, 1.9600).
"""

from __future__ import annotations

import datetime as dt
import math

import pytest
from django.core.exceptions import ValidationError
from pyproj import Geod

from registry.errors import NotFound
from registry.models import Finding, Job, Mark, MarkStatus, Position, PositionState, SkyView, Visit
from registry.services.screening import job_screen, site_screen

AS_OF = dt.date(2025, 7, 1)
SITE_LAT, SITE_LON = 45.2, -110.6
GEOD = Geod(ellps="GRS80")
K_H, K_V = 2.4477468, 1.959964


def at(distance_m: float, azimuth_deg: float, lat=SITE_LAT, lon=SITE_LON) -> tuple[float, float]:
    lon2, lat2, _ = GEOD.fwd(lon, lat, azimuth_deg, distance_m)
    return float(lat2), float(lon2)


def make_mark(
    code,
    distance_m,
    azimuth_deg,
    *,
    status=MarkStatus.ACTIVE,
    sky=SkyView.CLEAR,
    visits=(("2024-06-01", "intact"),),
    frame=6319,
    epoch=2025.5,
    sigma_h_mm=3.0,
    sigma_v_mm=5.0,
    position=True,
    state=PositionState.PUBLISHED,
    velocity=None,
    vel_sigma=None,
    origin=(SITE_LAT, SITE_LON),
):
    """An invented mark with a published position (σ per axis / vertical in mm) and visits."""
    lat, lon = at(distance_m, azimuth_deg, *origin)
    mark = Mark.objects.create(
        code=code, name=f"Invented {code}", status=status, sky_view=sky, search_lat_deg=lat, search_lon_deg=lon
    )
    if position:
        extra = {}
        if velocity is not None:
            extra.update(vel_e_m_yr=velocity[0], vel_n_m_yr=velocity[1], vel_u_m_yr=velocity[2])
        if vel_sigma is not None:
            extra.update(vel_sigma_e_m_yr=vel_sigma[0], vel_sigma_n_m_yr=vel_sigma[1], vel_sigma_u_m_yr=vel_sigma[2])
        Position.objects.create(
            mark=mark,
            frame_epsg=frame,
            epoch_yr=epoch,
            lat_deg=lat,
            lon_deg=lon,
            h_m=1500.0,
            cov_ee_m2=(sigma_h_mm / 1000) ** 2,
            cov_nn_m2=(sigma_h_mm / 1000) ** 2,
            cov_uu_m2=(sigma_v_mm / 1000) ** 2,
            source="invented campaign",
            state=state,
            **extra,
        )
    for day, cond in visits:
        Visit.objects.create(mark=mark, visited_on=dt.date.fromisoformat(day), finding=cond)
    return mark


def make_job(code="J-SCR", site=None, **over):
    fields = dict(
        code=code,
        name="Invented job",
        site_geojson=site or {"type": "Point", "coordinates": [SITE_LON, SITE_LAT]},
        frame_epsg=6319,
        epoch_yr=2025.5,
        tol_h_mm=30.0,
        tol_v_mm=40.0,
    )
    fields.update(over)
    return Job.objects.create(**fields)


def by_code(result):
    return {c.mark.code: c for c in result.candidates}


@pytest.mark.django_db
def test_budget_of_a_near_base_by_hand(viewer):
    make_mark("NB-1", 1000.0, 0.0)
    make_job()
    r = job_screen(actor=viewer, code="J-SCR", as_of=AS_OF)
    c = by_code(r)["NB-1"]
    assert not c.excluded and c.rank == 1
    assert c.distance_m == pytest.approx(1000.0, rel=1e-5)
    # [hand] rtk at 1 km: 8 + 1 = 9 mm (H per axis), 15 + 1 = 16 mm (V); base 3 / 5; drift 0 (same frame and
    # epoch); motion to the field date ≈ 0 (as-of date 2025-07-01 ≈ epoch 2025.5); base setup 2 / 3 and rover
    # pole 2 / 3 (common practice). σ_h = √(81 + 9 + 4 + 4) = √98 = 9.89949 → H95 = 2.4477468·9.89949 = 24.2315 mm;
    # σ_v = √(256 + 25 + 9 + 9) = √299 = 17.29162 → V95 = 1.959964·17.29162 = 33.8909 mm.
    assert c.budget["rtk"]["h"] == pytest.approx(9.0, abs=1e-3) and c.budget["rtk"]["v"] == pytest.approx(
        16.0, abs=1e-3
    )
    assert c.budget["base"] == {"h": pytest.approx(3.0), "v": pytest.approx(5.0)}
    assert c.budget["drift"] == {"h": 0.0, "v": 0.0}
    assert c.budget["rover"] == {"h": 2.0, "v": 3.0}
    assert c.h95_mm == pytest.approx(24.2315, abs=2e-3)
    assert c.v95_mm == pytest.approx(33.8909, abs=2e-3)
    assert c.covers_site and c.coverage == 1.0
    assert r.chosen == [c]
    # Distance and azimuth from the site (geodesic, pyproj Geod): the mark was placed 1000 m at azimuth 0°.
    assert c.distance_m == pytest.approx(1000.0, abs=1e-6)
    assert min(c.azimuth_deg, 360 - c.azimuth_deg) < 1e-7
    assert "covers the whole site" in r.statement
    d = r.as_dict()
    row = d["candidates"][0]
    # machine output keeps its precision (0.001 mm), not the page's 0.1 mm
    assert row["code"] == "NB-1"
    assert row["horizontal_95_mm"] == pytest.approx(24.2315, abs=2e-3) and row["horizontal_95_mm"] != 24.2
    assert row["vertical_95_mm"] == pytest.approx(33.8909, abs=2e-3) and row["vertical_95_mm"] != 33.9
    assert [b["term"] for b in row["budget"]] == ["rtk", "base", "drift", "motion", "setup", "rover", "geoid"]
    assert row["excluded"] is False and row["reasons"] == []


@pytest.mark.django_db
def test_every_exclusion_is_listed_with_its_reason(viewer):
    make_mark("OK-1", 800.0, 10.0)
    make_mark("OK-2", 1500.0, 120.0)
    make_mark("RT-1", 900.0, 20.0, status=MarkStatus.RETIRED)
    make_mark("DS-1", 900.0, 30.0, visits=(("2020-01-01", "intact"), ("2024-05-01", Finding.DISTURBED)))
    make_mark("DT-1", 900.0, 40.0, visits=(("2020-01-01", "intact"), ("2024-05-01", Finding.DESTROYED)))
    make_mark("NF-1", 900.0, 50.0, visits=(("2020-01-01", "intact"), ("2024-05-01", Finding.SEARCHED_NOT_FOUND)))
    make_mark("OL-1", 900.0, 60.0, visits=(("2013-01-01", "intact"), ("2024-05-01", Finding.DAMAGED)))
    make_mark("NP-1", 900.0, 70.0, state=PositionState.WITHDRAWN)
    make_mark("FR-1", 900.0, 80.0, frame=4959)  # NZGD2000: only a ballpark route to NAD83(2011), refused
    make_mark("SK-1", 900.0, 90.0, sky=SkyView.OBSTRUCTED)
    make_mark("FA-1", 10_500.0, 100.0)  # 10.5 km: beyond the 10 km maximum baseline (common practice)
    make_mark("FU-1", 14_000.0, 100.0)  # beyond the search radius (1.25 × 10 km): not a candidate at all
    make_job()
    r = job_screen(actor=viewer, code="J-SCR", as_of=AS_OF)
    got = {c.mark.code: c.reasons for c in r.candidates}
    assert got == {
        "OK-1": [],
        "OK-2": [],
        "RT-1": ["not_active"],
        "DS-1": ["last_visit_disturbed"],
        "DT-1": ["last_visit_destroyed"],
        "NF-1": ["last_visit_not_found"],
        "OL-1": ["no_recent_good_visit"],
        "NP-1": ["no_published_position"],
        "FR-1": ["frame_not_transformable"],
        "SK-1": ["sky_obstructed"],
        "FA-1": ["beyond_max_baseline"],
    }
    assert [c.mark.code for c in r.candidates[:2]] == ["OK-1", "OK-2"]
    assert all(c.excluded for c in r.candidates[2:])
    assert by_code(r)["OK-2"].azimuth_deg == pytest.approx(120.0, abs=1e-7)  # placed at azimuth 120°
    rows = {row["code"]: row for row in r.as_dict()["candidates"]}
    assert rows["FR-1"]["reasons"][0]["words"].startswith("its published frame cannot")
    assert rows["NP-1"]["horizontal_95_mm"] is None
    # A visit after the as-of date is ignored (screening "as of" a date is reproducible).
    Visit.objects.create(mark=Mark.objects.get(code="OK-1"), visited_on=dt.date(2025, 8, 1), finding="destroyed")
    assert by_code(job_screen(actor=viewer, code="J-SCR", as_of=AS_OF))["OK-1"].reasons == []


@pytest.mark.django_db
def test_drift_with_assumed_rate_and_with_velocity(viewer):
    make_mark("AR-1", 2000.0, 0.0, epoch=2015.5)  # 10 yr before the job's epoch, no velocity
    make_mark("VE-1", 2000.0, 180.0, epoch=2015.5, velocity=(0.001, -0.002, 0.0005), vel_sigma=(0.0003, 0.0004, 0.001))
    make_job()
    r = by_code(job_screen(actor=viewer, code="J-SCR", as_of=AS_OF))
    # [hand] NAD83(2011) is plate-fixed: the job's plate-fixed assumed rate 0.5 mm/yr × 10 yr = 5 mm per axis.
    assert r["AR-1"].budget["drift"] == {"h": pytest.approx(5.0), "v": pytest.approx(5.0)}
    # [hand] velocity σ × 10 yr: max(0.3, 0.4) mm/yr → 4 mm horizontal; 1 mm/yr → 10 mm vertical.
    assert r["VE-1"].budget["drift"] == {"h": pytest.approx(4.0), "v": pytest.approx(10.0)}
    # The position was propagated along its velocity: 10 yr × 2 mm/yr south ≈ 2 cm (1.8e-7° of latitude).
    p = Position.objects.get(mark__code="VE-1")
    assert (r["VE-1"].lat_deg - p.lat_deg) * 111_132 == pytest.approx(-0.020, abs=0.001)
    assert r["VE-1"].h95_mm < r["AR-1"].h95_mm


@pytest.mark.django_db
def test_the_assumed_rate_follows_the_frame_the_coordinates_are_held_in(viewer):
    """[hand] A NAD83(2011) position of 2010.0 for an ITRF2014 job at 2025.5: held 15.5 yr in its plate-fixed
    frame (0.5 mm/yr → 7.75 mm), then changed to ITRF2014 at 2025.5 (PROJ's time-dependent transformation
    carries the plate's motion). An ITRF2014 position of 2020.0 for a NAD83(2011) job at 2025.5: changed at 2020.0,
    then held 5.5 yr in NAD83(2011) (0.5 mm/yr → 2.75 mm). The job's dynamic rate (2 mm/yr) applies to neither."""
    make_mark("PF-1", 1500.0, 45.0, frame=6319, epoch=2010.0)
    make_mark("DY-1", 1500.0, 225.0, frame=7912, epoch=2020.0)
    make_job(
        code="J-ITRF", frame_epsg=7912, epoch_yr=2025.5, assumed_rate_mm_yr=2.0, assumed_rate_plate_fixed_mm_yr=0.5
    )
    make_job(code="J-NAD", frame_epsg=6319, epoch_yr=2025.5, assumed_rate_mm_yr=2.0, assumed_rate_plate_fixed_mm_yr=0.5)
    itrf = by_code(job_screen(actor=viewer, code="J-ITRF", as_of=AS_OF))
    assert itrf["PF-1"].budget["drift"] == {"h": pytest.approx(7.75), "v": pytest.approx(7.75)}
    assert [s["kind"] for s in itrf["PF-1"].steps] == ["hold", "frame_change"]
    nad = by_code(job_screen(actor=viewer, code="J-NAD", as_of=AS_OF))
    assert nad["DY-1"].budget["drift"] == {"h": pytest.approx(2.75), "v": pytest.approx(2.75)}
    assert [s["kind"] for s in nad["DY-1"].steps] == ["frame_change", "hold"]


@pytest.mark.django_db
def test_other_frame_is_transformed_to_the_jobs(viewer):
    make_mark("IT-1", 1500.0, 45.0, frame=7912, epoch=2025.5)
    make_job()
    c = by_code(job_screen(actor=viewer, code="J-SCR", as_of=AS_OF))["IT-1"]
    assert not c.excluded
    assert [s["kind"] for s in c.steps] == ["frame_change"]
    # ITRF2014 → NAD83(2011) moves a point near 45° N, 110° W by about a metre (PROJ, EPSG:7912→6319).
    p = c.position
    _, _, moved = GEOD.inv(p.lon_deg, p.lat_deg, c.lon_deg, c.lat_deg)
    assert 0.5 < moved < 2.0


@pytest.mark.django_db
def test_polygon_site_pair_and_check_marks(viewer):
    # A 6 km east–west strip, 400 m wide, centred on the site point. Good bases 50 m beyond both ends;
    # trusted marks inside whose own σ (12 mm per axis) is too large for a base but fine for a check.
    w_lat, w_lon = at(3000.0, 270.0)
    e_lat, e_lon = at(3000.0, 90.0)
    dn = 200.0 / 111_132
    ring = [[w_lon, w_lat - dn], [e_lon, e_lat - dn], [e_lon, e_lat + dn], [w_lon, w_lat + dn], [w_lon, w_lat - dn]]
    make_mark("WE-1", 3050.0, 270.0)
    make_mark("EA-1", 3050.0, 90.0)
    make_mark("CK-1", 100.0, 0.0, sigma_h_mm=12.0)
    make_mark("CK-2", 2000.0, 90.0, sigma_h_mm=12.0)
    make_mark("CK-3", 1800.0, 270.0, sigma_h_mm=12.0)
    make_mark("BAD-1", 50.0, 180.0, sky=SkyView.OBSTRUCTED)  # not trusted: never a base or a check mark
    make_job(site={"type": "Polygon", "coordinates": [ring]}, tol_h_mm=27.0, tol_v_mm=100.0)
    r = job_screen(actor=viewer, code="J-SCR", as_of=AS_OF)
    assert 400 <= r.grid.n_cells <= 2500
    assert {c.mark.code for c in r.pair} == {"WE-1", "EA-1"}
    assert not any(c.covers_site for c in r.candidates)
    # [hand] coverage radius of an end base: 2.4477468·√((8 + d_km)² + 3² + 2² + 2²) ≤ 27 (base, base setup,
    # rover pole) → d = √((27/2.4477468)² − 17) − 8 = 2.23099 km. From x = ±3050 m it reaches x = ±(3050 − √(r² − y²)),
    # so the covered fraction of the strip is the mean over y ∈ [−200, 200] of (√(r² − y²) − 50)/3000.
    rad = math.sqrt((27 / K_H) ** 2 - 17) * 1000 - 8000
    ys = [(-200 + 400 * (i + 0.5) / 1000) for i in range(1000)]
    expected = sum((math.sqrt(rad**2 - y * y) - 50) / 3000 for y in ys) / len(ys)
    assert r.core.pair_coverage == pytest.approx(expected, abs=0.02)
    checks = [cm.candidate.mark.code for cm in r.check_marks]
    # Nearest the site first (CK-1, inside it); then the one farthest from CK-1 and both bases: CK-3
    # (1250 m from WE-1) rather than CK-2 (1050 m from EA-1).
    assert checks == ["CK-1", "CK-3"]
    for cm in r.check_marks:
        assert {a["base"] for a in cm.allowances} == {"WE-1", "EA-1"}
    ck1 = r.check_marks[0]
    allow = {a["base"]: a for a in ck1.allowances}
    c = by_code(r)
    # [hand] CK-1 from WE-1: baseline b; rtk (8 + b_km) per axis, WE-1 3 mm, base setup 2 mm, rover centring on
    # CK-1 2 mm (common practice), CK-1 12 mm:
    b = allow["WE-1"]["baseline_m"]
    h = K_H * math.sqrt((8 + b / 1000) ** 2 + 3**2 + 2**2 + 2**2 + 12**2)
    assert allow["WE-1"]["horizontal_95_mm"] == pytest.approx(h, abs=0.06)
    assert b == pytest.approx(math.hypot(c["WE-1"].e_m - c["CK-1"].e_m, c["WE-1"].n_m - c["CK-1"].n_m), abs=1e-3)
    assert "cannot be covered" in r.statement
    assert "WE-1 + EA-1" in r.statement or "EA-1 + WE-1" in r.statement
    # The best per point over both ends leaves the middle uncovered: the reachable tolerance is looser.
    assert r.core.achievable_h95_mm > 27.0


@pytest.mark.django_db
def test_nothing_usable_says_so(viewer):
    make_mark("RT-9", 500.0, 0.0, status=MarkStatus.RETIRED)
    make_job()
    r = job_screen(actor=viewer, code="J-SCR", as_of=AS_OF)
    assert r.chosen == [] and r.check_marks == [] and r.pair is None
    assert "no base can be proposed" in r.statement
    make_job(code="J-EMPTY", site={"type": "Point", "coordinates": [-100.0, 40.0]})
    r2 = job_screen(actor=viewer, code="J-EMPTY", as_of=AS_OF)
    assert r2.candidates == [] and "No marks" in r2.statement


@pytest.mark.django_db
def test_access(make_user):
    make_job()
    nobody = make_user("nobody", None)
    with pytest.raises(NotFound):
        job_screen(actor=nobody, code="J-SCR")
    with pytest.raises(NotFound):
        job_screen(actor=make_user("v2", "viewer"), code="J-NOPE")


@pytest.mark.django_db
def test_ad_hoc_site(viewer):
    make_mark("NB-1", 1000.0, 0.0)
    r = site_screen(
        actor=viewer,
        data={
            "site_geojson": {"type": "Point", "coordinates": [SITE_LON, SITE_LAT]},
            "frame_epsg": 6319,
            "epoch_yr": 2025.5,
            "tol_h_mm": 30,
            "tol_v_mm": 40,
            "rtk_combination": "rss",
        },
        as_of=AS_OF,
    )
    c = r.candidates[0]
    # [hand] RSS at 1 km: √(8² + 1²) = 8.0623 mm; σ_h = √(65 + 9 + 4 + 4) = √82 → H95 = 2.4477468·9.05539
    # = 22.1653 mm (base, base setup, rover pole)
    assert c.h95_mm == pytest.approx(22.1653, abs=2e-3)
    assert r.as_dict()["job"] is None
    with pytest.raises(ValidationError) as info:
        site_screen(actor=viewer, data={"site_geojson": {"type": "Point", "coordinates": [SITE_LON, SITE_LAT]}})
    assert {k: [e.code for e in v] for k, v in info.value.error_dict.items()} == {
        "frame_epsg": ["required"],
        "epoch_yr": ["required"],
        "tol_h_mm": ["required"],
        "tol_v_mm": ["required"],
    }
    assert math.isfinite(r.core.achievable_h95_mm)
