"""Job pages through HTTP: list, job page with screening and map, create/edit, exports, roles."""

from __future__ import annotations

import csv
import io
import json
import re

import pytest

from registry.models import AuditEvent, Job, MarkStatus, SkyView
from tests.services.test_screening import SITE_LAT, SITE_LON, at, make_job, make_mark


@pytest.fixture
def scenario(db):
    """Invented: a 2 km square site with marks around it."""
    sw = at(1000.0 * 2**0.5, 225.0)
    ne = at(1000.0 * 2**0.5, 45.0)
    ring = [[sw[1], sw[0]], [ne[1], sw[0]], [ne[1], ne[0]], [sw[1], ne[0]], [sw[1], sw[0]]]
    make_mark("BASE-N", 300.0, 0.0)
    make_mark("BASE-E", 2500.0, 90.0)
    make_mark("CHK-1", 600.0, 200.0, sigma_h_mm=8.0)
    make_mark("CHK-2", 1300.0, 300.0, sigma_h_mm=8.0)
    make_mark("OLD-1", 700.0, 120.0, status=MarkStatus.RETIRED)
    make_mark("SKY-1", 900.0, 60.0, sky=SkyView.OBSTRUCTED)
    return make_job(code="J-WEB", site={"type": "Polygon", "coordinates": [ring]}, tol_h_mm=35.0, tol_v_mm=50.0)


def test_pages_need_sign_in(client, scenario):
    r = client.get("/jobs/J-WEB/")
    assert r.status_code == 302 and "/signin/" in r["Location"]


def test_job_list_and_page_for_a_viewer(client, viewer, scenario):
    client.force_login(viewer)
    r = client.get("/jobs/")
    assert r.status_code == 200
    body = r.content.decode()
    assert "J-WEB" in body and "NAD83(2011) (EPSG:6319)" in body and "New job" not in body
    r = client.get("/jobs/J-WEB/")
    assert r.status_code == 200
    body = r.content.decode()
    # The map is inline SVG with a scale bar and north arrow, cells coloured, marks labelled.
    assert "<svg" in body and 'class="scalebar"' in body and 'class="north"' in body
    assert body.count('data-h95="') > 400
    assert 'data-code="BASE-N"' in body
    # The ranked table of usable marks with budgets; excluded marks in a collapsed list with their reasons.
    assert "Ranked candidates with their error budget" in body
    ranked = body.split('<table class="ranked">')[1].split("</table>")[0]
    assert 'data-code="BASE-N"' in ranked and 'data-code="OLD-1"' not in ranked
    excluded = body.split('<details class="more more-excluded">')[1].split("</details>")[0]
    assert 'Excluded marks: <span class="num">2</span>' in excluded
    # In words, each mark counted once (the counts add up to the number excluded); no rule codes shown.
    assert '<li><span class="num">1</span>: the mark is retired or recorded destroyed' in excluded
    assert '<li><span class="num">1</span>: its sky view is recorded as obstructed' in excluded
    assert "not_active" not in body and "sky_obstructed" not in body and "<code>" not in excluded
    assert 'data-code="OLD-1"' in excluded and 'data-code="SKY-1"' in excluded
    assert "the mark is retired or recorded destroyed" in excluded
    assert "<details open" not in body  # collapsed: readable without JavaScript, one click to open
    assert "Local codes, agency specifications and licensed professional practice govern" in body
    assert "/jobs/J-WEB/control.csv" in body and "/jobs/J-WEB/control.geojson" in body
    assert "2025.500 (2025-07-02)" in body  # epoch as decimal year with the calendar date
    assert "Edit job" not in body


