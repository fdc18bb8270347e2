"""The mark page's position-history plot: offsets, 95 % bars, frames not mixed, the SVG's geometry.

Check values: offsets of positions 10 mm east / 20 mm north / 30 mm up of the reference, built with
pyproj's Geod (GRS80 forward geodesic; an independent library) and compared with the plot's offsets;
95 % one-dimensional half-width = 1.96 σ (normal quantile, scipy.stats.norm.ppf(0.975) = 1.959964).
"""

from __future__ import annotations

import xml.etree.ElementTree as ET

import pytest
from pyproj import Geod
from scipy.stats import norm

from registry.reports.timeseries import K95_1D, SeriesPoint, nice_ticks, timeseries_svg
from registry.selectors.timeseries import mark_timeseries
from registry.services.positions import position_propose, position_publish
from tests.services._data import ITRF2014_EPSG, NAD83_2011_EPSG, make_mark, position_data

SVG = "{http://www.w3.org/2000/svg}"
LAT0, LON0, H0 = 45.2012345678, -110.6023456789, 1523.4567


def test_k95_is_the_normal_quantile():
    assert K95_1D == pytest.approx(norm.ppf(0.975), abs=5e-5)


def test_nice_ticks():
    assert nice_ticks(-12.0, 31.0) == [-10.0, 0.0, 10.0, 20.0, 30.0]
    assert nice_ticks(2025.66, 2025.86, 4) == pytest.approx([2025.7, 2025.75, 2025.8, 2025.85])


def _offset(de_m: float, dn_m: float):
    geod = Geod(ellps="GRS80")
    lon, lat, _ = geod.fwd(LON0, LAT0, 90.0, de_m)
    lon, lat, _ = geod.fwd(lon, lat, 0.0, dn_m)
    return lat, lon


@pytest.mark.django_db
def test_offsets_bars_and_frames(manager, technician):
    make_mark(manager, "TS-001")
    first = position_propose(actor=technician, mark_code="TS-001", data=position_data(epoch_yr=2015.0))
    position_publish(actor=manager, position_id=first.pk)
    lat, lon = _offset(0.010, 0.020)
    second = position_propose(
        actor=technician,
        mark_code="TS-001",
        data=position_data(
            epoch_yr=2020.0,
            lat_deg=lat,
            lon_deg=lon,
            h_m=H0 + 0.030,
            vel_e_m_yr=0.002,
            vel_n_m_yr=-0.001,
            vel_u_m_yr=0.0,
        ),
    )
    position_publish(actor=manager, position_id=second.pk)
    position_propose(actor=technician, mark_code="TS-001", data=position_data(epoch_yr=2024.0))
    position_propose(
        actor=technician, mark_code="TS-001", data=position_data(frame_epsg=NAD83_2011_EPSG, epoch_yr=2010.0)
    )
    from registry.models import Mark

    plot = mark_timeseries(mark=Mark.objects.get(code="TS-001"))
    assert plot.frame_epsg == ITRF2014_EPSG and plot.other_frames == {NAD83_2011_EPSG: 1}
    assert plot.reference.pk == second.pk and plot.has_velocity
    by_epoch = {p.epoch_yr: p for p in plot.points}
    assert [p.state for p in plot.points] == ["superseded", "published", "proposed"]
    assert by_epoch[2020.0].e_mm == pytest.approx(0.0, abs=1e-6)
    # the first position is 10 mm west, 20 mm south and 30 mm below the reference (Geod, see docstring)
    assert by_epoch[2015.0].e_mm == pytest.approx(-10.0, abs=0.01)
    assert by_epoch[2015.0].n_mm == pytest.approx(-20.0, abs=0.01)
    assert by_epoch[2015.0].u_mm == pytest.approx(-30.0, abs=0.01)
    assert by_epoch[2015.0].e95_mm == pytest.approx(1.96 * 5.0) and by_epoch[2015.0].u95_mm == pytest.approx(
        1.96 * 10.0
    )
    root = ET.fromstring(plot.svg)
    assert "style" not in plot.svg  # the site's CSP forbids style attributes
    assert root.get("viewBox").startswith("0 0 380 ")


def _points():
    return [
        SeriesPoint(2015.0, -10.0, -20.0, -30.0, 9.8, 9.8, 19.6, "superseded"),
        SeriesPoint(2020.0, 0.0, 0.0, 0.0, 9.8, 9.8, 19.6, "published"),
        SeriesPoint(2024.0, 40.0, 0.0, 0.0, 19.6, 9.8, 19.6, "proposed"),
        SeriesPoint(2022.0, 0.0, 0.0, 0.0, 9.8, 9.8, 19.6, "rejected"),
    ]


def test_svg_draws_each_state_with_its_own_shape_and_the_velocity_line():
    svg = timeseries_svg(_points(), velocity_mm_yr=(2.0, -1.0, 0.0), velocity_epoch_yr=2020.0)
    root = ET.fromstring(svg)
    circles = root.findall(f".//{SVG}circle")
    filled = [c for c in circles if c.get("fill") != "#fff"]
    # one published point per panel (3) plus the legend's
    assert len(filled) == 4 and len(circles) == 8
    assert len(root.findall(f".//{SVG}rect[@width='6.8']")) == 4  # proposed: 3 panels + legend
    dashdot = [ln for ln in root.iter(f"{SVG}line") if ln.get("stroke-dasharray") == "7 3 1.5 3"]
    assert len(dashdot) == 4  # 3 panels + legend
    # the east velocity line rises 2 mm/yr: its end is above its start in the drawing (y grows downward)
    east = dashdot[0]
    assert float(east.get("y2")) < float(east.get("y1"))
    assert "velocity" in svg and "error bar: 95 %" in svg


def test_error_bar_length_is_proportional_to_the_95_percent_half_width():
    svg = timeseries_svg(_points())
    root = ET.fromstring(svg)
    # vertical bars of the up panel's first point: 2 × 19.6 mm against 2 × 9.8 mm in the east panel
    bars = [
        ln
        for ln in root.iter(f"{SVG}line")
        if ln.get("x1") == ln.get("x2") and ln.get("stroke-width") == "1" and ln.get("stroke") == "#111"
    ]
    lengths = [abs(float(b.get("y2")) - float(b.get("y1"))) for b in bars]
    assert len(lengths) == 13  # 4 points × 3 panels, plus the legend's bar
    # east panel, epochs in order 2015, 2020, 2022, 2024: the last point's ±19.6 mm bar is twice the others'
    assert lengths[3] == pytest.approx(2 * lengths[0], rel=0.02)
    assert lengths[0] == pytest.approx(lengths[1], abs=0.11) == pytest.approx(lengths[2], abs=0.11)


def test_no_points_is_an_error():
    with pytest.raises(ValueError):
        timeseries_svg([])


@pytest.mark.django_db
def test_mark_page_shows_the_plot_only_with_positions(manager, technician, viewer, client):
    make_mark(manager, "TS-002")
    client.force_login(viewer)
    assert "Position history" not in client.get("/marks/TS-002/").content.decode()
    position_propose(actor=technician, mark_code="TS-002", data=position_data())
    page = client.get("/marks/TS-002/").content.decode()
    assert "Position history" in page and "<svg" in page and "ITRF2014 (EPSG:7912)" in page
