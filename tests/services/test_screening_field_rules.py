"""Screening rules a crew relies on (issue "numbers a crew can trust", items 1–8 and 13).

Each test fails on the screening before these rules (it had no motion, rover or geoid term, no suspect
reason, a whole-site baseline rule, margin-first ranking, positions regardless of the as-of date) and
checks the figure against a hand computation written out beside it. Invented marks near 45.20° N,
110.60° W (tests.services.test_screening.make_mark; positions at h = 1500 m, σ 3 / 5 mm).
"""

from __future__ import annotations

import datetime as dt
import math

import numpy as np
import pytest

from registry.geodesy import rtk
from registry.geodesy.rtk import RtkErrorModel, screen_candidates
from registry.models import Finding, Mark, Position
from registry.services.fieldwork import visit_record
from registry.services.screening import job_screen, text_report
from registry.services.screening.export import export_rows
from registry.services.suspect import mark_clear_suspect
from tests.services.test_screening import AS_OF, K_H, K_V, at, by_code, make_job, make_mark

pytestmark = pytest.mark.django_db


# ----------------------------------------------------------------------------- 1. motion to the field date


def test_base_motion_relative_to_the_site_up_to_the_field_date(viewer):
    """[hand] The demo's subsider: v = (−0.8, +0.5, −4.5) mm/yr, σ_v (0.3, 0.3, 0.8) mm/yr, published at 2010.0;
    three stable neighbours (v = 0, σ 0.1 mm/yr) → site median v_site = 0 (median of 0, 0, 0, −0.8 per axis).
    Field date 2026-12-04 = 2026 + (337 + 0.5)/365 = 2026.924658; Δt = 16.924658 yr after the deliverable epoch 2010.0.
    Offset (v_site − v_base)·Δt = (+13.5397, −8.4623, +76.1610) mm; σ_rel·|Δt| = (5.0774, 5.0774, 13.5397) mm
    (the median's standard error is 0: MAD 0). Horizontal term √(15.9666² + 5.0774²) = 16.7546 mm;
    vertical √(76.1610² + 13.5397²) = 77.3551 mm."""
    v_sub = (-0.0008, 0.0005, -0.0045)
    make_mark("SUB", 1000.0, 0.0, epoch=2010.0, velocity=v_sub, vel_sigma=(0.0003, 0.0003, 0.0008))
    for i, az in enumerate((90.0, 180.0, 270.0)):
        make_mark(f"ST-{i}", 1200.0, az, epoch=2010.0, velocity=(0, 0, 0), vel_sigma=(0.0001, 0.0001, 0.0001))
    make_job(epoch_yr=2010.0, field_date=dt.date(2026, 12, 4), tol_h_mm=30, tol_v_mm=50)
    r = job_screen(actor=viewer, code="J-SCR", as_of=dt.date(2026, 12, 4))
    c = by_code(r)
    dt_yr = 2026 + 337.5 / 365 - 2010.0
    off = [0.8 * dt_yr, -0.5 * dt_yr, 4.5 * dt_yr]
    assert c["SUB"].motion_offset_mm == pytest.approx(off, abs=1e-6)
    h = math.hypot(math.hypot(off[0], off[1]), 0.3 * dt_yr)
    v = math.hypot(off[2], 0.8 * dt_yr)
    assert c["SUB"].budget["motion"] == {"h": pytest.approx(h, abs=1e-6), "v": pytest.approx(v, abs=1e-6)}
    assert (h, v) == pytest.approx((16.7546, 77.3551), abs=1e-4)
    # The drift term (coordinate epoch = deliverable epoch) stays zero: the two periods are separate terms.
    assert c["SUB"].budget["drift"] == {"h": 0.0, "v": 0.0}
    # A stable neighbour: no offset, σ_v × Δt = 0.1 × 16.92 = 1.6925 mm per axis.
    assert c["ST-0"].budget["motion"]["h"] == pytest.approx(0.1 * dt_yr, abs=1e-6)
    assert c["SUB"].excluded is False and not c["SUB"].covers_site
    assert r.chosen[0].mark.code != "SUB"
    assert any("SUB moves relative to the site" in w for w in c["SUB"].warnings)
    assert r.as_dict()["settings"]["field_date"] == "2026-12-04"


