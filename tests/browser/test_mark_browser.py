"""In a real browser: sign in, search for a mark, open it, edit it as a manager, see the change.

Also takes the README screenshots (docs/screenshots/*.png) of the list, the mark page,
the edit page and the stale-version refusal.
"""

from __future__ import annotations

import re

import pytest

from registry.models import Mark
from tests.web.scenario import build_kestrel, build_neighbours, illustration_png

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]


@pytest.fixture
def district(settings, tmp_path, manager, technician):
    settings.MEDIA_ROOT = tmp_path / "media"
    settings.DEBUG = True  # the development media view serves the photo thumbnails
    data = build_kestrel(manager, technician, photo_png=illustration_png())
    build_neighbours(manager, technician)
    return data


def sign_in(page, username: str, password: str, start: str = "/marks/"):
    page.goto(start)
    assert page.url.endswith("/signin/?next=" + start.replace("/", "%2F")) or "/signin/" in page.url
    page.get_by_label("User name").fill(username)
    page.get_by_label("Password").fill(password)
    page.get_by_role("button", name="Sign in").click()


def test_sign_in_search_open_edit(page, district, screenshot, make_user):
    from playwright.sync_api import expect

    # Sign in with a wrong password first: the page says so and stays on sign-in.
    sign_in(page, "mona", "not-the-password")
    expect(page.get_by_role("alert")).to_contain_text("correct username and password")
    page.get_by_label("User name").fill("mona")
    page.get_by_label("Password").fill("pw-mona-123!")
    page.get_by_role("button", name="Sign in").click()
    expect(page.get_by_role("heading", name="Marks")).to_be_visible()
    expect(page.locator("#counts")).to_contain_text("11 in the registry")

    # Search: free text on the keeper, then narrow by code prefix.
    page.get_by_label("Free text (code, name, marking, keeper, monument)").fill("kestrel valley")
    page.get_by_role("button", name="Search").click()
    expect(page.locator("#counts")).to_contain_text("of 5 matching marks")
    page.get_by_label("Code or name").fill("kv-00")
    page.get_by_label("Free text (code, name, marking, keeper, monument)").fill("")
    page.get_by_role("button", name="Search").click()
    expect(page.locator("#counts")).to_contain_text("of 8 matching marks")
    assert "q=kv-00" in page.url
    lat_cell = page.locator("table.marks tbody tr").first.locator("td.num").first
    assert lat_cell.evaluate("el => getComputedStyle(el).textAlign") == "right"
    screenshot(page, "mark-list")

    # Open the mark.
    page.get_by_role("link", name="KV-001", exact=True).click()
    expect(page.get_by_role("heading", level=1)).to_contain_text("KV-001 · Kestrel Ridge")
    expect(page.locator("tr.row-published").first).to_contain_text("45°12′00.00044″ N")
    expect(page.get_by_role("note")).to_contain_text("licensed professional practice govern")
    thumb = page.locator("ul.photos img").first
    thumb.scroll_into_view_if_needed()
    expect(thumb).to_be_visible()
    # the photo really loaded (decode() waits for a lazy image and fails if it cannot load)
    assert thumb.evaluate("img => img.decode().then(() => img.naturalWidth)") == 400
    screenshot(page, "mark-page")

    # Edit as a manager (the scenario's publications and suspect clearance have bumped the version).
    before = Mark.objects.get(code="KV-001").version
    page.get_by_role("link", name="Edit description").click()
    expect(page.get_by_role("heading", level=1)).to_contain_text("Edit mark KV-001")
    page.get_by_label("Name").fill("Kestrel Ridge (summit outcrop)")
    page.get_by_label("Sky view").select_option(label="partly obstructed")
    screenshot(page, "mark-edit")
    page.get_by_role("button", name="Save changes").click()
    expect(page.locator(".messages")).to_contain_text(f"Mark KV-001 saved (version {before + 1}).")
    expect(page.get_by_role("heading", level=1)).to_contain_text("Kestrel Ridge (summit outcrop)")
    expect(page.locator("dl.facts")).to_contain_text("partly obstructed")
    expect(page.locator("table.history")).to_contain_text("Kestrel Ridge → Kestrel Ridge (summit outcrop)")

    # A colleague saves while the edit page is open: my save is refused, both values shown.
    page.get_by_role("link", name="Edit description").click()
    from registry.services.marks import mark_update

    mark_update(
        actor=make_user("marta", "manager"),
        code="KV-001",
        expected_version=before + 1,
        changes={"marking": "KESTREL RIDGE 2009 RESET 2024"},
    )
    page.get_by_label("Marking as inscribed").fill("KESTREL RIDGE 2009 (worn)")
    page.get_by_role("button", name="Save changes").click()
    expect(page.get_by_role("heading", level=2, name=re.compile("Not saved"))).to_be_visible()
    expect(page.locator("table.compare")).to_contain_text("KESTREL RIDGE 2009 RESET 2024")
    expect(page.locator("table.compare")).to_contain_text("marta")
    screenshot(page, "mark-edit-conflict")
    assert Mark.objects.get(code="KV-001").marking == "KESTREL RIDGE 2009 RESET 2024"


def test_viewer_sees_no_edit_and_is_refused(page, district):
    from playwright.sync_api import expect

    make = Mark.objects.get(code="KV-001")
    from django.contrib.auth import get_user_model

    viewer = get_user_model().objects.create_user(username="vic", password="pw-vic-123!")
    from django.contrib.auth.models import Group

    viewer.groups.add(Group.objects.get(name="viewer"))
    sign_in(page, "vic", "pw-vic-123!", start="/marks/KV-001/")
    expect(page.get_by_role("heading", level=1)).to_contain_text("KV-001")
    expect(page.get_by_role("link", name="Edit description")).to_have_count(0)
    response = page.goto("/marks/KV-001/edit/")
    assert response.status == 403
    expect(page.get_by_role("heading", name="Not allowed")).to_be_visible()
    assert Mark.objects.get(code="KV-001").version == make.version  # the refusal changed nothing
    page.get_by_role("button", name="Sign out").click()
    expect(page.get_by_role("heading", name="Sign in")).to_be_visible()


def test_the_whole_flow_works_without_javascript(chromium, live_server, district):
    """Search, open and edit with JavaScript switched off in the browser."""
    from playwright.sync_api import expect

    context = chromium.new_context(java_script_enabled=False, base_url=live_server.url)
    try:
        page = context.new_page()
        sign_in(page, "mona", "pw-mona-123!")
        page.get_by_label("Code or name").fill("heron")
        page.get_by_role("button", name="Search").click()
        expect(page.locator("#counts")).to_contain_text("of 1 matching mark")
        page.get_by_role("link", name="KV-003", exact=True).click()
        page.get_by_role("link", name="Edit description").click()
        page.get_by_label("Keeper").fill("Heron Point Wildlife Refuge (invented)")
        page.get_by_role("button", name="Save changes").click()
        expect(page.locator("dl.facts")).to_contain_text("Heron Point Wildlife Refuge (invented)")
        assert Mark.objects.get(code="KV-003").version == 2
    finally:
        context.close()