def test_long_candidate_lists_fold_into_details(client, viewer, db):
    """30 usable marks: the top 25 are shown, the other 5 behind "show all"; nothing is lost."""
    for i in range(30):
        make_mark(f"M-{i:02d}", 300.0 + 60.0 * i, 12.0 * i)
    make_mark("GONE-1", 500.0, 200.0, visits=(("2024-06-01", "intact"), ("2025-03-01", "destroyed")))
    make_job(code="J-MANY", site={"type": "Point", "coordinates": [SITE_LON, SITE_LAT]}, tol_h_mm=30.0, tol_v_mm=50.0)
    client.force_login(viewer)
    body = client.get("/jobs/J-MANY/").content.decode()
    top, rest = body.split('<details class="more more-usable">')
    top_table = top.split('<table class="ranked">')[1].split("</table>")[0]
    rest_table = rest.split('<table class="ranked">')[1].split("</table>")[0]
    assert top_table.count("<tr data-code=") == 25 and rest_table.count("<tr data-code=") == 5
    assert 'Show all <span class="num">30</span> usable candidates' in rest
    ranks = [int(r) for r in re.findall(r'<tr data-code="[^"]+">\s*<td class="num">(\d+)</td>', top_table + rest_table)]
    assert ranks == list(range(1, 31))
    excluded = body.split('<details class="more more-excluded">')[1].split("</details>")[0]
    assert '<span class="num">1</span>: the last visit found the mark destroyed' in excluded
    assert 'data-code="GONE-1"' in excluded and "last_visit_destroyed" not in body
    # The map frames the point and its nearest marks: the farther ones are counted in the caption.
    outside = re.search(r'<span class="num">(\d+)</span> other marks within the search radius lie outside', body)
    assert outside is not None and int(outside.group(1)) >= 10
    # Distances print with one decimal, mm with one decimal (DEVELOPERS.md "Display"), right-aligned cells.
    first = re.search(r'<tr data-code="M-00">(.*?)</tr>', top_table, re.S).group(1)
    cells = re.findall(r'<td class="num">([^<]*)</td>', first)
    assert re.fullmatch(r"\d+\.\d", cells[1]) and re.fullmatch(r"\d+\.\d", cells[3])


def test_missing_job_is_404(client, viewer, db):
    client.force_login(viewer)
    assert client.get("/jobs/NOPE/").status_code == 404


def test_exports(client, viewer, scenario):
    client.force_login(viewer)
    r = client.get("/jobs/J-WEB/control.csv")
    assert r.status_code == 200 and r["Content-Type"].startswith("text/csv")
    rows = list(csv.DictReader(io.StringIO(r.content.decode())))
    roles = [row["role"] for row in rows]
    assert roles[0] == "base" and "check" in roles
    assert all(row["frame_epsg"] == "6319" and row["epoch_yr"] == "2025.500" for row in rows)
    assert all(len(row["lat_deg"].split(".")[1]) == 9 for row in rows)
    r = client.get("/jobs/J-WEB/control.geojson")
    data = json.loads(r.content)
    assert data["type"] == "FeatureCollection" and "NAD83(2011)" in data["coordinates_note"]
    assert [f["properties"]["code"] for f in data["features"]] == [row["code"] for row in rows]
    assert len(data["features"][0]["geometry"]["coordinates"]) == 3


def test_manager_creates_a_job_with_a_point(client, manager, db):
    client.force_login(manager)
    assert client.get("/jobs/new/").status_code == 200
    form = {
        "code": "J-NEW",
        "name": "Invented pump station",
        "status": "planning",
        "site_geojson": "",
        "site_lat_deg": str(SITE_LAT),
        "site_lon_deg": str(SITE_LON),
        "frame_epsg": "6319",
        "epoch_yr": "2025.5",
        "tol_h_mm": "20",
        "tol_v_mm": "30",
        "rtk_h_fixed_mm": "8",
        "rtk_h_ppm": "1",
        "rtk_v_fixed_mm": "15",
        "rtk_v_ppm": "1",
        "rtk_combination": "additive",
        "rtk_h_meaning": "per_axis",
        "setup_h_mm": "2",
        "setup_v_mm": "3",
        "assumed_rate_mm_yr": "2",
        "max_baseline_m": "10000",
        "recovery_years": "10",
    }
    r = client.post("/jobs/new/", form)
    assert r.status_code == 302 and r["Location"] == "/jobs/J-NEW/"
    job = Job.objects.get(code="J-NEW")
    assert job.site_geojson == {"type": "Point", "coordinates": [SITE_LON, SITE_LAT]}
    r = client.get("/jobs/J-NEW/")
    assert r.status_code == 200 and "No marks in the registry" in r.content.decode()


def test_create_errors_are_shown_and_nothing_saved(client, manager, db):
    client.force_login(manager)
    r = client.post(
        "/jobs/new/",
        {
            "code": "J-BAD",
            "name": "x",
            "status": "planning",
            "site_geojson": '{"type": "Line"}',
            "frame_epsg": "4326",
            "epoch_yr": "2025",
            "tol_h_mm": "-1",
            "tol_v_mm": "30",
            "rtk_combination": "additive",
            "rtk_h_meaning": "per_axis",
        },
    )
    assert r.status_code == 400
    body = r.content.decode()
    assert "Not saved" in body and "Geographic 2D CRS" in body and "GeoJSON Point or Polygon" in body
    assert not Job.objects.exists()