def test_field_date_defaults_to_the_screening_date_and_plate_fixed_fallback(viewer):
    """[hand] No neighbour velocities, plate-fixed NAD83(2011): v_site = 0 with the job's plate-fixed rate 0.5 mm/yr
    as its uncertainty. A base without velocity: no offset, 0.5 × Δt; as of 2025-07-01 = 2025 + 181.5/365 =
    2025.497260, deliverable epoch 2015.5 → Δt = 9.997260 yr → 4.99863 mm per axis."""
    make_mark("NV-1", 1000.0, 0.0, epoch=2015.5)
    make_job(epoch_yr=2015.5)
    c = by_code(job_screen(actor=viewer, code="J-SCR", as_of=AS_OF))["NV-1"]
    dt_yr = 2025 + 181.5 / 365 - 2015.5
    assert c.budget["motion"]["h"] == pytest.approx(0.5 * dt_yr, abs=1e-9)
    assert c.motion_offset_mm is None


# ----------------------------------------------------------------------------- 2. suspect marks stay out


def test_disturbed_mark_stays_out_until_repositioned_or_cleared(viewer, technician, manager):
    make_mark("GOOD", 1500.0, 90.0)
    make_mark("DIST", 700.0, 0.0)
    make_job()
    visit_record(actor=technician, mark_code="DIST", data={"visited_on": "2025-03-01", "finding": Finding.DISTURBED})
    # A later "intact" report does not bring it back (the crew's look does not re-establish its coordinates).
    visit_record(actor=technician, mark_code="DIST", data={"visited_on": "2025-05-01", "finding": Finding.INTACT})
    c = by_code(job_screen(actor=viewer, code="J-SCR", as_of=AS_OF))["DIST"]
    assert c.reasons == ["suspect"]
    assert "until a new position is published or a manager clears it" in text_report_words(c)
    mark = Mark.objects.get(code="DIST")
    mark_clear_suspect(actor=manager, code="DIST", note="Checked against two ties", expected_version=mark.version)
    assert by_code(job_screen(actor=viewer, code="J-SCR"))["DIST"].reasons == []
    # as of the earlier date the mark was still suspect: the manager cleared it only today
    assert by_code(job_screen(actor=viewer, code="J-SCR", as_of=AS_OF))["DIST"].reasons == ["suspect"]


def text_report_words(c) -> str:
    from registry.services.screening.rules import REASON_WORDS

    return " ".join(REASON_WORDS[r] for r in c.reasons)


# ----------------------------------------------------------------------------- 3. baseline per site point


def test_22_km_corridor_is_served_by_two_marks():
    """[hand] A 22 km line of site points (x = 50 … 21 950 m, 100 m apart); marks at x = 5 500 and 16 500 m.
    Each serves its own half within 5.5 km (≤ 10 km); each is farther than 10 km from the far end. With a loose
    tolerance (1 m) the baseline alone limits: each covers the points within 10 km of it —
    x ≤ 15 500 for the first (155 of 220 points) and x ≥ 6 500 (155) for the second; together all 220."""
    x = np.arange(50.0, 22_000.0, 100.0)
    core = screen_candidates(
        x,
        np.zeros_like(x),
        np.ones(x.size, bool),
        np.array([5500.0, 16_500.0]),
        np.zeros(2),
        base_h_mm=np.zeros(2),
        base_v_mm=np.zeros(2),
        drift_h_mm=np.zeros(2),
        drift_v_mm=np.zeros(2),
        usable=np.ones(2, bool),
        model=RtkErrorModel(),
        tol_h_mm=1000.0,
        tol_v_mm=1000.0,
        max_baseline_m=10_000.0,
    )
    assert core.eligible.tolist() == [True, True]
    assert core.coverage.tolist() == pytest.approx([155 / 220, 155 / 220])
    assert core.pair is not None and sorted(core.pair) == [0, 1]
    assert core.pair_coverage == 1.0 and core.pair_worst_margin_mm >= 0
    # The tightest figures reachable honour the baseline: at x = 50 the first mark, 5 450 m away:
    # [hand] H95 = 2.4477468·√((8 + 5.45)² + 2² + 2²) = 33.2149 mm, not the second's 16.45 km figure.
    assert core.best_h95_mm[0] == pytest.approx(K_H * math.sqrt(13.45**2 + 8), abs=1e-3)


