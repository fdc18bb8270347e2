"""In a real browser: a manager opens the job list, the job page with its map and ranked bases,
edits the tolerance and sees the screening change; the demo's polygon job reads as a party chief
needs it (the pair, the framed map, folded lists that open without JavaScript). Saves
docs/screenshots/job.png (the demo polygon job, top of the page) with REGISTRY_UPDATE_SCREENSHOTS=1.

Invented scenarios: an irregular 2–3 km site in the fictional district near 45.20° N, 110.60° W, and
the demo district of fixtures_demo.
"""

from __future__ import annotations

import io

import pytest
from PIL import Image

from registry.models import Finding, MarkStatus, SkyView
from tests.services.test_screening import at, make_job, make_mark

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]


@pytest.fixture
def job(manager):
    corners = [at(1400.0, a) for a in (200.0, 150.0, 95.0, 40.0, 330.0, 265.0)]
    ring = [[lon, lat] for lat, lon in corners] + [[corners[0][1], corners[0][0]]]
    make_mark("HAWK-1", 2100.0, 20.0)
    make_mark("HAWK-2", 2300.0, 200.0, sigma_h_mm=4.0)
    make_mark("SAGE-3", 3100.0, 110.0)
    make_mark("SAGE-4", 600.0, 300.0, sigma_h_mm=9.0)
    make_mark("SAGE-5", 500.0, 120.0, sigma_h_mm=9.0)
    make_mark("CRK-6", 1800.0, 250.0, epoch=2012.0)
    make_mark("CRK-7", 900.0, 70.0, status=MarkStatus.RETIRED)
    make_mark("CRK-8", 1200.0, 160.0, visits=(("2019-04-02", "intact"), ("2024-09-10", Finding.SEARCHED_NOT_FOUND)))
    make_mark("CRK-9", 2600.0, 330.0, sky=SkyView.OBSTRUCTED)
    make_mark("FAR-10", 11_900.0, 80.0)
    return make_job(
        code="J-2025-014",
        name="Invented ridge subdivision",
        site={"type": "Polygon", "coordinates": [ring]},
        tol_h_mm=28.0,
        tol_v_mm=45.0,
    )


def test_job_page_map_and_edit(page, job):
    from playwright.sync_api import expect

    page.goto("/jobs/")
    page.get_by_label("User name").fill("mona")
    page.get_by_label("Password").fill("pw-mona-123!")
    page.get_by_role("button", name="Sign in").click()
    expect(page.get_by_role("heading", name="Jobs")).to_be_visible()
    page.get_by_role("link", name="J-2025-014").click()
    expect(page.get_by_role("heading", name="Answer")).to_be_visible()
    expect(page.locator("p.answer")).to_contain_text("worst")
    # With scripts the interactive map replaces the SVG (kept in the page as the no-script fallback).
    live = page.locator("#jobmap-live")
    expect(live).to_be_visible()
    box = live.bounding_box()
    assert box["width"] > 500 and box["height"] > 350
    assert page.locator("svg.jobmap .coverage rect").count() >= 400
    expect(page.locator(".jm-mark.jm-base").first).to_be_visible()
    expect(page.locator(".legend")).to_contain_text("over tolerance")
    first_num = page.locator("table.ranked tbody tr").first.locator("td.num").nth(2)
    assert first_num.evaluate("el => getComputedStyle(el).textAlign") == "right"
    assert first_num.evaluate("el => getComputedStyle(el).fontVariantNumeric") == "tabular-nums"
    # Excluded marks are folded away with their reasons; one click opens them.
    excluded = page.locator("details.more-excluded")
    expect(excluded.locator("summary")).to_contain_text("the last visit did not find the mark")
    expect(excluded.locator("summary")).not_to_contain_text("last_visit_not_found")
    # The per-term budget is folded too.
    budget = page.locator("details.budget-columns").first
    expect(budget.locator("table.budget")).to_be_hidden()
    budget.locator("summary").click()
    expect(budget.locator("table.budget")).to_be_visible()
    expect(excluded.locator("table.excluded-marks")).to_be_hidden()
    excluded.locator("summary").click()
    expect(excluded.locator("table.excluded-marks")).to_be_visible()
    expect(excluded.locator("tr[data-code='CRK-8']")).to_contain_text("The last visit did not find the mark")
    expect(page.locator("table.ranked tr[data-code='CRK-8']")).to_have_count(0)
    expect(page.locator(".caution")).to_contain_text("licensed professional practice govern")
    verdict_before = page.locator(".verdict").inner_text()

    # Tighten the tolerance: the result changes and says what the site cannot achieve.
    page.get_by_role("link", name="Edit job").click()
    page.get_by_label("Horizontal tolerance, 95 % circle (mm)").fill("21")
    page.get_by_role("button", name="Save changes").click()
    expect(page.locator(".messages")).to_contain_text("saved (version 2)")
    verdict_after = page.locator(".verdict").inner_text()
    assert verdict_after != verdict_before
    assert "21.0 mm horizontal" in verdict_after
    href = page.get_by_role("link", name="CSV").get_attribute("href")
    assert href == "/jobs/J-2025-014/control.csv"


