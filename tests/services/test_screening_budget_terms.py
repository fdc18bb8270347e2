"""Screening budget refinements (review S-1, S-2, S-13, N-6, N-7): frame-change accuracy in the base term,
coverage words, base → site height difference, cautions.

Invented data (a fictional district near 45.20° N, 110.60° W), built with the helpers of test_screening.
Check values are computed by hand beside each assertion; PROJ's stated accuracies are read with pyproj
from PROJ's copy of the EPSG database (the outside source named where used).
"""

from __future__ import annotations

import datetime as dt
import math

import pytest

from registry.geodesy.site import parse_site_geojson
from registry.services.screening import CAUTIONS, Candidate, job_screen
from tests.services.test_screening import SITE_LAT, SITE_LON, at, by_code, make_job, make_mark

AS_OF = dt.date(2025, 7, 1)
K_H, K_V = 2.4477468, 1.959964  # √(−2 ln 0.05) and z(0.975), FGDC-STD-007.3-1998 §3.2.1 (2.4477, 1.9600)


@pytest.mark.django_db
def test_frame_change_accuracy_enters_the_base_term(viewer):
    # Job in ITRF2020 (EPSG:9989). PROJ's EPSG database states 0.001 m for "ITRF2014 to ITRF2020 (1)" and 0 m
    # for "ITRF2020 to NAD83(2011) (1)" (NAD83(2011) is defined through it: exact by definition); read with
    # pyproj's Transformer.accuracy (PROJ 9.5). Same epoch everywhere: no drift.
    make_mark("IT14", 1000.0, 0.0, frame=7912, epoch=2025.5)  # σ 3 / 5 mm
    make_mark("NA11", 1000.0, 90.0, frame=6319, epoch=2025.5)
    make_mark("IT20", 1000.0, 180.0, frame=9989, epoch=2025.5)
    make_job(frame_epsg=9989)
    r = job_screen(actor=viewer, code="J-SCR", as_of=AS_OF)
    c = by_code(r)
    it14 = c["IT14"]
    assert [s["accuracy_m"] for s in it14.steps if s["kind"] == "frame_change"] == [0.001]
    # [hand] 0.001 m read as 1σ per axis = 1 mm: base H = √(3² + 1²) = √10 = 3.162278 mm, V = √(5² + 1²) = √26
    # = 5.099020 mm.
    assert it14.budget["base"]["h"] == pytest.approx(math.sqrt(10), rel=1e-9)
    assert it14.budget["base"]["v"] == pytest.approx(math.sqrt(26), rel=1e-9)
    # [hand] rtk 9 / 16 mm at 1 km, setup 2 / 3: H95 = 2.4477468·√(81 + 10 + 4) = 2.4477468·√95 = 23.8578 mm.
    assert it14.h95_mm == pytest.approx(K_H * math.sqrt(99), abs=2e-3)
    assert "read as 1σ per axis" in it14.base_description()
    # Exact by definition: nothing added, and the description says so.
    assert c["NA11"].budget["base"] == {"h": pytest.approx(3.0), "v": pytest.approx(5.0)}
    assert "stated exact (0 m), adds nothing" in c["NA11"].base_description()
    # The job's own frame: no frame change, no note.
    assert c["IT20"].budget["base"] == {"h": pytest.approx(3.0), "v": pytest.approx(5.0)}
    assert c["IT20"].frame_change_note == ""
    rows = {row["code"]: row for row in r.as_dict()["candidates"]}
    base_row = next(b for b in rows["IT14"]["budget"] if b["term"] == "base")
    assert (
        base_row["h_mm"] == pytest.approx(3.162, abs=1e-3) and "frame change" in base_row["description"]
    )  # √(3² + 1²), JSON to 0.001 mm


