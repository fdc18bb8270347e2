"""In a real browser: a technician asks for a control report; the build waits for a worker, and the page's
progress bar follows it without a reload (plain polling, build_progress.js) until the link to the new
document appears. The "worker" is this test, running the build the way ``db_worker`` would, while the
page is open (the task backend here only queues).

Invented scenario: two marks and a point site near 45.2° N, 110.6° W.
"""

from __future__ import annotations

import datetime as dt

import pytest

from registry.models import BuildState, DocumentBuild, Finding, Job, Visit
from tests.documents.conftest import POSITION, make_mark

pytestmark = [pytest.mark.browser, pytest.mark.django_db(transaction=True)]


@pytest.fixture
def job(manager, settings):
    settings.TASKS = {"default": {"BACKEND": "django_tasks.backends.dummy.DummyBackend"}}
    for code, dlat in (("CR-100", 0.0), ("CR-101", -0.005)):
        mark = make_mark(code, lat=POSITION["lat_deg"] + dlat)
        Visit.objects.create(mark=mark, visited_on=dt.date(2025, 6, 1), finding=Finding.INTACT)
    return Job.objects.create(
        code="J-B1",
        name="Invented stake-out",
        site_geojson={"type": "Point", "coordinates": [POSITION["lon_deg"] + 0.002, POSITION["lat_deg"]]},
        frame_epsg=6319,
        epoch_yr=2010.0,
        tol_h_mm=30.0,
        tol_v_mm=50.0,
        created_by=manager,
    )


def test_progress_bar_follows_a_background_build(page, job, technician, screenshot):
    from playwright.sync_api import expect

    from registry.services.documents import run_build

    page.goto(f"/jobs/{job.code}/report/")
    page.get_by_label("User name").fill("theo")
    page.get_by_label("Password").fill("pw-theo-123!")
    page.get_by_role("button", name="Sign in").click()
    page.get_by_role("button", name="Build the report").click()
    expect(page.locator("#build-state")).to_have_text("waiting to start")
    expect(page.locator("#build-refresh")).to_be_visible()  # the refresh link, for pages without JavaScript
    screenshot(page, "report-build-waiting")
    build = DocumentBuild.objects.get(job=job)
    assert build.state == BuildState.QUEUED and build.task_id

    run_build(build.pk)  # what the worker does

    expect(page.locator("#build-state")).to_have_text("built", timeout=10_000)  # no reload: the script polled
    expect(page.locator("#build-progress")).to_have_attribute("value", "100")
    link = page.locator("#build-link")
    expect(link).to_be_visible()
    expect(page.locator("#build-refresh")).to_be_hidden()
    link.click()
    expect(page.get_by_text("Not issued.")).to_be_visible()
    screenshot(page, "report-draft")