def test_corridor_job_chooses_both_marks(viewer):
    make_mark("END-W", 5_500.0, 270.0)
    make_mark("END-E", 5_500.0, 90.0)
    w_lat, w_lon = at(11_000.0, 270.0)
    e_lat, e_lon = at(11_000.0, 90.0)
    dn = 100.0 / 111_132
    ring = [[w_lon, w_lat - dn], [e_lon, e_lat - dn], [e_lon, e_lat + dn], [w_lon, w_lat + dn], [w_lon, w_lat - dn]]
    make_job(site={"type": "Polygon", "coordinates": [ring]}, tol_h_mm=200, tol_v_mm=200)
    r = job_screen(actor=viewer, code="J-SCR", as_of=AS_OF)
    assert {c.mark.code for c in r.chosen} == {"END-W", "END-E"}
    assert "no base can be proposed" not in r.statement and "The pair" in r.statement
    shares = {d["base"]: d["share"] for d in r.as_dict()["service_areas"]}
    assert sum(shares.values()) == pytest.approx(1.0, abs=1e-9)
    assert shares["END-W"] == pytest.approx(0.5, abs=0.02)


# ----------------------------------------------------------------------------- 4. coverage first


def test_coverage_ranks_before_margin():
    """[hand] Site points x = 50 … 9 950 m. A at x = 4 950 m with base σ 9 mm: at d = 0, 2.4477·√(64 + 81 + 4 + 4)
    = 30.28 mm > 30: covers nothing; worst (4.9 km) 2.4477·√(12.9² + 89) = 39.13 mm → margin −9.13 mm.
    B at x = 0, base σ 0: covered while 2.4477·√((8 + d)² + 8) ≤ 30 → d ≤ √((30/2.4477)² − 8) − 8 = 3.9265 km:
    39 of 100 points; worst 2.4477·√(17.95² + 8) = 44.48 mm → margin −14.48. Margin alone ranks A first."""
    x = np.arange(50.0, 10_000.0, 100.0)
    core = screen_candidates(
        x,
        np.zeros_like(x),
        np.ones(x.size, bool),
        np.array([4950.0, 0.0]),
        np.zeros(2),
        base_h_mm=np.array([9.0, 0.0]),
        base_v_mm=np.zeros(2),
        drift_h_mm=np.zeros(2),
        drift_v_mm=np.zeros(2),
        usable=np.ones(2, bool),
        model=RtkErrorModel(),
        tol_h_mm=30.0,
        tol_v_mm=1000.0,
        max_baseline_m=10_000.0,
    )
    reach_km = math.sqrt((30 / K_H) ** 2 - 8) - 8
    assert core.coverage.tolist() == pytest.approx([0.0, np.mean(x <= reach_km * 1000)])
    assert core.margin_mm[0] > core.margin_mm[1]
    assert core.order.tolist() == [1, 0]


def test_greedy_cover_of_a_long_site_with_six_bases():
    """[hand] Site points x = 50 … 29 950 m; six bases at x = 2 500 + 5 000 i. Coverage radius for H95 ≤ 30 mm
    with base σ 0: 3.9265 km (as above), so each base covers its own 5 km stretch and no pair covers more than
    about 2 × 7.85 km of 30 km. The greedy cover takes all six and covers the whole line."""
    x = np.arange(50.0, 30_000.0, 100.0)
    bases = 2500.0 + 5000.0 * np.arange(6)
    z = np.zeros(6)
    core = screen_candidates(
        x,
        np.zeros_like(x),
        np.ones(x.size, bool),
        bases,
        z,
        base_h_mm=z,
        base_v_mm=z,
        drift_h_mm=z,
        drift_v_mm=z,
        usable=np.ones(6, bool),
        model=RtkErrorModel(),
        tol_h_mm=30.0,
        tol_v_mm=1000.0,
        max_baseline_m=10_000.0,
    )
    assert sorted(core.cover) == list(range(6))
    assert core.cover_coverage == 1.0
    assert core.pair_coverage < 0.6
    margins = rtk.point_margins_mm(
        core.cover,
        x,
        np.zeros_like(x),
        bases,
        z,
        core.const_h2,
        core.const_v2,
        model=RtkErrorModel(),
        tol_h_mm=30.0,
        tol_v_mm=1000.0,
        max_baseline_m=10_000.0,
    )
    served = np.array(core.cover)[rtk.assign_service_areas(margins)]
    # Each point is served by the nearest base (the best margin with equal base terms).
    assert served.tolist() == np.argmin(np.abs(x[:, None] - bases[None, :]), axis=1).tolist()