def test_viewer_cannot_create_or_edit(client, viewer, scenario):
    client.force_login(viewer)
    assert client.get("/jobs/new/").status_code == 403
    assert client.get("/jobs/J-WEB/edit/").status_code == 403


def test_manager_edit_and_conflict(client, manager, make_user, scenario):
    client.force_login(manager)
    r = client.get("/jobs/J-WEB/edit/")
    assert r.status_code == 200
    form = r.context["form"]
    data = {name: (form.initial.get(name) if form.initial.get(name) is not None else "") for name in form.fields}
    data["tol_h_mm"] = "40"
    r = client.post("/jobs/J-WEB/edit/", data)
    assert r.status_code == 302
    job = Job.objects.get(code="J-WEB")
    assert job.tol_h_mm == 40.0 and job.version == 2
    assert AuditEvent.objects.get(action="job_update").after == {"tol_h_mm": 40.0, "version": 2}
    # Someone else saves version 2 → 3; a save from version 2 is refused with both values shown.
    from registry.services.jobs import job_update

    job_update(actor=make_user("omar", "manager"), code="J-WEB", expected_version=2, changes={"tol_v_mm": 45})
    data["tol_h_mm"] = "41"
    data["tol_v_mm"] = "55"
    data["version"] = "2"
    r = client.post("/jobs/J-WEB/edit/", data)
    assert r.status_code == 409
    body = r.content.decode()
    assert "someone changed this job" in body and "45.0" in body
    assert Job.objects.get(code="J-WEB").tol_h_mm == 40.0


# ----------------------------------------------------------------------------- screening cache (review S-11)


@pytest.fixture
def empty_cache():
    from django.core.cache import cache

    cache.clear()
    yield
    cache.clear()


def _counting_screen():
    """Patch the screening with a wrapper that counts calls and still runs the real computation."""
    from unittest import mock

    from registry.services.screening import run

    return mock.patch.object(run, "job_screen", wraps=run.job_screen)


def test_job_page_and_exports_share_one_screening(client, viewer, scenario, empty_cache):
    client.force_login(viewer)
    with _counting_screen() as spy:
        first = client.get("/jobs/J-WEB/")
        assert spy.call_count == 1
        second = client.get("/jobs/J-WEB/")
        csv_body = client.get("/jobs/J-WEB/control.csv").content.decode()
        geo = json.loads(client.get("/jobs/J-WEB/control.geojson").content)
        assert spy.call_count == 1  # the second view and both exports came from the cache
    assert first.status_code == second.status_code == 200
    ranked = lambda body: body.split('<table class="ranked">')[1].split("</table>")[0]  # noqa: E731
    assert ranked(first.content.decode()) == ranked(second.content.decode())
    assert "BASE-N" in csv_body and geo["features"]
    # The permission check still runs on a cache hit: a signed-out client is sent to sign in.
    client.logout()
    with _counting_screen() as spy:
        assert client.get("/jobs/J-WEB/control.csv").status_code == 302
        assert spy.call_count == 0


def test_any_audited_write_invalidates_the_cached_screening(client, viewer, technician, manager, scenario, empty_cache):
    import datetime as dt

    from registry.services.fieldwork import visit_record
    from registry.services.jobs import job_update

    client.force_login(viewer)
    with _counting_screen() as spy:
        before = client.get("/jobs/J-WEB/").content.decode()
        assert 'data-code="BASE-N"' in before.split('<table class="ranked">')[1].split("</table>")[0]
        # A technician reports the best base destroyed, through the service (one audit row).
        visit_record(
            actor=technician,
            mark_code="BASE-N",
            data={"visited_on": dt.date.today().isoformat(), "finding": "destroyed"},
        )
        after = client.get("/jobs/J-WEB/").content.decode()
        assert spy.call_count == 2
        excluded = after.split('<details class="more more-excluded">')[1].split("</details>")[0]
        assert 'data-code="BASE-N"' in excluded and "the last visit found the mark destroyed" in excluded
        client.get("/jobs/J-WEB/")
        assert spy.call_count == 2
        # A job change (new version) invalidates too, and the page shows the new tolerance.
        job_update(actor=manager, code="J-WEB", expected_version=1, changes={"tol_h_mm": 60})
        body = client.get("/jobs/J-WEB/").content.decode()
        assert spy.call_count == 3 and "60.0</span> mm horizontal (circle)" in body


