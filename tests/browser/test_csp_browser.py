"""No Content-Security-Policy violations on the main pages in headless Chromium (issue 11, "Edges" 2).

Every page is opened signed in as a manager with a small invented district and a job; the browser
reports each blocked script, style or image as a ``securitypolicyviolation`` event (collected by
an init script) and as a console error. The API documentation page must also actually render
(Swagger UI from the vendored drf-spectacular-sidecar files: no network needed).
"""

from __future__ import annotations

import pytest

from tests.browser.test_job_browser import job  # noqa: F401  (fixture: an invented polygon job)
from tests.web.scenario import build_kestrel, build_neighbours

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]

COLLECT = """
window.__csp = [];
document.addEventListener('securitypolicyviolation', e => {
  window.__csp.push(e.violatedDirective + ' ' + (e.blockedURI || 'inline') + ' @' + e.sourceFile + ':' + e.lineNumber);
});
"""


@pytest.fixture
def district(settings, tmp_path, manager, technician):
    settings.MEDIA_ROOT = tmp_path / "media"
    settings.DEBUG = True  # the development media view serves the photos
    build_kestrel(manager, technician)
    build_neighbours(manager, technician)


PAGES = [
    "/marks/",
    "/marks/?q=KV&free=kestrel",
    "/marks/KV-001/",
    "/marks/KV-001/edit/",
    "/marks/KV-001/visits/new/",
    "/marks/KV-001/occupations/new/",
    "/marks/KV-001/positions/new/",
    "/marks/KV-001/status/",
    "/marks/near/?lat=45.2&lon=-110.6&radius_km=20",
    "/marks/new/",
    "/marks/import/",
    "/jobs/",
    "/jobs/J-2025-014/",
    "/jobs/J-2025-014/edit/",
    "/jobs/new/",
    "/tools/convert/",
    "/tools/accuracy/",
    "/tools/grids/",
    "/api/marks/",
]


def test_main_pages_have_no_csp_violations(chromium, live_server, district, job):  # noqa: F811
    context = chromium.new_context(viewport={"width": 1280, "height": 900}, base_url=live_server.url)
    context.set_default_timeout(15_000)
    context.add_init_script(COLLECT)
    page = context.new_page()
    console: list[str] = []
    page.on("console", lambda m: console.append(m.text) if m.type == "error" else None)
    page.goto("/signin/")
    violations = {"/signin/": page.evaluate("window.__csp")}
    page.get_by_label("User name").fill("mona")
    page.get_by_label("Password").fill("pw-mona-123!")
    page.get_by_role("button", name="Sign in").click()
    page.wait_for_url("**/marks/")
    for url in PAGES:
        response = page.goto(url)
        assert response.status == 200, url
        page.wait_for_load_state("load")
        violations[url] = page.evaluate("window.__csp")
    # the convert page's script (a static file now) still switches the fieldsets
    page.goto("/tools/convert/")
    page.select_option("#id_form", index=1)
    hidden = page.locator("fieldset[data-form][hidden]").count()
    assert hidden >= 1
    violations["/tools/convert/ (changed)"] = page.evaluate("window.__csp")
    # API documentation: Swagger UI renders the schema from our own static files
    page.goto("/api/docs/")
    page.wait_for_selector(".swagger-ui .info .title", timeout=20_000)
    assert "Control-mark registry API" in page.locator(".swagger-ui .info .title").inner_text()
    page.wait_for_selector(".opblock", timeout=20_000)
    violations["/api/docs/"] = page.evaluate("window.__csp")
    context.close()
    assert {url: v for url, v in violations.items() if v} == {}
    assert [m for m in console if "Content Security Policy" in m] == []
