"""Every page as each role, in headless Chromium at 1440 px and 390 px (a phone): no horizontal overflow
(``document.documentElement.scrollWidth <= innerWidth``) and no serious or critical accessibility
violation found by axe-core (4.14.1, vendored from its npm package in tests/browser/vendor/; injected
through the DevTools protocol, so the pages keep their strict CSP).

Issue 10, "Checks". Saves phone and desktop screenshots of the mark list, a mark page and marks near a
point into docs/screenshots/ with REGISTRY_UPDATE_SCREENSHOTS=1. Invented marks and people.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from registry.models import Job
from registry.services.marks import mark_set_status
from tests.web.scenario import build_kestrel, build_neighbours, illustration_png

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]

AXE = Path(__file__).resolve().parent / "vendor" / "axe-core-4.14.1" / "axe.min.js"
WIDTHS = {"desktop": 1440, "phone": 390}
USERS = {
    "viewer": ("vera", "pw-vera-123!"),
    "technician": ("theo", "pw-theo-123!"),
    "manager": ("mona", "pw-mona-123!"),
    "signatory": ("sina", "pw-sina-123!"),
    "admin": ("ada", "pw-ada-123!"),
}
EVERYONE = tuple(USERS)
RECORDERS = ("technician", "manager")
MANAGERS = ("manager",)
#: (address, roles that may open it)
PAGES = [
    ("/marks/", EVERYONE),
    ("/marks/?text=disk", EVERYONE),
    ("/marks/KV-001/", EVERYONE),
    ("/marks/KV-002/", EVERYONE),  # destroyed: the banner
    ("/marks/KV-006/", EVERYONE),  # its last visit found it disturbed
    ("/marks/near/", EVERYONE),
    ("/marks/near/?lat=45+12+00+N&lon=110+36+00+W&radius_km=10&usable=all", EVERYONE),
    ("/tools/accuracy/", EVERYONE),
    ("/tools/convert/", EVERYONE),
    ("/tools/grids/", EVERYONE),
    ("/documents/", EVERYONE),
    ("/jobs/", EVERYONE),
    ("/jobs/J-LAYOUT/", EVERYONE),
    ("/verify/", EVERYONE),
    ("/marks/KV-001/visits/new/", RECORDERS),
    ("/marks/KV-001/occupations/new/", RECORDERS),
    ("/marks/KV-001/positions/new/", RECORDERS),
    ("/marks/KV-001/edit/", MANAGERS),
    ("/marks/KV-001/status/", MANAGERS),
    ("/marks/new/", MANAGERS),
    ("/marks/import/", MANAGERS),
    ("/jobs/new/", RECORDERS),  # party chiefs plan jobs too
    ("/jobs/J-LAYOUT/edit/", RECORDERS),
]
SHOTS = {
    "/marks/": "mark-list",
    "/marks/KV-002/": "mark-destroyed",
    "/marks/near/?lat=45+12+00+N&lon=110+36+00+W&radius_km=10&usable=all": "marks-near",
    "/jobs/": "job-list",
    "/jobs/J-LAYOUT/": "job-page",
    "/jobs/new/": "job-form",
}


@pytest.fixture
def district(settings, tmp_path, manager, technician, signatory, admin_user_role, viewer):
    settings.MEDIA_ROOT = tmp_path / "media"
    data = build_kestrel(manager, technician, photo_png=illustration_png())
    build_neighbours(manager, technician)
    bridge = data["bridge"]
    mark_set_status(
        actor=manager,
        code="KV-002",
        status="destroyed",
        expected_version=bridge.version,
        note="Bridge replaced in 2024 (invented).",
    )
    Job.objects.create(
        code="J-LAYOUT",
        name="Invented culvert stake-out",
        site_geojson={"type": "Point", "coordinates": [-110.6, 45.2]},
        frame_epsg=6319,
        epoch_yr=2025.5,
        tol_h_mm=30.0,
        tol_v_mm=40.0,
    )
    return data


def _sign_in(page, role):
    user, password = USERS[role]
    page.goto("/signin/")
    page.get_by_label("User name").fill(user)
    page.get_by_label("Password").fill(password)
    page.get_by_role("button", name="Sign in").click()
    page.wait_for_url("**/marks/**")


@pytest.mark.parametrize("width", list(WIDTHS))
@pytest.mark.parametrize("role", EVERYONE)
def test_every_page_fits_and_passes_axe(chromium, live_server, district, role, width, screenshot):
    axe_source = AXE.read_text(encoding="utf-8")
    context = chromium.new_context(
        viewport={"width": WIDTHS[width], "height": 900}, base_url=live_server.url, is_mobile=width == "phone"
    )
    context.set_default_timeout(20_000)
    page = context.new_page()
    problems: list[str] = []
    checked = 0
    try:
        _sign_in(page, role)
        for url, roles in PAGES:
            if role not in roles:
                continue
            response = page.goto(url)
            assert response is not None and response.status == 200, f"{url} as {role}: {response and response.status}"
            page.wait_for_load_state("load")
            checked += 1
            sizes = page.evaluate("() => [document.documentElement.scrollWidth, window.innerWidth]")
            if sizes[0] > sizes[1]:
                wide = page.evaluate(
                    """() => { const w = window.innerWidth; return [...document.querySelectorAll('body *')]
                    .filter(e => e.getBoundingClientRect().right > w + 1)
                    .slice(0, 4).map(e => e.tagName.toLowerCase() + '.' + [...e.classList].join('.')
                      + ' ' + Math.round(e.getBoundingClientRect().right)); }"""
                )
                problems.append(f"{url}: {sizes[0]} px wide in a {sizes[1]} px window ({', '.join(wide)})")
            if url.startswith("/jobs/") and sizes[0] > WIDTHS[width]:  # a phone's viewport widens to fit
                problems.append(f"{url}: {sizes[0]} px wide on a {WIDTHS[width]} px screen")
            if url == "/jobs/J-LAYOUT/":  # the map leads and spans the phone's width, readable
                box = page.locator("#jobmap-live").bounding_box()  # the interactive map (scripts on)
                if (
                    box is None
                    or box["width"] < min(WIDTHS[width] - 60, 500)
                    or box["x"] + box["width"] > WIDTHS[width]
                ):
                    problems.append(f"{url}: the job map is {box} in a {WIDTHS[width]} px window")
            page.evaluate(axe_source)
            result = page.evaluate(
                "async () => (await axe.run(document, {resultTypes: ['violations']})).violations"
                ".filter(v => v.impact === 'serious' || v.impact === 'critical')"
                ".map(v => v.id + ' (' + v.impact + '): ' + v.nodes.slice(0, 3).map(n => n.target.join(' ')).join(' | '))"
            )
            problems += [f"{url}: {r}" for r in result]
            if role == "manager" and url in SHOTS:
                screenshot(page, f"{SHOTS[url]}-{width}")
    finally:
        context.close()
    assert checked >= 14
    assert not problems, "\n".join(problems)
