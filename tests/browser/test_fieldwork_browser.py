"""In a real browser: a technician records a visit with a photo and proposes a position; a manager checks and publishes.

Takes the screenshots of the visit form, the propose form and the compatibility check
(docs/screenshots/ with REGISTRY_UPDATE_SCREENSHOTS=1, else a temporary folder).
"""

from __future__ import annotations

import pytest

from registry.models import Position, Visit
from tests.browser.test_mark_browser import sign_in
from tests.web.scenario import build_kestrel, build_neighbours, illustration_png

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]


@pytest.fixture
def district(settings, tmp_path, manager, technician):
    settings.MEDIA_ROOT = tmp_path / "media"
    settings.DEBUG = True
    data = build_kestrel(manager, technician, photo_png=illustration_png())
    build_neighbours(manager, technician)
    return data


def test_visit_propose_check_publish(page, district, screenshot, tmp_path, chromium, live_server):
    from playwright.sync_api import expect

    sign_in(page, "theo", "pw-theo-123!", start="/marks/KV-002/")
    page.get_by_role("link", name="Record visit").click()
    page.get_by_label("Date of the visit").fill("2024-06-03")
    page.get_by_label("What was found").select_option("intact")
    page.get_by_label("Visitor").fill("T. Field (invented)")
    page.get_by_label("Notes").fill("Bolt clean; deck joint repaired since last visit.")
    photo = tmp_path / "kv002-east.png"
    photo.write_bytes(illustration_png("KV-002"))
    page.get_by_label("Photo 1", exact=True).set_input_files([str(photo)])
    page.get_by_label("Caption of photo 1").fill("Looking east along the deck to the bolt")
    screenshot(page, "visit-form")
    page.get_by_role("button", name="Record visit").click()
    expect(page.locator(".messages")).to_contain_text("with 1 photo(s)")
    assert Visit.objects.filter(mark__code="KV-002", visited_on="2024-06-03").exists()

    page.get_by_role("link", name="Propose position").click()
    page.locator("#id_frame_choice").select_option("7912")
    page.get_by_label("Coordinate epoch (decimal year)").fill("2010.0")
    page.get_by_label("Latitude").fill("45 11 15.00058 N")
    page.get_by_label("Longitude").fill("110 38 03.12 W")
    page.get_by_label("Ellipsoidal height h (m)").fill("1498.011")
    page.get_by_label("σ east (mm)").fill("3.5")
    page.get_by_label("σ north (mm)").fill("3.0")
    page.get_by_label("σ up (mm)").fill("8.0")
    page.get_by_label("Source").fill("2024 re-observation, 2 × 4 h static (invented)")
    screenshot(page, "position-form")
    page.get_by_role("button", name="Propose position").click()
    expect(page.locator(".messages")).to_contain_text("proposed for KV-002")
    proposed = Position.objects.get(mark__code="KV-002", state="proposed")

    manager_context = chromium.new_context(viewport={"width": 1280, "height": 900}, base_url=live_server.url)
    mpage = manager_context.new_page()
    sign_in(mpage, "mona", "pw-mona-123!", start="/marks/KV-002/")
    mpage.get_by_role("link", name="Check and publish").click()
    expect(mpage.get_by_role("heading", name="Movement check against the published position")).to_be_visible()
    expect(mpage.locator("table.compat")).to_contain_text("Smallest movement this check could detect")
    screenshot(mpage, "position-check")
    mpage.get_by_label("Note").fill("Re-observation agrees; published.")
    mpage.get_by_role("button", name="Publish this position").click()  # named by words, not its id
    expect(mpage.locator(".messages")).to_contain_text("published")
    proposed.refresh_from_db()
    assert proposed.state == "published"
    manager_context.close()
