"""The job map (registry.web.job_map): frame, marks outside it, label placement, scale bar, convergence.

Outside references: pyproj.Geod on GRS80 (geodesic distances between drawn marks) and the first-order
meridian convergence γ ≈ Δλ·sin φ (any geodesy text, e.g. Snyder, *Map Projections: A Working Manual*,
USGS PP 1395, 1987, §8 — from memory; the higher-order ellipsoidal terms are below 0.1″ for Δλ < 1°
at 45° N). Invented marks in the fictional district near 45.20° N, 110.60° W.
"""

from __future__ import annotations

import itertools
import math
import re
import xml.etree.ElementTree as ET

import numpy as np
import pyproj
import pytest

from registry.models import MarkStatus, SkyView
from registry.services.screening import job_screen
from registry.web.job_map import (
    LABEL_CHAR_PX,
    LABEL_HEIGHT_PX,
    Box,
    build_job_map,
    label_box,
    map_frame_m,
    place_labels,
)
from tests.services.test_screening import SITE_LAT, SITE_LON, at, make_job, make_mark

SVG = "{http://www.w3.org/2000/svg}"
GEOD = pyproj.Geod(ellps="GRS80")


def _ring(half_m: float):
    sw = at(half_m * 2**0.5, 225.0)
    ne = at(half_m * 2**0.5, 45.0)
    return [[sw[1], sw[0]], [ne[1], sw[0]], [ne[1], ne[0]], [sw[1], ne[0]], [sw[1], sw[0]]]


