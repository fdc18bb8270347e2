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
from pathlib import Path

import pytest

from registry.models import Finding, MarkStatus
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


def _context(chromium, live_server, width):
    phone = width == "phone"
    context = chromium.new_context(
        viewport={"width": WIDTHS[width], "height": 900}, base_url=live_server.url, is_mobile=phone, has_touch=phone
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


def _tap(page, locator, phone):
    if phone:
        locator.tap()
    else:
        locator.click()


@pytest.mark.parametrize("width", list(WIDTHS))
def test_job_page_map_taps_tell_code_and_figures(chromium, live_server, job, technician, width, screenshot):
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
        screenshot(page, f"job-page-{width}")

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
        screenshot(page, f"job-page-{width}-tap")
        assert not problems, "\n".join(problems)
    finally:
        context.close()


def test_job_page_without_javascript_keeps_the_svg_with_words_and_links(chromium, live_server, job, technician):
    from playwright.sync_api import expect

    context = chromium.new_context(
        viewport={"width": 390, "height": 900}, base_url=live_server.url, java_script_enabled=False
    )
    try:
        page = context.new_page()
        page.goto("/signin/")
        page.get_by_label("User name").fill("theo")
        page.get_by_label("Password").fill("pw-theo-123!")
        page.get_by_role("button", name="Sign in").click()
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