def test_demo_polygon_job_reads_without_javascript(chromium, live_server, screenshot):
    """The demo subdivision: no single base, the best pair; a compact page; folded lists open without JS."""
    from django.core.management import call_command
    from playwright.sync_api import expect

    call_command("load_demo", stdout=io.StringIO())
    context = chromium.new_context(
        viewport={"width": 1280, "height": 900}, base_url=live_server.url, java_script_enabled=False
    )
    try:
        page = context.new_page()
        page.goto("/signin/")
        page.get_by_label("User name").fill("demo_manager")
        page.get_by_label("Password").fill("demo-only-manager-W2")
        page.get_by_role("button", name="Sign in").click()
        page.goto("/jobs/J-2026-021/")
        verdict = page.locator(".verdict")
        expect(verdict).to_contain_text("No single base covers the whole site within 38.0 mm horizontal")
        expect(verdict).to_contain_text("The pair CRV-065 + ASH-002 does")
        svg = page.locator("svg.jobmap")
        expect(svg.locator("g.mark.base")).to_have_count(2)
        expect(svg.locator("text[data-for='ASH-002']")).to_have_text("ASH-002 (base)")
        expect(svg.locator("path.service-area")).to_have_count(2)
        expect(svg.locator("text[data-for='CRV-065']")).to_have_text("CRV-065 (base)")
        # The site fills a good part of the map: its outline spans at least a third of the map's width.
        site_box = svg.locator("polygon.site").bounding_box()
        assert site_box["width"] > svg.bounding_box()["width"] / 3
        expect(page.locator(".jobmap-figure figcaption")).to_contain_text("outside this frame and are not drawn")
        # Compact: the ranked table lists 25, the rest and the excluded marks are folded.
        expect(page.locator("table.ranked").first.locator("tbody tr")).to_have_count(25)
        more = page.locator("details.more-usable")
        expect(more.locator("table.ranked")).to_be_hidden()
        expect(page.locator("details.budget-columns").first.locator("table.budget")).to_be_hidden()
        more.locator(":scope > summary").click()
        expect(more.locator("table.ranked")).to_be_visible()
        expect(more.locator("tbody tr").first.locator("td.num").first).to_have_text("26")
        more.locator(":scope > summary").click()
        height = page.evaluate("document.documentElement.scrollHeight")
        assert height < 3600, height  # was about 10,000 px with every candidate and its budget listed
        path = screenshot(page, "job")
        with Image.open(path) as img:  # the top of the page: facts, result, caution, map, chosen bases
            img.crop((0, 0, img.width, min(img.height, 1600))).save(path)
    finally:
        context.close()
