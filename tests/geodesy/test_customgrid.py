"""Custom grids (issue 7, item 12): built by PROJ, checked against pyproj and hand formulas; feet beside metres.

Sources named beside each check:
- pyproj ``Proj.get_factors`` on a PROJ string written out in the test (independent of our builder).
- Snyder (1987), *Map Projections — A Working Manual*, USGS Professional Paper 1395, eq. (8-11):
  transverse Mercator point scale k = k0 [1 + (1 + C) A²/2 + (5 − 4T + 42C + 13C² − 28e′²) A⁴/24
  + (61 − 148T + 16T²) A⁶/720], A = Δλ cos φ, T = tan² φ, C = e′² cos² φ.
- Meridian convergence of the transverse Mercator, γ = Δλ sin φ [1 + (Δλ cos φ)²/3 (1 + 3η² + 2η⁴)
  + (Δλ cos φ)⁴/15 (2 − tan² φ)], η² = e′² cos² φ (the classical series, e.g. Thomas 1952 [from memory]).
- International foot 0.3048 m and US survey foot 1200/3937 m (definitions, NIST).
"""

from __future__ import annotations

import dataclasses
import math

import pyproj
import pytest

from registry.geodesy.customgrid import CustomGridDefinition, CustomGridError, build_custom_grid
from registry.geodesy.grid import native_units, resolve_grid, to_grid

# An invented low-distortion TM for the Corvid Ridge district (design height about 1 340 m).
LDP = CustomGridDefinition(
    code="CRV-LDP",
    name="Corvid Ridge low-distortion grid",
    frame_epsg=6319,
    method="tm",
    area_west_deg=-110.9,
    area_south_deg=45.0,
    area_east_deg=-110.3,
    area_north_deg=45.4,
    lat0_deg=45.0,
    lon0_deg=-110.6,
    k0=1.00021,
    false_easting=100_000.0,
    false_northing=50_000.0,
)
GRS80_A, GRS80_F = 6378137.0, 1 / 298.257222101


def snyder_k_and_gamma(lat, lon, lon0, k0):
    e2 = GRS80_F * (2 - GRS80_F)
    ep2 = e2 / (1 - e2)
    p = math.radians(lat)
    dl = math.radians(lon - lon0)
    a_ = dl * math.cos(p)
    t = math.tan(p) ** 2
    c = ep2 * math.cos(p) ** 2
    k = k0 * (
        1
        + (1 + c) * a_**2 / 2
        + (5 - 4 * t + 42 * c + 13 * c**2 - 28 * ep2) * a_**4 / 24
        + (61 - 148 * t + 16 * t**2) * a_**6 / 720
    )
    eta2 = c
    gamma = dl * math.sin(p) * (1 + a_**2 / 3 * (1 + 3 * eta2 + 2 * eta2**2) + a_**4 / 15 * (2 - t))
    return k, math.degrees(gamma)


@pytest.mark.parametrize(("lat", "lon"), [(45.2, -110.6), (45.35, -110.35), (45.05, -110.88)])
def test_custom_tm_scale_and_convergence_against_pyproj_and_snyder(lat, lon):
    g = to_grid(lat, lon, frame_epsg=6319, grid=build_custom_grid(LDP))
    ref = pyproj.Proj("+proj=tmerc +lat_0=45 +lon_0=-110.6 +k_0=1.00021 +x_0=100000 +y_0=50000 +ellps=GRS80")
    f = ref.get_factors(lon, lat)
    assert float(g.scale_factor) == pytest.approx(f.meridional_scale, abs=1e-10)
    assert float(g.convergence_deg) == pytest.approx(f.meridian_convergence, abs=1e-9)
    k, gamma = snyder_k_and_gamma(lat, lon, -110.6, 1.00021)
    assert float(g.scale_factor) == pytest.approx(k, abs=1e-10)
    assert float(g.convergence_deg) == pytest.approx(gamma, abs=1e-8)
    x, y = ref(lon, lat)
    assert (float(g.easting_m), float(g.northing_m)) == pytest.approx((x, y), abs=1e-6)
    assert g.warnings == ()