# ----------------------------------------------------------------------------- 5. rover pole, 6. RTK reading


def test_rover_pole_terms_come_from_the_job(viewer):
    """[hand] rtk 9 / 16 mm at 1 km, base 3 / 5, base setup 2 / 3, rover 5 / 0 mm:
    H95 = 2.4477468·√(81 + 9 + 4 + 25) = 2.4477468·√119 = 26.7016 mm; V95 = 1.959964·√(256 + 25 + 9) = 33.3770 mm."""
    make_mark("NB-1", 1000.0, 0.0)
    make_job(rover_h_mm=5.0, rover_v_mm=0.0)
    r = job_screen(actor=viewer, code="J-SCR", as_of=AS_OF)
    c = by_code(r)["NB-1"]
    assert c.budget["rover"] == {"h": 5.0, "v": 0.0}
    assert c.h95_mm == pytest.approx(K_H * math.sqrt(119), abs=2e-3)
    assert c.v95_mm == pytest.approx(K_V * math.sqrt(290), abs=2e-3)
    assert r.as_dict()["settings"]["rover_h_mm"] == 5.0


def test_rtk_reading_is_printed_on_command_and_export(viewer):
    make_mark("NB-1", 1000.0, 0.0)
    make_job(rtk_h_meaning="drms")
    r = job_screen(actor=viewer, code="J-SCR", as_of=AS_OF)
    text = "\n".join(text_report(r))
    assert "read as 2D RMS" in text
    rows = export_rows(r)
    assert rows and all("read as 2D RMS" in row["rtk_model"] for row in rows)
    make_job(code="J-DEF")
    text = "\n".join(text_report(job_screen(actor=viewer, code="J-DEF", as_of=AS_OF)))
    assert "read as 1σ per horizontal axis (the conservative reading" in text


# ----------------------------------------------------------------------------- 7. check marks


def test_check_marks_prefer_stable_well_positioned_marks(viewer):
    make_mark("BASE", 300.0, 0.0, sigma_h_mm=1.0, sigma_v_mm=2.0)
    make_mark("LOOSE", 50.0, 90.0)  # nearest, but its expected stability is unknown
    make_mark("FIRM-1", 120.0, 180.0)
    make_mark("FIRM-2", 150.0, 270.0)
    Mark.objects.filter(code__startswith="FIRM").update(stability="high")
    make_job(tol_h_mm=40, tol_v_mm=60)
    r = job_screen(actor=viewer, code="J-SCR", as_of=AS_OF)
    assert [c.mark.code for c in r.chosen] == ["BASE"]
    picks = [cm.candidate.mark.code for cm in r.check_marks]
    assert picks == ["FIRM-1", "FIRM-2"]
    a = r.check_marks[0].allowances[0]
    assert a["tolerance_horizontal_95_mm"] == 40 and a["tolerance_vertical_95_mm"] == 60
    # The allowance is the 95 % of its terms: H = 2.4477468·√Σh², V = 1.959964·√Σv² (terms rounded to 0.1 mm).
    sh = math.sqrt(sum(t["h_mm"] ** 2 for t in a["terms"]))
    assert a["horizontal_95_mm"] == pytest.approx(K_H * sh, abs=0.3)
    assert {t["term"] for t in a["terms"]} >= {"rtk", "base", "rover pole", "check mark"}