@pytest.fixture
def crowded(db):
    """A 1.2 km square site; bases, a crowd of marks in a 'town' on its west edge, far marks at 6.5 km."""
    make_mark("BASE-N", 500.0, 10.0, sigma_h_mm=2.0)
    make_mark("BASE-S", 900.0, 170.0, sigma_h_mm=2.0)
    make_mark("CHK-1", 200.0, 250.0, sigma_h_mm=6.0)
    make_mark("CHK-2", 450.0, 100.0, sigma_h_mm=6.0)
    for i in range(30):  # the crowd: 30 marks within about 80 m of each other
        make_mark(f"TOWN-{i:02d}", 700.0 + 10.0 * (i % 6), 262.0 + 1.5 * (i // 6), sigma_h_mm=7.0)
    make_mark("OLD-1", 300.0, 300.0, status=MarkStatus.RETIRED)
    make_mark("SKY-1", 700.0, 60.0, sky=SkyView.OBSTRUCTED)
    for k, az in enumerate((0.0, 90.0, 180.0, 270.0)):
        make_mark(f"FAR-{k}", 6500.0, az)
    return make_job(code="J-MAP", site={"type": "Polygon", "coordinates": [_ring(600.0)]}, tol_h_mm=30.0, tol_v_mm=50.0)


def _parse(svg: str):
    root = ET.fromstring(svg)
    marks = {g.get("data-code"): g for g in root.iter(f"{SVG}g") if "mark" in (g.get("class") or "").split()}
    labels = [t for t in root.iter(f"{SVG}text") if t.get("data-for")]
    return root, marks, labels


def _text_box(t) -> Box:
    x, y, text = float(t.get("x")), float(t.get("y")), t.text
    w = LABEL_CHAR_PX * len(text)
    anchor = t.get("text-anchor")
    left = x if anchor == "start" else (x - w if anchor == "end" else x - w / 2)
    return Box(left, y - LABEL_HEIGHT_PX + 2, left + w, y + 3)


def _centre(g) -> tuple[float, float]:
    """Pixel centre of a mark symbol (circle, square, triangle or cross)."""
    shape = g[1]
    tag = shape.tag.removeprefix(SVG)
    if tag == "circle":
        return float(shape.get("cx")), float(shape.get("cy"))
    if tag == "rect":
        return float(shape.get("x")) + 6.0, float(shape.get("y")) + 6.0
    nums = [float(v) for v in re.findall(r"-?\d+\.?\d*", shape.get("d"))]
    if shape.get("d").startswith("M") and "L" in shape.get("d"):  # triangle: apex at (x, y - 10)
        return nums[0], nums[1] + 10.0
    return nums[0] + 3.5, nums[1] + 3.5  # cross: starts at (x - 3.5, y - 3.5)


def test_frame_holds_the_site_bases_and_checks_not_the_far_marks(crowded, viewer):
    result = job_screen(actor=viewer, code="J-MAP")
    jm = build_job_map(result)
    root, marks, labels = _parse(jm.svg)
    chosen = [c.mark.code for c in result.chosen]
    checks = [cm.candidate.mark.code for cm in result.check_marks]
    assert chosen and checks
    for code in chosen:
        assert "base" in marks[code].get("class")
    for code in checks:
        assert "check" in marks[code].get("class")
    # Marks 6.5 km away are outside a frame built around a 1.2 km site; they are counted, not drawn.
    assert not any(code.startswith("FAR-") for code in marks)
    outside = jm.outside_usable + jm.outside_excluded
    assert outside >= 4 and len(marks) + outside == len(result.candidates)
    # The frame is the site plus bases and checks plus margins: a few km, not the 20 km search disc.
    assert 1500.0 < jm.span_m < 5000.0
    # Coverage cells are legible: at least 5 px on a side.
    cell = next(r for r in root.iter(f"{SVG}rect") if r.get("data-h95"))
    assert float(cell.get("width")) >= 5.0
    # Excluded marks inside the frame are drawn faint, with their reasons in the tooltip.
    old = marks["OLD-1"]
    assert (
        "excluded" in old.get("class") and "the mark is retired or recorded destroyed" in old.find(f"{SVG}title").text
    )


def test_labels_do_not_overlap_and_bases_and_checks_are_always_labelled(crowded, viewer):
    result = job_screen(actor=viewer, code="J-MAP")
    jm = build_job_map(result)
    _, marks, labels = _parse(jm.svg)
    labelled = {t.get("data-for"): t for t in labels}
    for c in result.chosen:
        assert labelled[c.mark.code].text == f"{c.mark.code} (base)"
    for cm in result.check_marks:
        assert labelled[cm.candidate.mark.code].text == f"{cm.candidate.mark.code} (check)"
    boxes = [_text_box(t) for t in labels]
    for a, b in itertools.combinations(boxes, 2):
        assert not a.overlaps(b)
    for t, box in zip(labels, boxes, strict=True):  # no label covers another mark's symbol
        for code, g in marks.items():
            if code == t.get("data-for"):
                continue
            x, y = _centre(g)
            assert not box.overlaps(Box(x - 3, y - 3, x + 3, y + 3)), (t.text, code)
    # The crowd cannot all be labelled at this scale: some are left out, and the map says how many.
    assert jm.unlabelled >= 5
    assert len(labels) + jm.unlabelled == len(marks)


def test_scale_bar_agrees_with_geodesic_distances(crowded, viewer):
    """Pixel distance between two drawn marks × (bar metres / bar pixels) = their distance on the map.

    UTM grid distance = geodesic × point scale (0.9996 on the central meridian, up to ≈ 1.0000 here,
    110.6° W being 0.4° from 111° W), so the two agree to better than 0.1 %.
    """
    result = job_screen(actor=viewer, code="J-MAP")
    root, marks, _ = _parse(build_job_map(result).svg)
    bar = next(g for g in root.iter(f"{SVG}g") if g.get("class") == "scalebar")
    d = bar.find(f"{SVG}path").get("d")
    bar_px = float(re.search(r"h(-?\d+\.?\d*)", d).group(1))
    label = bar.find(f"{SVG}text").text
    value, unit = label.split()
    bar_m = float(value) * (1000.0 if unit == "km" else 1.0)
    a, b = result.chosen[0], result.check_marks[-1].candidate  # both always drawn
    (xa, ya), (xb, yb) = _centre(marks[a.mark.code]), _centre(marks[b.mark.code])
    map_m = math.hypot(xb - xa, yb - ya) * bar_m / bar_px
    _, _, geodesic_m = GEOD.inv(a.lon_deg, a.lat_deg, b.lon_deg, b.lat_deg)
    assert map_m == pytest.approx(geodesic_m, rel=2e-3)  # symbol centres are rounded to 0.1 px


def test_convergence_is_stated_with_the_ngs_sign(crowded, viewer):
    result = job_screen(actor=viewer, code="J-MAP")
    jm = build_job_map(result)
    # γ ≈ Δλ·sin φ, central meridian of zone 12: 111° W; east of it in the north: positive.
    expected_deg = (SITE_LON - (-111.0)) * math.sin(math.radians(SITE_LAT))
    assert jm.convergence_deg == pytest.approx(expected_deg, abs=0.1 / 3600)
    assert jm.convergence_text.startswith("+0°17′")
    assert "convergence +0°17′" in jm.svg and "grid north, UTM 12N" in jm.svg


def test_point_site_frame_takes_in_the_nearest_usable_marks(db, viewer):
    make_mark("NEAR-1", 300.0, 0.0)
    make_mark("NEAR-2", 450.0, 120.0)
    make_mark("NEAR-3", 600.0, 240.0)
    make_mark("NEAR-4", 700.0, 300.0)
    make_mark("AWAY-1", 7000.0, 45.0)
    make_job(code="J-PT", site={"type": "Point", "coordinates": [SITE_LON, SITE_LAT]}, tol_h_mm=30.0, tol_v_mm=50.0)
    result = job_screen(actor=viewer, code="J-PT")
    jm = build_job_map(result)
    _, marks, _ = _parse(jm.svg)
    assert {"NEAR-1", "NEAR-2", "NEAR-3", "NEAR-4"} <= set(marks)
    assert "AWAY-1" not in marks and jm.outside_usable == 1
    assert jm.span_m < 3000.0


def test_map_frame_and_label_placement_units():
    # Frame: margin on each side, the drawing's aspect, centred.
    x0, y0, x1, y1 = map_frame_m(
        np.array([0.0, 2000.0]),
        np.array([0.0, 1000.0]),
        np.array([3000.0]),
        np.array([0.0]),
        width_px=700,
        height_px=500,
        margin_fraction=0.125,
    )
    assert (x0, x1) == pytest.approx((-375.0, 3375.0))  # 3000 m span + 0.125 × 3000 m on each side
    assert (x1 - x0) / (y1 - y0) == pytest.approx(700 / 500)
    assert (y0 + y1) / 2 == pytest.approx(500.0)
    # Labels: a must-label item is placed even when boxed in; an optional one is dropped.
    wall = [Box(0, 0, 400, 400)]
    placed = place_labels([(200, 200, "MUST-1", True), (220, 220, "MAYBE-1", False)], wall, width_px=400, height_px=400)
    assert placed[0] is not None and placed[1] is None
    # The box follows the anchor.
    b_start = label_box(100, 100, "ABC", (9.0, -6.0, "start"))
    b_end = label_box(100, 100, "ABC", (-9.0, -6.0, "end"))
    assert b_start.x0 == pytest.approx(109.0) and b_end.x1 == pytest.approx(91.0)


# ----------------------------------------------------------------------------- basemap (issue 4)
#
# Outside reference for tile numbers: the OpenStreetMap wiki, "Slippy map tilenames"
# (https://wiki.openstreetmap.org/wiki/Slippy_map_tilenames), formulas from memory, written here
# with math only (not with registry.geodesy.webmercator):
#   xtile = floor((lon + 180) / 360 · 2**z)
#   ytile = floor((1 − ln(tan(lat) + 1/cos(lat)) / π) / 2 · 2**z)

TEMPLATE = "https://tiles.example.org/{z}/{x}/{y}.png"


def _slippy(lon_deg: float, lat_deg: float, z: int) -> tuple[float, float]:
    """Fractional tile (x, y) from the wiki's formulas (floor gives the tile number)."""
    lat = math.radians(lat_deg)
    n = 2**z
    return (lon_deg + 180.0) / 360.0 * n, (1.0 - math.log(math.tan(lat) + 1.0 / math.cos(lat)) / math.pi) / 2.0 * n


def _images(svg: str):
    root = ET.fromstring(svg)
    return root, [
        (im.get("href"), *(float(im.get(k)) for k in ("x", "y", "width", "height"))) for im in root.iter(f"{SVG}image")
    ]


def _with_basemap(settings, url: str, attribution: str = "") -> None:
    settings.REGISTRY = {**settings.REGISTRY, "BASEMAP_URL": url, "BASEMAP_ATTRIBUTION": attribution}


def test_no_basemap_when_the_setting_is_empty(crowded, viewer, client, settings):
    _with_basemap(settings, "")
    jm = build_job_map(job_screen(actor=viewer, code="J-MAP"))
    assert "<image" not in jm.svg and 'class="basemap"' not in jm.svg
    assert jm.basemap_tiles == 0 and jm.basemap_zoom is None
    client.force_login(viewer)
    page = client.get("/jobs/J-MAP/").content.decode()
    assert "<image" not in page and "map-basemap" not in page


def test_basemap_tiles_have_the_slippy_map_numbers_and_sit_under_the_marks(crowded, viewer, settings):
    _with_basemap(settings, TEMPLATE, "Tiles © Example Tiles (invented)")
    result = job_screen(actor=viewer, code="J-MAP")
    jm = build_job_map(result)
    root, images = _images(jm.svg)
    z = jm.basemap_zoom
    assert z is not None and jm.basemap_tiles == len(images) > 0
    # The basemap is the bottom layer: right after the paper rect, before the coverage cells and marks.
    children = [c.get("class") or c.tag.removeprefix(SVG) for c in root]
    assert children.index("basemap") < children.index("coverage") < children.index("marks")
    basemap = next(c for c in root if c.get("class") == "basemap")
    assert float(basemap.get("opacity")) == pytest.approx(0.5)
    # A tile is roughly 128–512 px on the drawing.
    for _, _, _, w, h in images:
        assert 128.0 <= w <= 512.0 and 128.0 <= h <= 512.0
    # Every drawn base and check mark lies in the tile the wiki's formulas give for it, at the place
    # inside that tile where its fraction says (within 3 px: unrotated tiles, 0.5 px overlap, rounding).
    _, marks, _ = _parse(jm.svg)
    by_href = {href: (x, y, w, h) for href, x, y, w, h in images}
    for c in [*result.chosen, *(cm.candidate for cm in result.check_marks)]:
        fx, fy = _slippy(c.lon_deg, c.lat_deg, z)
        href = f"https://tiles.example.org/{z}/{math.floor(fx)}/{math.floor(fy)}.png"
        assert href in by_href, (c.mark.code, href)
        x, y, w, h = by_href[href]
        mx, my = _centre(marks[c.mark.code])
        assert mx == pytest.approx(x + 0.5 + (fx % 1.0) * (w - 1.0), abs=3.0)
        assert my == pytest.approx(y + 0.5 + (fy % 1.0) * (h - 1.0), abs=3.0)
    # Images are stretched into their boxes, not letter-boxed.
    assert all(im.get("preserveAspectRatio") == "none" for im in root.iter(f"{SVG}image"))


def _covers(images, width: float, height: float, step: float = 2.0) -> bool:
    xs, ys = np.meshgrid(np.arange(0.0, width + 0.01, step), np.arange(0.0, height + 0.01, step))
    hit = np.zeros(xs.shape, dtype=bool)
    for _, x, y, w, h in images:
        hit |= (xs >= x) & (xs <= x + w) & (ys >= y) & (ys <= y + h)
    return bool(hit.all())


def test_basemap_images_cover_the_whole_drawing(crowded, viewer, settings):
    from registry.web.job_map import HEIGHT_PX, WIDTH_PX

    _with_basemap(settings, TEMPLATE)
    _, images = _images(build_job_map(job_screen(actor=viewer, code="J-MAP")).svg)
    assert _covers(images, WIDTH_PX, HEIGHT_PX)
    # No tile lies wholly outside the drawing.
    assert all(x < WIDTH_PX and y < HEIGHT_PX and x + w > 0 and y + h > 0 for _, x, y, w, h in images)


def test_the_tile_cap_lowers_the_zoom_and_still_covers(crowded, viewer, settings, monkeypatch):
    import registry.web.basemap as basemap
    from registry.web.job_map import HEIGHT_PX, WIDTH_PX

    _with_basemap(settings, TEMPLATE)
    result = job_screen(actor=viewer, code="J-MAP")
    free = build_job_map(result)
    assert 4 < free.basemap_tiles <= basemap.MAX_TILES
    monkeypatch.setattr(basemap, "MAX_TILES", 4)
    capped = build_job_map(result)
    assert capped.basemap_tiles <= 4 and capped.basemap_zoom < free.basemap_zoom
    _, images = _images(capped.svg)
    assert _covers(images, WIDTH_PX, HEIGHT_PX)


def test_a_hostile_template_is_escaped_and_a_bad_scheme_draws_nothing(crowded, viewer, client, settings):
    hostile = 'https://tiles.example.org/{z}/{x}/{y}.png?k="><script>alert(1)</script>&a=1'
    _with_basemap(settings, hostile, "<b>Tiles</b> & co")
    jm = build_job_map(job_screen(actor=viewer, code="J-MAP"))
    root, images = _images(jm.svg)  # still well-formed XML
    assert images and not list(root.iter(f"{SVG}script")) and "<script" not in jm.svg
    href = images[0][0]
    assert href.startswith("https://tiles.example.org/") and href.endswith('"><script>alert(1)</script>&a=1')
    client.force_login(viewer)
    page = client.get("/jobs/J-MAP/").content.decode()
    assert "&lt;b&gt;Tiles&lt;/b&gt; &amp; co" in page and "<b>Tiles</b>" not in page
    assert "for orientation only" in page and "not rotated by the meridian convergence" in page
    for bad in ("javascript:alert(1)//{z}/{x}/{y}", "https://tiles.example.org/{z}/{x}.png", "tiles/{z}/{x}/{y}.png"):
        _with_basemap(settings, bad)
        jm = build_job_map(job_screen(actor=viewer, code="J-MAP"))
        assert "<image" not in jm.svg and jm.basemap_tiles == 0, bad


@pytest.mark.parametrize(
    ("url", "warns"),
    [
        ("", False),
        (TEMPLATE, False),
        ("http://127.0.0.1:8001/t/{z}/{x}/{y}.png", False),
        ("ftp://tiles.example.org/{z}/{x}/{y}.png", True),
        ("javascript:alert(1)//{z}/{x}/{y}", True),
        ("https://tiles.example.org/{z}/{x}.png", True),
        ("https://tiles.example.org/{zoom}/{x}/{y}.png", True),
        ("https:///{z}/{x}/{y}.png", True),
    ],
)
def test_system_check_w020(settings, url, warns):
    from django.core.checks import run_checks

    _with_basemap(settings, url)
    ids = [m.id for m in run_checks() if m.id == "registry.W020"]
    assert ids == (["registry.W020"] if warns else [])


# ----------------------------------------------------------------------------- the interactive panel's data


def _shoelace_m2(ring_latlon, plane) -> float:
    lat = np.array([p[0] for p in ring_latlon])
    lon = np.array([p[1] for p in ring_latlon])
    e, n = plane.to_local_m(lat, lon)
    return 0.5 * float(np.sum(e[:-1] * n[1:] - e[1:] * n[:-1]))


def test_live_panel_data_is_the_svg_geometry_in_degrees(crowded, viewer):
    """Issue 10, item 8: the Leaflet panel draws from the same geometry as the SVG: the site's rings, the
    coverage cells (their union per colour class has the area of its cells), the service areas, every
    mark with the role the SVG gives it, and the SVG's frame as the first view."""
    from registry.web.job_map import classify, live_map_data

    result = job_screen(actor=viewer, code="J-MAP")
    jm = build_job_map(result)
    data = live_map_data(result, jm)
    s = result.settings
    ring = s.site.rings_lonlat_deg[0]
    assert data["site"][0] == [[round(float(la), 8), round(float(lo), 8)] for lo, la in ring]
    grid = result.grid
    cls = classify(result.core.best_h95_mm, s.tol_h_mm)
    for layer in data["coverage"]:
        n_cells = int((grid.is_cell & (cls == layer["class"])).sum())
        area = sum(_shoelace_m2(r, result.plane) for poly in layer["polygons"] for r in poly)
        # exteriors counter-clockwise (+), holes clockwise (−): the sum is the cells' area (to 8-decimal rounding)
        assert area == pytest.approx(n_cells * grid.spacing_m**2, rel=1e-4)
    assert sum(int((grid.is_cell & (cls == layer["class"])).sum()) for layer in data["coverage"]) == grid.n_cells
    _, marks, _ = _parse(jm.svg)
    for m in data["marks"]:
        if m["code"] in marks:
            assert m["role"] in marks[m["code"]].get("class").split()
        assert m["url"] == f"/marks/{m['code']}/"
    old = next(m for m in data["marks"] if m["code"] == "OLD-1")
    assert old["words"][0] == "excluded" and "Not used: the mark is retired or recorded destroyed" in old["words"]
    base = next(m for m in data["marks"] if m["role"] == "base")
    c = next(c for c in result.chosen if c.mark.code == base["code"])
    assert f"H 95 % {c.h95_mm:.1f} mm, V 95 % {c.v95_mm:.1f} mm (worst over the site)" in base["words"]
    # distance in words agrees with a geodesic from pyproj (to the 0.1 m shown)
    assert f"{c.distance_m:.1f}".replace(",", "") in base["words"][1].replace("\u2009", "")
    # the first view is the SVG's frame: its corners projected back to UTM span the same metres
    utm = pyproj.Proj(proj="utm", zone=int(jm.zone_label[:-1]), ellps="GRS80")
    x, _ = utm([p[1] for p in data["frame"]], [p[0] for p in data["frame"]])
    assert max(x) - min(x) == pytest.approx(jm.span_m, abs=0.01)
    assert data["basemap"] == "" and data["hatch_class"] == 4
    # the SVG's tooltips carry the same words, and each symbol links to its mark
    assert ("OLD-1: " + "; ".join(old["words"])) == marks["OLD-1"].find(f"{SVG}title").text
    assert f'<a href="/marks/{base["code"]}/"><g class="mark base"' in jm.svg


def test_live_panel_data_of_a_point_site_and_several_bases(db, viewer):
    from registry.web.job_map import live_map_data

    make_mark("PT-A", 800.0, 30.0)
    make_mark("PT-B", 1500.0, 250.0, status=MarkStatus.DESTROYED)
    make_job(code="J-PT", site={"type": "Point", "coordinates": [SITE_LON, SITE_LAT]}, tol_h_mm=30.0, tol_v_mm=50.0)
    result = job_screen(actor=viewer, code="J-PT")
    data = live_map_data(result, build_job_map(result))
    assert data["coverage"] == [] and data["areas"] == []
    assert data["point"]["lat"] == pytest.approx(SITE_LAT, abs=1e-8)
    assert data["point"]["words"].startswith("Site point: best H 95 %")
    words = {m["code"]: m["words"] for m in data["marks"]}
    assert words["PT-A"][1].endswith("m from the site point")
    assert words["PT-B"][0] == "excluded"


def test_live_panel_takes_the_basemap_setting(crowded, viewer, settings):
    from registry.web.job_map import live_map_data

    settings.REGISTRY = {
        **settings.REGISTRY,
        "BASEMAP_URL": "https://tiles.example.invalid/{z}/{x}/{y}.png",
        "BASEMAP_ATTRIBUTION": "Invented tiles",
    }
    result = job_screen(actor=viewer, code="J-MAP")
    data = live_map_data(result, build_job_map(result))
    assert data["basemap"] == "https://tiles.example.invalid/{z}/{x}/{y}.png"
    assert data["attribution"] == "Invented tiles"
