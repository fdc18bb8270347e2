"""Issue 10, item 8: the map panel of the mark list and near-a-point: a server-drawn SVG (no JavaScript
needed) with scale bar and graticule, the interactive map's data as a JSON block (CSP-safe), Leaflet
served from our static files (no CDN), tiles only when REGISTRY_BASEMAP_URL is set.

Check values: the scale bar length in pixels against an independent geodesic (pyproj Geod on GRS80)
across the drawing; the drawing's local projection uses the GRS80 mean radius R1 (Moritz 1980)."""

from __future__ import annotations

import json
import re

import pytest
from django.urls import reverse
from pyproj import Geod

from registry.web.mark_map import MapPoint, build_map, nice_step

pytestmark = pytest.mark.django_db


def _data(page: str) -> dict:
    return json.loads(
        re.search(r'<script id="markmap-data" type="application/json">(.*?)</script>', page, re.S).group(1)
    )


def test_list_has_the_panel_with_usability_and_no_cdn(kestrel, signed_in, viewer):
    page = signed_in(viewer).get(reverse("web:mark-list")).content.decode()
    assert '<svg class="markmap-svg"' in page and "scalebar" in page and 'class="grat"' in page
    data = _data(page)
    codes = {p["code"]: p for p in data["points"]}
    assert codes["KV-001"]["usable"] is True and codes["KV-001"]["label"] == "usable"
    assert data["basemap"] == ""
    scripts = re.findall(r'<script src="([^"]+)"', page)
    assert scripts == [
        "/static/vendor/leaflet-1.9.4/leaflet.js",
        "/static/registry/mapkit.js",
        "/static/registry/markmap.js",
    ]
    # Every script, stylesheet and image the page loads comes from this server. (The check looks at the
    # addresses only: a random sign-out form token may contain any three letters, "cdn" among them.)
    loaded = re.findall(r'<(?:script|img|link|iframe)\b[^>]*\b(?:src|href)="([^"]*)"', page)
    assert loaded and all(url.startswith("/") and not url.startswith("//") for url in loaded), loaded
    assert not any("unpkg" in url or "cdn" in url.lower() for url in loaded)
    assert "<script>" not in page  # no inline script: the data block is JSON, not run


def test_static_leaflet_is_served(client, viewer):
    client.force_login(viewer)
    for path in (
        "/static/vendor/leaflet-1.9.4/leaflet.js",
        "/static/vendor/leaflet-1.9.4/leaflet.css",
        "/static/registry/markmap.js",
        "/static/registry/mapkit.js",
        "/static/registry/jobmap.js",
        "/static/registry/sitedraw.js",
    ):
        assert client.get(path).status_code == 200, path


def test_near_has_centre_radius_and_usable_marks(kestrel, signed_in, viewer):
    page = signed_in(viewer).get("/marks/near/", {"lat": "45.2", "lon": "-110.6", "radius_km": "5"}).content.decode()
    data = _data(page)
    assert data["centre"] == [45.2, -110.6] and data["radius_m"] == 5000.0
    assert {p["code"] for p in data["points"]} == {"KV-001", "KV-002"}
    assert "search point" in page


def test_basemap_url_goes_to_the_interactive_map_and_the_csp(kestrel, signed_in, viewer, settings):
    settings.REGISTRY = {
        **settings.REGISTRY,
        "BASEMAP_URL": "https://tiles.example.org/{z}/{x}/{y}.png",
        "BASEMAP_ATTRIBUTION": "Example tiles (invented)",
    }
    response = signed_in(viewer).get(reverse("web:mark-list"))
    page = response.content.decode()
    assert _data(page)["basemap"] == "https://tiles.example.org/{z}/{x}/{y}.png"
    assert "Background tiles: Example tiles (invented)" in page
    assert "img-src 'self' data: https://tiles.example.org" in response["Content-Security-Policy"]
    assert "script-src 'self';" in response["Content-Security-Policy"]