@pytest.mark.django_db
def test_check_allowance_includes_frame_change_and_rover_centring(viewer):
    # Base in the job frame, check mark in ITRF2014 (0.001 m stated, PROJ EPSG database, see above).
    make_mark("BASE", 500.0, 0.0, frame=9989, epoch=2025.5)
    make_mark("CHK", 150.0, 180.0, frame=7912, epoch=2025.5, sigma_h_mm=4.0, sigma_v_mm=6.0)
    make_job(frame_epsg=9989)
    r = job_screen(actor=viewer, code="J-SCR", as_of=AS_OF)
    assert [c.mark.code for c in r.chosen] == ["BASE"]
    (cm,) = r.check_marks
    a = cm.allowances[0]
    b_km = a["baseline_m"] / 1000  # about 0.65 km
    # [hand] rtk (8 + b) / (15 + b); base 3 / 5; base setup 2 / 3; rover on the check 2 / 3; check 4 / 6 plus the
    # frame change 1 / 1 in quadrature; no drift.
    h = K_H * math.sqrt((8 + b_km) ** 2 + 9 + 4 + 4 + 16 + 1)
    v = K_V * math.sqrt((15 + b_km) ** 2 + 25 + 9 + 9 + 36 + 1)
    assert a["horizontal_95_mm"] == pytest.approx(h, abs=0.06)
    assert a["vertical_95_mm"] == pytest.approx(v, abs=0.06)
    # the screening's machine output is to 0.001 mm: the allowances are rounded there, not finer
    assert (a["horizontal_95_mm"], a["vertical_95_mm"]) == (
        round(a["horizontal_95_mm"], 3),
        round(a["vertical_95_mm"], 3),
    )


def test_coverage_words():
    def cand(coverage, margin, reasons=()):
        return Candidate(mark=None, reasons=list(reasons), coverage=coverage, margin_mm=margin)

    assert cand(1.0, 0.0).coverage_words == "covers site"
    assert cand(0.0, -5.0).coverage_words == "covers none"  # was "partial" at 0 % (review S-13)
    assert cand(0.2849, -5.0).coverage_words == "covers 28 %"
    assert cand(0.004, -5.0).coverage_words == "covers <1 %"  # never "0 %" when some of it is covered
    # Every cell covered but a boundary sample is not: not the whole site, never "100 %".
    assert cand(1.0, -0.1).coverage_words == "covers >99 %"


@pytest.mark.django_db
def test_height_difference_reported_and_warned(viewer):
    # Marks are made at h = 1500 m (test_screening.make_mark). [hand] point site at 1150 m: |Δh| = 350 m > 300 m
    # (common practice threshold) → a warning on the chosen base, shown with the result; no change to the budget.
    make_mark("HI-1", 1000.0, 0.0)
    make_job(site={"type": "Point", "coordinates": [SITE_LON, SITE_LAT, 1150.0]})
    r = job_screen(actor=viewer, code="J-SCR", as_of=AS_OF)
    c = by_code(r)["HI-1"]
    assert c.max_dh_m == pytest.approx(350.0, abs=1e-6)
    assert any("350 m above or below the site" in w for w in r.warnings)
    assert c.warnings == [
        "HI-1 is up to 350 m above or below the site (ellipsoidal heights): beyond 300 m, unmodelled troposphere "
        "degrades RTK, mostly in height (common practice); the budget does not include it."
    ]
    assert c.h95_mm == pytest.approx(24.2315, abs=2e-3)  # same hand value as without heights (test_screening)
    row = r.as_dict()["candidates"][0]
    assert row["max_height_difference_m"] == 350.0 and r.as_dict()["site"]["heights_given"] == 1


@pytest.mark.django_db
def test_height_difference_over_polygon_vertices_and_without_heights(viewer):
    make_mark("LO-1", 1000.0, 0.0)
    (s_lat, w_lon), (n_lat, e_lon) = at(300.0, 225.0), at(300.0, 45.0)
    ring = [[w_lon, s_lat, 1450.0], [e_lon, s_lat, 1480.0], [e_lon, n_lat, 1520.0], [w_lon, n_lat, 1460.0]]
    ring.append(ring[0])
    assert parse_site_geojson({"type": "Polygon", "coordinates": [ring]}).heights_m == (1450.0, 1480.0, 1520.0, 1460.0)
    make_job(site={"type": "Polygon", "coordinates": [ring]})
    c = by_code(job_screen(actor=viewer, code="J-SCR", as_of=AS_OF))["LO-1"]
    # [hand] base 1500 m; vertices 1450…1520 m → max |Δh| = 50 m; below 300 m: no warning.
    assert c.max_dh_m == pytest.approx(50.0, abs=1e-6)
    assert not any("above or below the site" in w for w in c.warnings)
    make_job(code="J-FLAT")
    c2 = by_code(job_screen(actor=viewer, code="J-FLAT", as_of=AS_OF))["LO-1"]
    assert math.isnan(c2.max_dh_m)


def test_cautions_name_fixed_solution_and_specification_reading():
    text = " ".join(CAUTIONS)
    assert "fixed (ambiguity-resolved) solution and an open sky" in text
    assert "reading of receiver specifications (common practice), not a field result" in text
