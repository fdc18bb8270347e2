"""In a real browser: a manager opens the job list, the job page with its map and ranked bases,
edits the tolerance and sees the screening change. Saves docs/screenshots/job.png.

Invented scenario: an irregular 2–3 km site in the fictional district near 45.20° N, 110.60° W.
"""

from __future__ import annotations

import pytest

from registry.models import Condition, MarkStatus, SkyView
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
    make_mark("CRK-8", 1200.0, 160.0, visits=(("2019-04-02", "good"), ("2024-09-10", Condition.NOT_FOUND)))
    make_mark("CRK-9", 2600.0, 330.0, sky=SkyView.OBSTRUCTED)
    make_mark("FAR-10", 11_900.0, 80.0)
    return make_job(
        code="J-2025-014",
        name="Invented ridge subdivision",
        site={"type": "Polygon", "coordinates": [ring]},
        tol_h_mm=28.0,
        tol_v_mm=45.0,
    )


def test_job_page_map_and_edit(page, job, screenshot):
    from playwright.sync_api import expect

    page.goto("/jobs/")
    page.get_by_label("User name").fill("mona")
    page.get_by_label("Password").fill("pw-mona-123!")
    page.get_by_role("button", name="Sign in").click()
    expect(page.get_by_role("heading", name="Jobs")).to_be_visible()
    page.get_by_role("link", name="J-2025-014").click()
    expect(page.get_by_role("heading", name="Result")).to_be_visible()
    svg = page.locator("svg.jobmap")
    expect(svg).to_be_visible()
    box = svg.bounding_box()
    assert box["width"] > 500 and box["height"] > 350
    assert page.locator("svg.jobmap .coverage rect").count() >= 400
    expect(page.locator("svg.jobmap g.mark.base").first).to_be_visible()
    expect(page.locator(".legend")).to_contain_text("over tolerance")
    first_num = page.locator("table.ranked tbody tr").first.locator("td.num").nth(2)
    assert first_num.evaluate("el => getComputedStyle(el).textAlign") == "right"
    assert first_num.evaluate("el => getComputedStyle(el).fontVariantNumeric") == "tabular-nums"
    expect(page.locator("table.ranked")).to_contain_text("last_visit_not_found")
    expect(page.locator("table.ranked")).to_contain_text("beyond_max_baseline")
    expect(page.locator(".caution")).to_contain_text("licensed professional practice govern")
    screenshot(page, "job")
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
