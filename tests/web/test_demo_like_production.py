"""Issue 10, item 16: the demo runs like production where it matters — friendly error pages without the
debug page, static files served by WhiteNoise, the API docs from local assets, EGM96 from proj-data,
and no stale warnings replayed on a later start."""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from django.test import RequestFactory

DEMO_SH = Path(__file__).resolve().parents[2] / "deploy" / "demo.sh"


@pytest.fixture
def no_debug(settings):
    settings.DEBUG = False
    return settings


@pytest.mark.django_db
def test_friendly_404_without_the_debug_page(client, viewer, no_debug):
    client.force_login(viewer)
    response = client.get("/marks/NO-SUCH-MARK/")
    assert response.status_code == 404
    body = response.content.decode()
    assert "Not found" in body and "Traceback" not in body and "URLconf" not in body


@pytest.mark.django_db
def test_friendly_403(client, viewer, no_debug):
    client.force_login(viewer)
    response = client.get("/marks/import/")
    assert response.status_code == 403 and "Traceback" not in response.content.decode()


def test_friendly_500_page_needs_no_context(no_debug):
    from registry.api.fallback import server_error

    response = server_error(RequestFactory().get("/marks/"))
    body = response.content.decode()
    assert response.status_code == 500
    assert "Something went wrong" in body and "server's log" in body and "Traceback" not in body
    assert "/static/registry/registry.css" in body
    api = server_error(RequestFactory().get("/api/marks/"))
    assert api.status_code == 500 and api["Content-Type"].startswith("application/json")


@pytest.mark.django_db
def test_static_files_and_api_docs_assets_are_served_locally(client, viewer, no_debug):
    assert client.get("/static/registry/registry.css").status_code == 200
    client.force_login(viewer)
    docs = client.get("/api/docs/")
    assert docs.status_code == 200
    html = docs.content.decode()
    assets = re.findall(r'(?:src|href)="([^"]+\.(?:js|css))"', html)
    assert assets and all(a.startswith("/static/") for a in assets), assets  # no CDN
    for asset in assets:
        response = client.get(asset)
        assert response.status_code == 200, asset


def test_demo_script_runs_without_debug_installs_proj_data_and_replays_no_old_warnings():
    text = DEMO_SH.read_text()
    assert 'REGISTRY_DEBUG="${REGISTRY_DEBUG:-0}"' in text and "REGISTRY_DEBUG=1" not in text
    assert "apt_install proj-data" in text
    # only the user list is kept for later starts
    assert "sed -n '/^Demo users/,$p'" in text


@pytest.mark.django_db
def test_the_demo_serves_photos_without_debug(kestrel, client, viewer, settings):
    settings.DEBUG = False
    settings.REGISTRY = {**settings.REGISTRY, "MEDIA_BY_DJANGO": True}
    client.force_login(viewer)
    response = client.get(kestrel["photo"].file.url)
    assert response.status_code == 200 and "X-Accel-Redirect" not in response
    assert b"".join(response.streaming_content)[:8] == b"\x89PNG\r\n\x1a\n"
    assert "REGISTRY_MEDIA_BY_DJANGO=1" in DEMO_SH.read_text()
