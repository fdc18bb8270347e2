"""The job page's interactive map and the job form's drawing map in headless Chromium, at 1440 px and
at 390 px (a phone, touch): issue 10, items 6-8 ("drawn on a map", "tap a symbol to see its code and
figures", the Leaflet panel with the site, coverage and service areas).

Each check also fits the page (no horizontal overflow) and runs axe-core (no serious or critical
violation), as tests/browser/test_layout_a11y.py does. Screenshots of the job page and the job form,
desktop and phone, go to docs/screenshots/ with REGISTRY_UPDATE_SCREENSHOTS=1.

Invented marks and site in the fictional district near 45.20° N, 110.60° W.
"""

from __future__ import annotations

import json
import os
from pathlib import Path

import pytest

from registry.models import Finding, MarkStatus
from tests.browser.conftest import DOCS_SCREENSHOTS
from tests.services.test_screening import at, make_job, make_mark

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]

AXE = Path(__file__).resolve().parent / "vendor" / "axe-core-4.14.1" / "axe.min.js"
WIDTHS = {"desktop": 1440, "phone": 390}


@pytest.fixture
def job(manager, technician):
    corners = [at(1400.0, a) for a in (200.0, 150.0, 95.0, 40.0, 330.0, 265.0)]
    ring = [[lon, lat] for lat, lon in corners] + [[corners[0][1], corners[0][0]]]
    make_mark("HAWK-1", 2100.0, 20.0)
    make_mark("HAWK-2", 2300.0, 200.0, sigma_h_mm=4.0)
    make_mark("SAGE-4", 600.0, 300.0, sigma_h_mm=9.0)
    make_mark("CRK-7", 900.0, 70.0, status=MarkStatus.RETIRED)
    make_mark("CRK-8", 1200.0, 160.0, visits=(("2019-04-02", "intact"), ("2024-09-10", Finding.SEARCHED_NOT_FOUND)))
    return make_job(
        code="J-2025-014",
        name="Invented ridge subdivision",
        site={"type": "Polygon", "coordinates": [ring]},
        tol_h_mm=28.0,
        tol_v_mm=45.0,
    )


def _context(chromium, live_server, width, javascript=True):
    phone = width == "phone"
    context = chromium.new_context(
        viewport={"width": WIDTHS[width], "height": 900},
        base_url=live_server.url,
        is_mobile=phone and javascript,
        has_touch=phone and javascript,
        java_script_enabled=javascript,
    )
    context.set_default_timeout(20_000)
    page = context.new_page()
    page.goto("/signin/")
    page.get_by_label("User name").fill("theo")  # a party chief: plans jobs too
    page.get_by_label("Password").fill("pw-theo-123!")
    page.get_by_role("button", name="Sign in").click()
    page.wait_for_url("**/marks/**")
    return context, page


def _fits_and_passes_axe(page, width) -> list[str]:
    problems = []
    scroll, inner = page.evaluate("() => [document.documentElement.scrollWidth, window.innerWidth]")
    if scroll > inner or scroll > WIDTHS[width]:
        problems.append(f"{page.url}: {scroll} px wide in a {WIDTHS[width]} px window")
    page.evaluate(AXE.read_text(encoding="utf-8"))
    problems += page.evaluate(
        "async () => (await axe.run(document, {resultTypes: ['violations']})).violations"
        ".filter(v => v.impact === 'serious' || v.impact === 'critical')"
        ".map(v => v.id + ' (' + v.impact + '): ' + v.nodes.slice(0, 3).map(n => n.target.join(' ')).join(' | '))"
    )
    return problems


def _section_shot(page, selector: str, name: str, tmp_path: Path) -> Path:
    """A screenshot of one part of the page (the README shows the map, not the whole page): into
    docs/screenshots/ with REGISTRY_UPDATE_SCREENSHOTS=1, else into the test's temporary folder."""
    target = DOCS_SCREENSHOTS if os.environ.get("REGISTRY_UPDATE_SCREENSHOTS") == "1" else tmp_path
    target.mkdir(parents=True, exist_ok=True)
    path = target / f"{name}.png"
    page.locator(selector).screenshot(path=str(path))
    return path


def _tap(page, locator, phone):
    if phone:
        locator.tap()
    else:
        locator.click()