def test_scale_bar_matches_a_geodesic():
    pts = [MapPoint("A", 45.20, -110.60, True, "usable"), MapPoint("B", 45.25, -110.50, False, "not for use")]
    svg = build_map(pts).svg
    bar = re.search(r'<path d="M([\d.]+) [\d.]+V[\d.]+H([\d.]+)V', svg)
    label = re.search(r'text-anchor="middle" fill="#1d1f21">([\d.]+) (k?m)</text>', svg)
    length_m = float(label.group(1)) * (1000 if label.group(2) == "km" else 1)
    bar_px = float(bar.group(2)) - float(bar.group(1))
    # pixels per metre from the drawing: the two marks' x distance against the geodesic east-west distance
    xs = [float(x) for x in re.findall(r'<circle cx="([\d.]+)" cy="[\d.]+" r="[56]"', svg)]
    g = Geod(ellps="GRS80")
    _, _, east_west_m = g.inv(-110.60, 45.225, -110.50, 45.225)  # along the mid-latitude parallel
    px_per_m = abs(xs[1] - xs[0]) / east_west_m
    assert bar_px == pytest.approx(length_m * px_per_m, rel=5e-3)
    assert "not for use" in svg and "usable" in svg


def test_nice_step():
    assert [nice_step(v) for v in (1.0, 3.2, 7.9, 140.0, 0.04)] == [1.0, 2.0, 5.0, 100.0, 0.02]


@pytest.mark.parametrize(
    "points",
    [
        [(45.2, -110.6), (45.1875, -110.6342)],  # the list's two marks: a corner label ran off the edge
        [(45.2, -110.6)],
        [(44.9, -111.1), (45.4, -110.2), (45.05, -110.5)],
        [(-33.9, 18.4), (-33.7, 18.9)],
    ],
)
def test_graticule_labels_stay_on_the_map_and_clear_of_each_other(points):
    from registry.web.mark_map import HEIGHT_PX, LABEL_PX, WIDTH_PX, label_width_px

    svg = build_map([MapPoint(f"M{i}", lat, lon, True, "usable", "", "") for i, (lat, lon) in enumerate(points)]).svg
    labels = re.findall(r'<text class="grat-label" x="([-\d.]+)" y="([-\d.]+)"[^>]*>([^<]+)</text>', svg)
    assert labels
    boxes = []
    for x, y, text in labels:
        x0, y1 = float(x), float(y)
        box = (x0, y1 - LABEL_PX, x0 + label_width_px(text), y1)
        assert 0 <= box[0] and box[2] <= WIDTH_PX and 0 <= box[1] and box[3] <= HEIGHT_PX, (text, box)
        boxes.append((text, box))
    for i, (a, ba) in enumerate(boxes):
        for b, bb in boxes[i + 1 :]:
            apart = ba[2] <= bb[0] or bb[2] <= ba[0] or ba[3] <= bb[1] or bb[3] <= ba[1]
            assert apart, (a, b)


def test_a_code_at_the_right_edge_is_written_on_the_left_of_its_symbol():
    from registry.web.mark_map import CODE_CHAR_PX, WIDTH_PX

    svg = build_map(
        [
            MapPoint("KV-001", 45.2, -110.6, True, "usable", "", ""),
            MapPoint("KV-002", 45.1875, -110.6342, True, "usable", "", ""),
        ]
    ).svg
    for code in ("KV-001", "KV-002"):
        x, anchor = re.search(
            rf'<text x="([-\d.]+)" y="[-\d.]+" font-size="11"( text-anchor="end")?[^>]*>{code}</text>', svg
        ).groups()
        left, right = (
            (float(x) - len(code) * CODE_CHAR_PX, float(x))
            if anchor
            else (float(x), float(x) + len(code) * CODE_CHAR_PX)
        )
        assert 0 <= left and right <= WIDTH_PX, (code, left, right)
