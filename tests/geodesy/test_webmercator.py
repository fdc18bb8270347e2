"""Tile numbering (registry.geodesy.webmercator) against pyproj's EPSG:3857 and the slippy-map formulas.

Outside references:
- pyproj (PROJ) EPSG:4326 → EPSG:3857 "WGS 84 / Pseudo-Mercator": tile x = n·(X + πa)/(2πa),
  y = n·(πa − Y)/(2πa) with a = 6 378 137 m (the tiling of EPSG:3857 as the OpenStreetMap wiki,
  "Slippy map tilenames", describes it; from memory).
- The equatorial circumference 2πa = 40 075 016.686 m of the WGS 84 semi-major axis (common value).
"""

from __future__ import annotations

import math

import numpy as np
import pyproj
import pytest

from registry.geodesy.webmercator import (
    MAX_LAT_DEG,
    lonlat_from_tile_xy,
    tile_width_m,
    tile_xy_from_lonlat,
    zoom_for_tile_px,
)

A = 6_378_137.0
TO_3857 = pyproj.Transformer.from_crs("EPSG:4326", "EPSG:3857", always_xy=True)
LON = np.array([-110.6, 0.0, 13.4, 151.2, -179.9, 179.9])
LAT = np.array([45.2, 0.0, 52.5, -33.9, -60.0, 84.0])


@pytest.mark.parametrize("z", [0, 5, 12, 17, 19])
def test_tile_xy_agrees_with_pyproj_pseudo_mercator(z):
    n = 2**z
    X, Y = TO_3857.transform(LON, LAT)
    x_ref = n * (X + math.pi * A) / (2 * math.pi * A)
    y_ref = n * (math.pi * A - Y) / (2 * math.pi * A)
    x, y = tile_xy_from_lonlat(LON, LAT, z)
    assert x == pytest.approx(x_ref, abs=1e-6) and y == pytest.approx(y_ref, abs=1e-6)  # 1e-6 tile ≈ 0.15 mm at z 19


def test_inverse_round_trips_and_clamps():
    x, y = tile_xy_from_lonlat(LON, LAT, 15)
    lon, lat = lonlat_from_tile_xy(x, y, 15)
    assert lon == pytest.approx(LON, abs=1e-9) and lat == pytest.approx(LAT, abs=1e-9)
    _, y_pole = tile_xy_from_lonlat(0.0, 89.9, 3)
    assert float(y_pole) == pytest.approx(0.0, abs=1e-9)  # clamped to MAX_LAT_DEG, the top edge
    assert MAX_LAT_DEG == pytest.approx(85.0511287798, abs=1e-9)  # common value of the Web Mercator limit


def test_tile_width_and_zoom_choice():
    assert float(tile_width_m(0.0, 0)) == pytest.approx(40_075_016.686, abs=1e-3)
    assert float(tile_width_m(60.0, 1)) == pytest.approx(40_075_016.686 / 4, abs=1e-3)  # cos 60° = 1/2, n = 2
    # At 45.2° N and 1 px/m a tile of z is 2πa·cos φ / 2**z px; the chosen zoom puts it in 181–362 px.
    for px_per_m in (0.05, 0.18, 1.0, 3.0):
        z = zoom_for_tile_px(45.2, px_per_m)
        tile_px = 2 * math.pi * A * math.cos(math.radians(45.2)) / 2**z * px_per_m
        assert 256 / math.sqrt(2) <= tile_px <= 256 * math.sqrt(2)
    assert zoom_for_tile_px(0.0, 1e6) == 19  # clamped to MAX_ZOOM