def test_cache_key_follows_as_of_and_settings(viewer, scenario, settings, empty_cache):
    import datetime as dt

    from registry.services.screening.cache import screening_cache_key

    job = Job.objects.get(code="J-WEB")
    key = screening_cache_key(job, dt.date(2025, 7, 1))
    assert key == screening_cache_key(job, dt.date(2025, 7, 1))
    assert key != screening_cache_key(job, dt.date(2025, 7, 2))
    settings.REGISTRY = {**settings.REGISTRY, "PLATE": "EURA" if settings.REGISTRY.get("PLATE") != "EURA" else "NOAM"}
    assert key != screening_cache_key(job, dt.date(2025, 7, 1))


# ----------------------------------------------------------------------------- |Δh| and budget-term legend


def _dh_cell(body: str, code: str) -> str:
    row = re.search(rf'<tr data-code="{code}">(.*?)</tr>', body, re.S).group(1)
    return re.search(r'<td class="num dh">(.*?)</td>', row, re.S).group(1)


def test_height_difference_column_and_warning(client, viewer, db, empty_cache):
    # Invented marks at h = 1500.000 m (tests.services.test_screening.make_mark); site point at 1850 m.
    make_mark("HI-1", 400.0, 10.0)
    make_job(code="J-HIGH", site={"type": "Point", "coordinates": [SITE_LON, SITE_LAT, 1850.0]})
    make_job(code="J-LOW", site={"type": "Point", "coordinates": [SITE_LON, SITE_LAT, 1620.0]})
    client.force_login(viewer)
    high = client.get("/jobs/J-HIGH/").content.decode()
    # |1850 − 1500| = 350 m (hand arithmetic), above the 300 m warning threshold (common practice,
    # registry.geodesy.rtk.HEIGHT_DIFFERENCE_WARN_M).
    cell = _dh_cell(high, "HI-1")
    assert "over 300 m" in cell and "350.0" in cell and "state-dh-over" in cell
    assert "|Δh| (m)" in high and "no-site-heights" not in high
    assert 'site\'s <span class="num">1</span> given height' in high
    low = client.get("/jobs/J-LOW/").content.decode()
    # |1620 − 1500| = 120 m (hand arithmetic): shown, no warning.
    assert _dh_cell(low, "HI-1").strip() == "120.0"


def test_no_site_heights_note_and_budget_term_legend(client, viewer, scenario, empty_cache):
    from registry.services.screening import BUDGET_TERM_DESCRIPTIONS

    client.force_login(viewer)
    body = client.get("/jobs/J-WEB/").content.decode()
    assert 'class="dh-note no-site-heights"' in body and "the site has no heights" in body
    assert "|Δh| (m)" not in body and 'class="num dh"' not in body  # no column of dashes
    legend = body.split('<span class="budget-terms">')[1].split("</span>")[0]
    ranked = body.split('<details class="budget-columns">')[1].split('<table class="budget">')[1].split("</table>")[0]
    from django.utils.html import escape

    for _term, words in BUDGET_TERM_DESCRIPTIONS:
        assert escape(words) in legend
        assert f'title="{escape(words)}"' in ranked  # tooltip on the budget column headers
    # The per-mark base tooltip names the covariance origin of that mark's base term.
    assert "published position&#x27;s σ from its covariance (horizontal √λmax" in ranked


# ----------------------------------------------------------------------------- issue 10, items 4–7


def test_job_list_shows_each_jobs_answer_from_the_screening(client, viewer, scenario, empty_cache):
    from registry.services.screening.cache import job_screen_cached
    from registry.services.screening.present import job_answer

    client.force_login(viewer)
    body = client.get("/jobs/").content.decode()
    answer = job_answer(job_screen_cached(actor=viewer, code="J-WEB"))
    # The list repeats the screening's own answer and worst figures (no rule of its own).
    assert answer["words"] in body
    assert answer["kind"] in ("one", "several", "none")
    if answer["worst_h95_mm"] is not None:
        assert f"{answer['worst_h95_mm']:.1f} / {answer['worst_v95_mm']:.1f}" in body
    # Tight tolerances: nothing covers; loose ones: one base does.
    Job.objects.filter(code="J-WEB").update(tol_h_mm=1.0, tol_v_mm=1.0, version=9)
    body = client.get("/jobs/").content.decode()
    assert "cannot be covered" in body and "state-answer-none" in body
    Job.objects.filter(code="J-WEB").update(tol_h_mm=500.0, tol_v_mm=500.0, version=10)
    body = client.get("/jobs/").content.decode()
    assert "covered by one base (BASE-N)" in body and "state-answer-one" in body