# ----------------------------------------------------------------------------- 8. as-of, farthest, split


def test_as_of_applies_to_positions(viewer):
    make_mark("LATE", 1000.0, 0.0)
    Position.objects.filter(mark__code="LATE").update(decided_at=dt.datetime(2025, 8, 1, tzinfo=dt.UTC))
    make_job()
    assert by_code(job_screen(actor=viewer, code="J-SCR", as_of=AS_OF))["LATE"].reasons == ["no_published_position"]
    assert by_code(job_screen(actor=viewer, code="J-SCR", as_of=dt.date(2025, 8, 2)))["LATE"].reasons == []


def test_text_table_shows_the_farthest_distance_and_split_achievable(viewer):
    w_lat, w_lon = at(1000.0, 270.0)
    e_lat, e_lon = at(1000.0, 90.0)
    dn = 100.0 / 111_132
    ring = [[w_lon, w_lat - dn], [e_lon, e_lat - dn], [e_lon, e_lat + dn], [w_lon, w_lat + dn], [w_lon, w_lat - dn]]
    # Good horizontally, poor vertically, and the reverse, both at the site's centre.
    make_mark("H-GOOD", 10.0, 0.0, sigma_h_mm=1.0, sigma_v_mm=30.0)
    make_mark("V-GOOD", 10.0, 180.0, sigma_h_mm=15.0, sigma_v_mm=1.0)
    make_job(site={"type": "Polygon", "coordinates": [ring]})
    r = job_screen(actor=viewer, code="J-SCR", as_of=AS_OF)
    assert r.core.achievable_split is True
    assert "different bases" in r.statement or r.chosen
    text = "\n".join(text_report(r))
    assert "far m" in text and "H and V from different bases" in text
    row = next(line for line in text.splitlines() if " H-GOOD " in line)
    assert f"{by_code(r)['H-GOOD'].max_distance_m:10.1f}" in row


# ----------------------------------------------------------------------------- 13. orthometric deliverable


def test_orthometric_deliverable_adds_the_geoid_term(viewer, settings):
    """[hand] Office geoid model stated at 15 mm (REGISTRY_GEOID_SIGMA_MM): V95 = 1.959964·√(256 + 25 + 9 + 9 + 225)
    = 1.959964·√524 = 44.8656 mm (rtk 16, base 5, base setup 3, rover 3, geoid 15)."""
    settings.REGISTRY = {**settings.REGISTRY, "GEOID_NAME": "Office hybrid geoid", "GEOID_SIGMA_MM": 15.0}
    make_mark("NB-1", 1000.0, 0.0)
    make_job(vertical_deliverable="orthometric")
    r = job_screen(actor=viewer, code="J-SCR", as_of=AS_OF)
    c = by_code(r)["NB-1"]
    assert c.budget["geoid"] == {"h": 0.0, "v": 15.0}
    assert c.v95_mm == pytest.approx(K_V * math.sqrt(524), abs=2e-3)
    assert r.as_dict()["settings"]["geoid_model"] == "Office hybrid geoid"
    make_job(code="J-ELL")
    assert by_code(job_screen(actor=viewer, code="J-ELL", as_of=AS_OF))["NB-1"].budget["geoid"]["v"] == 0.0