@pytest.mark.parametrize("width", list(WIDTHS))
def test_job_page_map_taps_tell_code_and_figures(chromium, live_server, job, technician, width, tmp_path):
    from playwright.sync_api import expect

    context, page = _context(chromium, live_server, width)
    phone = width == "phone"
    try:
        page.goto("/jobs/J-2025-014/")
        live = page.locator("#jobmap-live")
        expect(live).to_be_visible()
        expect(page.locator("svg.jobmap")).to_be_hidden()  # the SVG is the no-script fallback
        box = live.bounding_box()
        assert box["width"] >= min(WIDTHS[width] - 60, 500) and box["x"] + box["width"] <= WIDTHS[width]
        # the same geometry as the SVG: the site, coverage cells clipped to it, marks by role
        data = json.loads(page.locator("#jobmap-data").text_content())
        assert page.locator("#jobmap-live path.jm-cover").count() == len(data["coverage"]) >= 1
        assert page.locator("#jobmap-live path.jm-cover").first.get_attribute("clip-path") == "url(#jm-site-clip)"
        clip_d = page.locator("#jm-site-clip path").get_attribute("d")
        assert clip_d and clip_d.startswith("M")
        expect(page.locator(".jm-mark.jm-base")).to_have_count(len([m for m in data["marks"] if m["role"] == "base"]))
        expect(page.locator(".jm-mark.jm-excluded")).to_have_count(2)  # CRK-7 retired, CRK-8 not found
        caption = page.locator(".jobmap-figure figcaption").inner_text()  # what is shown
        assert "Tap or click a symbol" in caption and "Plain background with graticule" in caption
        assert "UTM zone" not in caption and "not drawn" not in caption  # the SVG's own notes are hidden
        expect(page.locator("#jobmap-live .leaflet-control-scale")).to_be_visible()
        assert page.locator("#jobmap-live .grat-label").count() >= 2
        problems = _fits_and_passes_axe(page, width)
        if not phone:
            _section_shot(page, "section.mapsection", "job-map-desktop", tmp_path)

        # Tap a chosen base: its code, distances and 95 % figures in words.
        base = next(m for m in data["marks"] if m["role"] == "base")
        _tap(page, page.locator(f".jm-mark.jm-base[title^='{base['code']}:']"), phone)
        popup = page.locator(".leaflet-popup-content")
        expect(popup).to_be_visible()
        expect(popup.get_by_role("link", name=base["code"])).to_have_attribute("href", f"/marks/{base['code']}/")
        expect(popup).to_contain_text("chosen base")
        expect(popup).to_contain_text("m to the nearest site point")
        expect(popup).to_contain_text("H 95 %")
        text = popup.inner_text()
        assert "_" not in text and "None" not in text and "nan" not in text  # words, not codes
        # Tap an excluded mark: the reason in words.
        _tap(page, page.locator(".jm-mark.jm-excluded[title^='CRK-8:']"), phone)
        expect(page.locator(".leaflet-popup")).to_have_count(1)  # one popup at a time
        expect(popup).to_contain_text("CRK-8")
        expect(popup).to_contain_text("Not used: the last visit did not find the mark")
        if phone:  # a mark tapped on a phone
            _section_shot(page, "section.mapsection", "job-map-phone-tap", tmp_path)
        assert not problems, "\n".join(problems)
    finally:
        context.close()


def test_job_page_without_javascript_keeps_the_svg_with_words_and_links(chromium, live_server, job, technician):
    from playwright.sync_api import expect

    context, page = _context(chromium, live_server, "phone", javascript=False)
    try:
        page.goto("/jobs/J-2025-014/")
        expect(page.locator("svg.jobmap")).to_be_visible()
        expect(page.locator("#jobmap-live")).to_be_hidden()
        caption = page.locator(".jobmap-figure figcaption").inner_text()  # what is shown (hidden parts left out)
        assert "Tap or click a symbol for its code" not in caption and "UTM zone" in caption
        crk8 = page.locator("svg.jobmap g.mark[data-code='CRK-8']")
        expect(crk8.locator("title")).to_have_text(
            "CRK-8: excluded; "
            + crk8.locator("title").text_content().split("excluded; ")[1]  # distances (checked in test_job_map)
        )
        assert "Not used: the last visit did not find the mark" in crk8.locator("title").text_content()
        assert page.locator("svg.jobmap a[href='/marks/CRK-8/']").count() == 1  # a tap opens the mark
    finally:
        context.close()