def test_other_conformal_methods_match_their_proj_strings():
    for method, proj in (
        ("oblique_stereographic", "+proj=sterea"),
        ("lcc_1sp", "+proj=lcc +lat_1=45"),
    ):
        g = to_grid(45.3, -110.5, frame_epsg=6319, grid=build_custom_grid(dataclasses.replace(LDP, method=method)))
        ref = pyproj.Proj(f"{proj} +lat_0=45 +lon_0=-110.6 +k_0=1.00021 +x_0=100000 +y_0=50000 +ellps=GRS80")
        x, y = ref(-110.5, 45.3)
        f = ref.get_factors(-110.5, 45.3)
        assert (float(g.easting_m), float(g.northing_m)) == pytest.approx((x, y), abs=1e-6), method
        assert float(g.scale_factor) == pytest.approx(f.meridional_scale, abs=1e-10), method


def test_utm_scaled_about_a_point_is_the_scaled_utm():
    s = 1 / 0.99961214  # [hand] ground scale: 1 / combined factor at the point
    d = dataclasses.replace(
        LDP, method="utm_scaled", utm_zone=12, anchor_lat_deg=45.2, anchor_lon_deg=-110.6, scale=s, k0=None
    )
    utm = pyproj.Proj("+proj=utm +zone=12 +ellps=GRS80")
    ep, np_ = utm(-110.6, 45.2)
    for lat, lon in ((45.2, -110.6), (45.35, -110.4)):
        e, n = utm(lon, lat)
        g = to_grid(lat, lon, frame_epsg=6319, grid=build_custom_grid(d))
        # E′ = E_P + s (E − E_P), N′ = N_P + s (N − N_P) (the definition, by hand).
        assert (float(g.easting_m), float(g.northing_m)) == pytest.approx(
            (ep + s * (e - ep), np_ + s * (n - np_)), abs=1e-6
        )
        assert float(g.scale_factor) == pytest.approx(s * utm.get_factors(lon, lat).meridional_scale, abs=1e-10)


def test_feet_grid_reports_both_feet_beside_metres():
    g = build_custom_grid(dataclasses.replace(LDP, unit="US survey foot"))
    r = to_grid(45.2, -110.6, frame_epsg=6319, grid=g)
    # False easting 100 000 US survey ft = 30 480.061 m (definition 1200/3937 m).
    ref = pyproj.Proj(
        "+proj=tmerc +lat_0=45 +lon_0=-110.6 +k_0=1.00021 +x_0=30480.06096012192 +y_0=15240.03048006096 +ellps=GRS80"
    )
    x, _ = ref(-110.6, 45.2)
    assert float(r.easting_m) == pytest.approx(x, abs=1e-6)
    d = native_units(r.easting_m, r.northing_m, grid=g)
    assert d["grid_unit"] == "US survey foot" and d["grid_unit_legacy"] is True
    assert d["easting_us_ft"] == pytest.approx(float(r.easting_m) * 3937 / 1200, abs=1e-9)
    assert d["easting_ft"] == pytest.approx(float(r.easting_m) / 0.3048, abs=1e-9)
    # An EPSG grid in international feet: NAD83 / Montana (ft), EPSG:2256.
    mt = resolve_grid(2256, frame_epsg=4269)
    assert native_units(1000.0, 2000.0, grid=mt)["grid_unit"] == "international foot"
    assert native_units(1000.0, 2000.0, grid=resolve_grid(6341, frame_epsg=6319)) is None


@pytest.mark.parametrize(
    ("change", "code", "field"),
    [
        ({"k0": 1.5}, "out_of_range", "k0"),
        ({"lat0_deg": None}, "required", "lat0_deg"),
        ({"method": "mercator"}, "invalid_choice", "method"),
        ({"area_south_deg": 46.0}, "bad_area", "area_south_deg"),
        ({"frame_epsg": 5703}, "invalid_frame", "frame_epsg"),
        ({"method": "lcc_1sp", "lat0_deg": 0.0}, "out_of_range", "lat0_deg"),
    ],
)
def test_bad_definitions_are_refused_with_the_field(change, code, field):
    with pytest.raises(CustomGridError) as err:
        build_custom_grid(dataclasses.replace(LDP, **change))
    assert (err.value.code, err.value.field) == (code, field)