def test_orthometric_deliverable_holds_the_bases_height_record(viewer, settings):
    """[hand] With orthometric heights delivered, a base that has an orthometric height on record is held at it:
    its σ replaces the ellipsoidal 5 mm in the vertical base term (H_rover = H_base + Δh − ΔN; ΔN is the geoid
    term). Levelled 3 mm: V95 = 1.959964·√(256 + 9 + 9 + 9 + 225) = 1.959964·√508 = 44.1752 mm. Geoid-derived
    with a global model, 80 mm: √(256 + 6400 + 9 + 9 + 225) = √6899 → 162.7960 mm. No record: the 5 mm, 44.8656 mm
    as in the test above. An ellipsoidal deliverable ignores the records."""
    from registry.models import HeightRecord

    settings.REGISTRY = {**settings.REGISTRY, "GEOID_NAME": "Office hybrid geoid", "GEOID_SIGMA_MM": 15.0}
    for code, az in (("LV-1", 0.0), ("GD-1", 120.0), ("NO-1", 240.0)):
        make_mark(code, 1000.0, az)
    HeightRecord.objects.create(
        mark=Mark.objects.get(code="LV-1"), datum_epsg=5703, height_m=1512.3, sigma_m=0.003, method="levelled"
    )
    HeightRecord.objects.create(
        mark=Mark.objects.get(code="GD-1"),
        datum_epsg=5703,
        height_m=1511.0,
        sigma_m=0.080,
        method="geoid",
        geoid_model="invented global model",
    )
    make_job(vertical_deliverable="orthometric")
    r = by_code(job_screen(actor=viewer, code="J-SCR", as_of=AS_OF))
    assert r["LV-1"].budget["base"]["v"] == pytest.approx(3.0)
    assert r["LV-1"].v95_mm == pytest.approx(K_V * math.sqrt(508), abs=2e-3)
    assert "levelled orthometric height (NAVD88 height (EPSG:5703)), σ 3.0 mm" in r["LV-1"].base_description()
    assert r["GD-1"].v95_mm == pytest.approx(K_V * math.sqrt(6899), abs=2e-3)
    assert "geoid model invented global model" in r["GD-1"].base_description()
    assert r["NO-1"].v95_mm == pytest.approx(K_V * math.sqrt(524), abs=2e-3)
    assert r["NO-1"].height_note == ""
    make_job(code="J-ELL")
    ell = by_code(job_screen(actor=viewer, code="J-ELL", as_of=AS_OF))
    assert ell["LV-1"].budget["base"]["v"] == pytest.approx(5.0) and ell["LV-1"].height_note == ""


def test_control_export_carries_grid_factor_and_levelled_height(viewer):
    """Grid coordinates and scale factor against pyproj directly (EPSG:6319 → EPSG:6341, UTM 12N, and
    Proj.get_factors); elevation factor written out: R = √(ρν) on GRS80 at the mark's latitude,
    EF = R / (R + h) with h = 1500 m ellipsoidal; combined = k · EF. A levelled height is delivered before a
    geoid-derived one even when the latter states a smaller σ."""
    from pyproj import Proj, Transformer

    from registry.models import HeightRecord

    make_mark("NB-1", 1000.0, 0.0)
    mark = Mark.objects.get(code="NB-1")
    HeightRecord.objects.create(mark=mark, datum_epsg=5703, height_m=1512.345, sigma_m=0.008, method="levelled")
    HeightRecord.objects.create(
        mark=mark, datum_epsg=3855, height_m=1511.0, sigma_m=0.002, method="geoid", geoid_model="invented model"
    )
    make_job()
    r = job_screen(actor=viewer, code="J-SCR", as_of=AS_OF)
    row = next(row for row in export_rows(r) if row["code"] == "NB-1")
    c = by_code(r)["NB-1"]
    e, n = Transformer.from_crs(6319, 6341, always_xy=True).transform(c.lon_deg, c.lat_deg)
    assert float(row["easting_m"]) == pytest.approx(e, abs=0.0015)
    assert float(row["northing_m"]) == pytest.approx(n, abs=0.0015)
    k = Proj("EPSG:6341").get_factors(c.lon_deg, c.lat_deg).meridional_scale
    a, f = 6378137.0, 1 / 298.257222101
    e2 = f * (2 - f)
    s2 = math.sin(math.radians(c.lat_deg)) ** 2
    rho = a * (1 - e2) / (1 - e2 * s2) ** 1.5
    nu = a / math.sqrt(1 - e2 * s2)
    ef = math.sqrt(rho * nu) / (math.sqrt(rho * nu) + 1500.0)
    assert float(row["scale_factor"]) == pytest.approx(k, abs=1e-8)
    assert float(row["combined_factor"]) == pytest.approx(k * ef, abs=1e-8)
    assert row["orthometric_h_m"] == "1512.345" and row["height_datum_epsg"] == "5703"
    assert row["height_source"].startswith("levelled")
    assert "EPSG:6341" in row["grid"]