def _fill_required(page, code: str) -> None:
    for name, value in (
        ("code", code),
        ("name", "Invented drawn site"),
        ("frame_epsg", "6319"),
        ("epoch_yr", "2025.5"),
        ("tol_h_mm", "30"),
        ("tol_v_mm", "50"),
    ):
        page.locator(f"#id_{name}").fill(value)


def _map_point(page, fx: float, fy: float) -> tuple[float, float]:
    page.locator("#sitedraw-map").scroll_into_view_if_needed()
    box = page.locator("#sitedraw-map").bounding_box()  # in the viewport: where a click lands
    return box["x"] + fx * box["width"], box["y"] + fy * box["height"]


@pytest.mark.parametrize("width", list(WIDTHS))
def test_drawing_the_site_fills_the_form_and_creates_the_job(chromium, live_server, job, technician, width, tmp_path):
    """Issue 10, item 6: the site drawn on the map (click or tap corners, undo, clear, point) goes into
    the site field as GeoJSON and through the same checks as pasted GeoJSON; the job is created with it."""
    from playwright.sync_api import expect

    from registry.models import Job

    context, page = _context(chromium, live_server, width)
    phone = width == "phone"
    try:
        page.goto("/jobs/new/")
        expect(page.locator("#sitedraw")).to_be_visible()
        field = page.locator("#id_site_geojson")
        status = page.locator("#sitedraw-status")
        expect(status).to_contain_text("first corner")

        def put(fx, fy):
            x, y = _map_point(page, fx, fy)
            if phone:
                page.touchscreen.tap(x, y)
            else:
                page.mouse.click(x, y)

        for fx, fy in ((0.3, 0.3), (0.7, 0.3), (0.7, 0.7), (0.3, 0.7)):
            put(fx, fy)
        expect(status).to_contain_text("Outline of 4 corners")
        drawn = json.loads(field.input_value())
        assert drawn["type"] == "Polygon" and len(drawn["coordinates"][0]) == 5
        ring = drawn["coordinates"][0]
        assert ring[0] == ring[-1]
        # the map opened on the registry's marks (near 45.2° N, 110.6° W): the corners are there too
        assert all(44.5 < lat < 46.0 and -111.5 < lon < -109.5 for lon, lat in ring)
        # a square on screen: west/east and north/south corners share their longitudes and latitudes
        assert ring[0][1] == pytest.approx(ring[1][1], abs=1e-4) and ring[1][0] == pytest.approx(ring[2][0], abs=1e-4)
        assert ring[1][0] > ring[0][0] and ring[2][1] < ring[1][1]  # east of, then south of
        page.get_by_role("button", name="Undo last corner").click()
        assert len(json.loads(field.input_value())["coordinates"][0]) == 4
        page.get_by_role("button", name="Clear").click()
        assert field.input_value() == ""
        expect(status).to_contain_text("first corner")
        # a point, then back to the outline (empty, as it was left), drawn with three corners
        page.get_by_role("button", name="Point").click()
        expect(page.get_by_role("button", name="Point")).to_have_attribute("aria-pressed", "true")
        put(0.5, 0.5)
        assert json.loads(field.input_value())["type"] == "Point"
        page.get_by_role("button", name="Outline").click()
        put(0.2, 0.2)
        put(0.8, 0.25)
        put(0.5, 0.8)
        drawn = json.loads(field.input_value())
        assert drawn["type"] == "Polygon" and len(drawn["coordinates"][0]) == 4
        problems = _fits_and_passes_axe(page, width)
        _section_shot(page, "fieldset.formgroup:has(#sitedraw)", f"job-form-draw-{width}", tmp_path)
        _fill_required(page, f"J-DRAWN-{width.upper()}")
        page.get_by_role("button", name="Create job").click()
        expect(page.get_by_role("heading", name="Answer")).to_be_visible()
        saved = Job.objects.get(code=f"J-DRAWN-{width.upper()}")
        assert saved.site_geojson["type"] == "Polygon"
        assert saved.site_geojson["coordinates"][0] == drawn["coordinates"][0]
        # editing opens the drawing on the job's own outline, its corners ready to move
        page.goto(f"/jobs/{saved.code}/edit/")
        expect(page.locator(".sd-handle")).to_have_count(3)
        expect(page.locator("#sitedraw-status")).to_contain_text("Outline of 3 corners")
        assert not problems, "\n".join(problems)
    finally:
        context.close()