def test_technician_creates_and_edits_jobs_on_page_and_api(client, technician, scenario):
    client.force_login(technician)
    assert "New job" in client.get("/jobs/").content.decode()
    assert "Edit job" in client.get("/jobs/J-WEB/").content.decode()
    r = client.get("/jobs/J-WEB/edit/")
    assert r.status_code == 200
    r = client.patch(
        "/api/jobs/J-WEB/",
        data=json.dumps({"name": "Renamed by the party chief", "version": 1}),
        content_type="application/json",
    )
    assert r.status_code == 200, r.content
    assert Job.objects.get(code="J-WEB").name == "Renamed by the party chief"


def test_job_planning_rule_lives_in_the_service(viewer, technician, manager, scenario):
    from registry.errors import PermissionDeniedError
    from registry.services.jobs import job_update, may_plan_jobs

    assert not may_plan_jobs(viewer) and may_plan_jobs(technician) and may_plan_jobs(manager)
    with pytest.raises(PermissionDeniedError):
        job_update(actor=viewer, code="J-WEB", expected_version=1, changes={"name": "x"})
    job = job_update(actor=technician, code="J-WEB", expected_version=1, changes={"name": "Tech edit"})
    assert job.version == 2


def test_job_page_leads_with_the_answer_and_map_budget_behind_a_toggle(client, viewer, scenario, empty_cache):
    client.force_login(viewer)
    body = client.get("/jobs/J-WEB/").content.decode()
    main = body.split("<h1")[1]
    # Order: the answer, then the map, then the chosen bases, then the job's settings, then the ranked list.
    positions = [main.index(h) for h in ('id="h-result"', 'id="h-map"', 'id="h-chosen"', 'id="h-job"', 'id="h-ranked"')]
    assert positions == sorted(positions)
    assert 'class="state state-answer-' in main.split('id="h-map"')[0]
    # The ranked table has no per-term columns; they sit in a closed <details> (works without JavaScript).
    ranked = body.split('<table class="ranked">')[1].split("</table>")[0]
    assert "Horizontal σ per axis" not in ranked and ">drift<" not in ranked
    budget = body.split('<details class="budget-columns">')[1].split("</details>")[0]
    assert "<summary>Error budget per term" in budget and "Horizontal σ per axis" in budget
    assert budget.count("<tr data-code=") == ranked.count("<tr data-code=")
    # Exclusion counts add up to the number excluded.
    excluded = body.split('<details class="more more-excluded">')[1].split("</details>")[0]
    counts = [int(n) for n in re.findall(r'<li><span class="num">(\d+)</span>:', excluded)]
    total = int(re.search(r'Excluded marks: <span class="num">(\d+)</span>', excluded).group(1))
    assert sum(counts) == total == 2


def _new_job_post(**site):
    base = {
        "code": "J-SITE",
        "name": "Site by other means",
        "status": "planning",
        "frame_epsg": "6319",
        "epoch_yr": "2010.0",
        "tol_h_mm": "30",
        "tol_v_mm": "50",
        "rtk_combination": "additive",
        "rtk_h_meaning": "per_axis",
        "site_geojson": "",
    }
    return {**base, **site}


def test_site_typed_as_dms_point(client, technician, db):
    client.force_login(technician)
    r = client.post("/jobs/new/", _new_job_post(site_lat_deg="45 12 00.0 N", site_lon_deg="110 36 00.0 W"))
    assert r.status_code == 302, r.content.decode()[:3000]
    job = Job.objects.get(code="J-SITE")
    assert job.site_geojson["type"] == "Point"
    lon, lat = job.site_geojson["coordinates"][:2]
    assert lat == pytest.approx(45.2, abs=1e-12) and lon == pytest.approx(-110.6, abs=1e-12)


