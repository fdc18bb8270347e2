"""The exclusion rules of base screening, one by one (registry policy: registry.services.screening.rules)."""

from __future__ import annotations

import datetime as dt

import pytest

from registry.services.screening.rules import REASON_WORDS, MarkFacts, rule_reasons

# ---------------------------------------------------------------- exclusion rules, one by one

GOOD = MarkFacts(
    status="active",
    sky_view="clear",
    last_visit_condition="intact",
    years_since_good_visit=2.0,
    has_published_position=True,
    transformable=True,
)


@pytest.mark.parametrize(
    "change, reason",
    [
        ({"status": "retired"}, "not_active"),
        ({"status": "destroyed"}, "not_active"),
        ({"status": "suspect"}, "suspect"),
        ({"last_visit_condition": "disturbed"}, "last_visit_disturbed"),
        ({"last_visit_condition": "destroyed"}, "last_visit_destroyed"),
        ({"last_visit_condition": "searched_not_found"}, "last_visit_not_found"),
        ({"years_since_good_visit": 10.01}, "no_recent_good_visit"),
        ({"years_since_good_visit": None}, "no_recent_good_visit"),
        ({"has_published_position": False, "transformable": None}, "no_published_position"),
        ({"transformable": False}, "frame_not_transformable"),
        ({"sky_view": "obstructed"}, "sky_obstructed"),
    ],
)
def test_each_rule_alone(change, reason):
    from dataclasses import replace

    assert rule_reasons(GOOD, recovery_years=10) == []
    assert rule_reasons(replace(GOOD, **change), recovery_years=10) == [reason]
    assert reason in REASON_WORDS


def test_rule_edges():
    from dataclasses import replace

    # Exactly at the recovery limit still counts; a poor last visit alone does not exclude;
    # partial sky view does not exclude.
    assert rule_reasons(replace(GOOD, years_since_good_visit=10.0), recovery_years=10) == []
    assert rule_reasons(replace(GOOD, last_visit_condition="damaged"), recovery_years=10) == []
    assert rule_reasons(replace(GOOD, sky_view="partial"), recovery_years=10) == []


# ---------------------------------------------------------------- check-mark preference

# The 95 % factors, from outside the module: horizontal √(−2 ln 0.05) = 2.4477 (circular normal, equal σ
# per axis; FGDC-STD-007.3-1998 uses 2.4477 × σ for the horizontal 95 % figure), vertical 1.9600
# (two-sided 95 % of a normal distribution, any statistics table).
K_H = 2.4477468306808161
K_V = 1.9599639845400540


def _candidate(*, stability="high", base=(0.0, 0.0), drift=(0.0, 0.0), motion=(0.0, 0.0)):
    from types import SimpleNamespace

    from registry.services.screening.result import Candidate

    return Candidate(
        mark=SimpleNamespace(stability=stability, code="CK-1"),
        reasons=[],
        base_h_mm=base[0],
        base_v_mm=base[1],
        drift_h_mm=drift[0],
        drift_v_mm=drift[1],
        motion_h_mm=motion[0],
        motion_v_mm=motion[1],
    )


def _tolerances(h_mm, v_mm):
    from types import SimpleNamespace

    return SimpleNamespace(tol_h_mm=h_mm, tol_v_mm=v_mm)


# (3, 4, 12) → √(9 + 16 + 144) = 13 mm, a Pythagorean quadruple: every term counts, squared.
@pytest.mark.parametrize(
    "terms",
    [
        {"base": (3.0, 0.0), "drift": (4.0, 0.0), "motion": (12.0, 0.0)},
        {"base": (12.0, 0.0), "drift": (3.0, 0.0), "motion": (4.0, 0.0)},
        {"base": (4.0, 0.0), "drift": (12.0, 0.0), "motion": (3.0, 0.0)},
    ],
)
def test_preferred_check_horizontal_edge(terms):
    from registry.services.screening.checks import is_preferred_check

    own_h = K_H * 13.0  # the mark's own horizontal 95 % figure
    c = _candidate(**terms)
    wide_v = 1000.0
    # At most half the tolerance (checks.CHECK_WELL_POSITIONED_FRACTION, the project's rule).
    assert is_preferred_check(c, _tolerances(2 * own_h * (1 + 1e-9), wide_v))
    assert not is_preferred_check(c, _tolerances(2 * own_h * (1 - 1e-9), wide_v))


@pytest.mark.parametrize(
    "terms",
    [
        {"base": (0.0, 3.0), "drift": (0.0, 4.0), "motion": (0.0, 12.0)},
        {"base": (0.0, 12.0), "drift": (0.0, 3.0), "motion": (0.0, 4.0)},
        {"base": (0.0, 4.0), "drift": (0.0, 12.0), "motion": (0.0, 3.0)},
    ],
)
def test_preferred_check_vertical_edge(terms):
    from registry.services.screening.checks import is_preferred_check

    own_v = K_V * 13.0
    c = _candidate(**terms)
    assert is_preferred_check(c, _tolerances(1000.0, 2 * own_v * (1 + 1e-9)))
    assert not is_preferred_check(c, _tolerances(1000.0, 2 * own_v * (1 - 1e-9)))