def test_a_drawing_that_is_not_a_site_is_refused_by_the_form_with_nothing_saved(chromium, live_server, job, technician):
    """A self-crossing outline (a bow tie) goes through the service's checks like pasted GeoJSON."""
    from playwright.sync_api import expect

    from registry.models import Job

    context, page = _context(chromium, live_server, "desktop")
    try:
        page.goto("/jobs/new/")
        for fx, fy in ((0.3, 0.3), (0.7, 0.7), (0.7, 0.3), (0.3, 0.7)):
            page.mouse.click(*_map_point(page, fx, fy))
        _fill_required(page, "J-BOWTIE")
        before = Job.objects.count()
        page.get_by_role("button", name="Create job").click()
        expect(page.locator(".errorsummary")).to_contain_text("Not saved")
        assert Job.objects.count() == before
    finally:
        context.close()


def test_job_form_without_javascript_hides_the_drawing_and_takes_typed_coordinates(
    chromium, live_server, job, technician
):
    from playwright.sync_api import expect

    from registry.models import Job

    context, page = _context(chromium, live_server, "phone", javascript=False)
    try:
        page.goto("/jobs/new/")
        expect(page.locator("#sitedraw")).to_be_hidden()
        _fill_required(page, "J-TYPED")
        page.locator("#id_site_lat_deg").fill("45 12 00 N")
        page.locator("#id_site_lon_deg").fill("110 36 00 W")
        page.get_by_role("button", name="Create job").click()
        expect(page.get_by_role("heading", name="Answer")).to_be_visible()
        assert Job.objects.get(code="J-TYPED").site_geojson == {"type": "Point", "coordinates": [-110.6, 45.2]}
    finally:
        context.close()


def test_drawing_keeps_the_sites_heights_until_a_corner_changes_and_says_so(chromium, live_server, job, technician):
    """A site given with ellipsoidal heights (third coordinates) opens in the drawing with them; adding a
    corner (whose height is unknown) writes the outline without heights and says so in words."""
    from playwright.sync_api import expect

    corners = [at(500.0, a) for a in (0.0, 120.0, 240.0)]
    ring = [[lon, lat, 1500.0 + k] for k, (lat, lon) in enumerate(corners)]
    make_job(
        code="J-HEIGHTS", site={"type": "Polygon", "coordinates": [[*ring, ring[0]]]}, tol_h_mm=30.0, tol_v_mm=50.0
    )
    context, page = _context(chromium, live_server, "desktop")
    try:
        page.goto("/jobs/J-HEIGHTS/edit/")
        expect(page.locator(".sd-handle")).to_have_count(3)
        status = page.locator("#sitedraw-status")
        expect(status).to_contain_text("Outline of 3 corners")
        expect(status).not_to_contain_text("heights")
        field = page.locator("#id_site_geojson")
        assert json.loads(field.input_value())["coordinates"][0][0][2] == 1500.0  # untouched: as stored
        page.mouse.click(*_map_point(page, 0.1, 0.9))
        expect(status).to_contain_text("Outline of 4 corners")
        expect(status).to_contain_text("heights are left out")
        assert all(len(c) == 2 for c in json.loads(field.input_value())["coordinates"][0])
    finally:
        context.close()


def test_the_drawing_map_shows_the_usable_registry_marks_and_a_click_on_one_still_places_a_corner(
    chromium, live_server, job, technician
):
    """The job form's drawing map shows the usable marks around the view (from the nearby API): retired
    CRK-7 and not-found CRK-8 are left out; a mark's dot does not stop a click from placing a corner."""
    from playwright.sync_api import expect

    context, page = _context(chromium, live_server, "desktop")
    try:
        page.goto("/jobs/new/")
        note = page.locator("#sitedraw-marks")
        expect(note).to_contain_text("3 usable registry marks shown around the view")
        dots = page.locator("path.sd-mark")
        expect(dots).to_have_count(3)
        dots.first.hover()
        expect(page.locator(".leaflet-tooltip")).to_contain_text("usable registry mark")
        codes = page.locator(".leaflet-tooltip").inner_text()
        assert codes.split(" ")[0] in ("HAWK-1", "HAWK-2", "SAGE-4")
        box = dots.first.bounding_box()
        page.mouse.click(box["x"] + box["width"] / 2, box["y"] + box["height"] / 2)
        expect(page.locator("#sitedraw-status")).to_contain_text("1 corner placed")
    finally:
        context.close()