def test_site_uploaded_as_kml_and_gpx(client, technician, db):
    from django.core.files.uploadedfile import SimpleUploadedFile

    client.force_login(technician)
    kml = (
        b'<?xml version="1.0"?><kml xmlns="http://www.opengis.net/kml/2.2"><Placemark><Polygon><outerBoundaryIs>'
        b"<LinearRing><coordinates>-110.60,45.20,1500 -110.59,45.20,1500 -110.59,45.21,1500 -110.60,45.21,1500 "
        b"-110.60,45.20,1500</coordinates></LinearRing></outerBoundaryIs></Polygon></Placemark></kml>"
    )
    r = client.post("/jobs/new/", {**_new_job_post(), "site_file": SimpleUploadedFile("site.kml", kml)})
    assert r.status_code == 302, r.content.decode()[:3000]
    ring = Job.objects.get(code="J-SITE").site_geojson["coordinates"][0]
    assert ring[0] == [-110.60, 45.20] and len(ring) == 5  # heights from the KML are not read
    gpx = (
        b'<gpx version="1.1" xmlns="http://www.topografix.com/GPX/1/1"><trk><trkseg>'
        b'<trkpt lat="45.20" lon="-110.60"/><trkpt lat="45.20" lon="-110.59"/><trkpt lat="45.21" lon="-110.59"/>'
        b"</trkseg></trk></gpx>"
    )
    r = client.post("/jobs/new/", {**_new_job_post(code="J-GPX"), "site_file": SimpleUploadedFile("walk.gpx", gpx)})
    assert r.status_code == 302
    ring = Job.objects.get(code="J-GPX").site_geojson["coordinates"][0]
    assert len(ring) == 4 and ring[0] == ring[-1]  # closed for the polygon


@pytest.mark.parametrize(
    "name, content, words",
    [
        ("site.kml", b"<kml><Placemark><Polygon>", "not well-formed XML"),
        ("site.gpx", b'<!DOCTYPE gpx [<!ENTITY a "aaaa">]><gpx>&a;</gpx>', "document type or entities"),
        ("site.gpx", b"<gpx><wpt lat='1' lon='2'/><wpt lat='1' lon='3'/></gpx>", "2 waypoints and no track"),
        ("site.txt", b"hello", "GeoJSON (.geojson), KML (.kml) or GPX (.gpx)"),
        ("site.geojson", b'{"type": "LineString", "coordinates": [[0, 0], [1, 1]]}', "no Point or Polygon"),
    ],
)
def test_bad_site_files_give_a_message_and_change_nothing(client, technician, db, name, content, words):
    from django.core.files.uploadedfile import SimpleUploadedFile

    client.force_login(technician)
    r = client.post("/jobs/new/", {**_new_job_post(), "site_file": SimpleUploadedFile(name, content)})
    assert r.status_code == 400
    assert words in r.content.decode()
    assert not Job.objects.exists()


def test_site_given_two_ways_is_refused(client, technician, db):
    client.force_login(technician)
    r = client.post(
        "/jobs/new/",
        _new_job_post(
            site_geojson='{"type": "Point", "coordinates": [-110.6, 45.2]}', site_lat_deg="45.2", site_lon_deg="-110.6"
        ),
    )
    assert r.status_code == 400 and "one way only" in r.content.decode() and not Job.objects.exists()


def test_job_form_groups_fields_and_marks_required_ones(client, technician, db):
    client.force_login(technician)
    body = client.get("/jobs/new/").content.decode()
    assert 'enctype="multipart/form-data"' in body
    legends = [t.strip() for t in re.findall(r"<legend>([^<]+)", body)]
    assert legends == ["The job", "The site", "Deliverable", "RTK error model and setup", "Screening limits"]
    assert '<legend>The site <span class="req">required</span></legend>' in body
    for label in ("Job code", "Name", "Deliverable epoch (decimal year)"):
        assert re.search(re.escape(label) + r'[^<]*<span class="req">required</span>', body), label
    assert not re.search(r'Client <span class="req">', body)


def test_job_form_carries_the_drawing_map_and_its_first_view(client, technician, db):
    """Issue 10, item 6: the form offers drawing the site (hidden until the script shows it; no inline
    script), opening on the registry's marks; without marks, on the whole world."""
    from registry.selectors.marks import marks_extent

    client.force_login(technician)

    def data():
        page = client.get("/jobs/new/").content.decode()
        assert '<div class="sitedraw" id="sitedraw" hidden>' in page
        assert "/static/registry/sitedraw.js" in page and "<script>" not in page
        return json.loads(
            re.search(r'<script id="sitedraw-data" type="application/json">(.*?)</script>', page, re.S)[1]
        )

    assert marks_extent() is None and data()["extent"] is None
    make_mark("EXT-1", 1000.0, 0.0)  # 1 km north of the site reference point
    make_mark("EXT-2", 2000.0, 90.0)  # 2 km east
    (s, w), (n, e) = data()["extent"]
    assert (s, w, n, e) == marks_extent()
    assert s < n and w < e and n - s == pytest.approx(1000.0 / 111_100.0, rel=0.02)  # about 1 km of latitude