@pytest.mark.parametrize(
    ("stability", "preferred"), [("high", True), ("moderate", True), ("low", False), ("unknown", False)]
)
def test_preferred_check_needs_a_stable_mark(stability, preferred):
    from registry.services.screening.checks import is_preferred_check

    c = _candidate(stability=stability, base=(1.0, 1.0))
    assert is_preferred_check(c, _tolerances(50.0, 50.0)) is preferred


# ---------------------------------------------------------------- placing


def test_years_between_counts_julian_years():
    from registry.services.screening.placing import years_between

    # A Julian year is 365.25 days (IAU; the unit of decimal-year epochs): 2020-01-01 → 2030-01-01 is
    # 3,653 days (three leap days), 10.0014 years.
    assert years_between(dt.date(2020, 1, 1), dt.date(2030, 1, 1)) == pytest.approx(3653 / 365.25, rel=1e-12)
    assert years_between(dt.date(2021, 1, 1), dt.date(2020, 1, 1)) == pytest.approx(-366 / 365.25, rel=1e-12)


@pytest.mark.django_db
def test_a_mark_published_in_two_frames_is_placed_from_the_jobs_frame(viewer):
    # placing module docstring: the published position in the job's frame first, else the first that
    # transforms. The ITRF2014 row is the older one and would be tried first without that preference.
    from registry.models import Position
    from registry.services.screening import job_screen
    from tests.services.test_screening import AS_OF, by_code, make_job, make_mark

    mark = make_mark("TWO", 800.0, 45.0, frame=7912, epoch=2025.5, sigma_h_mm=9.0)
    own = Position.objects.get(mark=mark)
    own.pk = None
    own.frame_epsg = 6319  # the job's frame, σ 2 mm
    own.cov_ee_m2 = own.cov_nn_m2 = 0.002**2
    own.save()
    make_job(frame_epsg=6319)
    c = by_code(job_screen(actor=viewer, code="J-SCR", as_of=AS_OF))["TWO"]
    assert c.position.pk == own.pk and c.position.frame_epsg == 6319
    assert c.position_h_mm == pytest.approx(2.0, rel=1e-9) and c.frame_change_mm == 0.0


@pytest.mark.django_db
def test_a_mark_never_found_intact_is_screened_out_with_its_reason(viewer):
    # rules.MarkFacts: years_since_good_visit is None when no visit ever found the mark intact.
    from registry.services.screening import job_screen
    from tests.services.test_screening import AS_OF, by_code, make_job, make_mark

    make_mark("NEVER", 700.0, 10.0, visits=())
    make_mark("DAMAGED", 900.0, 200.0, visits=(("2024-06-01", "damaged"),))
    make_job()
    c = by_code(job_screen(actor=viewer, code="J-SCR", as_of=AS_OF))
    assert c["NEVER"].reasons == ["no_recent_good_visit"]
    assert c["DAMAGED"].reasons == ["no_recent_good_visit"]


@pytest.mark.django_db
def test_a_jobs_grid_spacing_is_the_one_used(viewer):
    # A 200 m × 200 m square site: the job's 25 m spacing gives 8 × 8 = 64 cell centres; left empty, the
    # spacing is chosen for about 1,000 centres (registry.geodesy.site.build_site_grid).
    from registry.services.screening import job_screen
    from tests.services.test_screening import AS_OF, at, make_job, make_mark

    n_lat, _ = at(100.0, 0.0)
    s_lat, _ = at(100.0, 180.0)
    _, e_lon = at(100.0, 90.0)
    _, w_lon = at(100.0, 270.0)
    ring = [[w_lon, s_lat], [e_lon, s_lat], [e_lon, n_lat], [w_lon, n_lat], [w_lon, s_lat]]
    make_mark("B1", 600.0, 30.0)
    make_job(site={"type": "Polygon", "coordinates": [ring]}, grid_spacing_m=25.0)
    grid = job_screen(actor=viewer, code="J-SCR", as_of=AS_OF).grid
    assert grid.spacing_m == 25.0
    assert 56 <= grid.n_cells <= 72  # 64 give or take a row or column at the edges


@pytest.mark.django_db
def test_no_marks_near_the_site_says_so_with_the_search_radius(viewer):
    # run.py: marks are searched within the site's radius + 1.25 × the maximum baseline (a point site has
    # radius 0): 1.25 × 8 km = 10.0 km.
    from registry.services.screening import job_screen
    from tests.services.test_screening import AS_OF, make_job, make_mark

    make_mark("FAR", 10_100.0, 0.0)
    make_job(max_baseline_m=8000.0)
    result = job_screen(actor=viewer, code="J-SCR", as_of=AS_OF)
    assert result.candidates == [] and result.as_of == AS_OF
    assert result.statement == "No marks in the registry within 10.0 km of the site. Nothing can serve as a base."


@pytest.mark.django_db
def test_a_mark_on_the_site_point_has_no_azimuth(viewer):
    # run.py: under 1 mm from the site the direction is undefined and none is given.
    from registry.services.screening import job_screen
    from tests.services.test_screening import AS_OF, by_code, make_job, make_mark

    make_mark("ON", 0.0, 0.0)
    make_mark("NEAR", 0.5, 90.0)
    make_job()
    c = by_code(job_screen(actor=viewer, code="J-SCR", as_of=AS_OF))
    assert c["ON"].distance_m < 1e-6 and c["ON"].azimuth_deg is None
    assert c["NEAR"].azimuth_deg == pytest.approx(90.0, abs=1e-6)  # placed due east with pyproj (GRS80)
