"""Grid coordinates, UTM zones, scale factor, convergence, elevation and combined factors (registry.geodesy.grid)."""

from __future__ import annotations

import numpy as np
import pyproj
import pytest
from pyproj.crs import ProjectedCRS
from pyproj.crs.coordinate_operation import TransverseMercatorConversion

from registry.geodesy.conversions import GRS80, Ellipsoid
from registry.geodesy.grid import (
    GridCRS,
    GridError,
    combined_factor,
    elevation_factor,
    from_grid,
    grid_distance_m,
    ground_distance_m,
    point_factors,
    radius_gaussian_m,
    radius_in_azimuth_m,
    tm_factors_kruger,
    to_grid,
    utm_grid,
    utm_zone,
)


def dms(d, m, s, negative=False):
    v = d + m / 60 + s / 3600
    return -v if negative else v


# --- UTM zones ------------------------------------------------------------------------------


@pytest.mark.parametrize(
    "lat,lon,zone,north",
    [
        (45.2, -110.6, 12, True),  # the demo district (shared contracts: UTM zone 12N)
        (-37.95, 144.42, 55, False),  # GDA worked example area: MGA zone 55 (ICSM GDA Technical Manual)
        (0.0, -180.0, 1, True),
        (0.0, 180.0, 1, True),  # 180°E is the same meridian as 180°W
        (10.0, 179.99, 60, True),
        (10.0, 0.0, 31, True),
        (10.0, -0.0001, 30, True),
        # Norway: 32V widened west to 3°E between 56°N and 64°N (NIMA TM 8358.2 [from memory]; common practice)
        (60.0, 5.0, 32, True),
        (60.0, 2.99, 31, True),
        (55.99, 5.0, 31, True),
        (64.0, 5.0, 31, True),
        # Svalbard, 72°N–84°N: 31X 0–9°E, 33X 9–21°E, 35X 21–33°E, 37X 33–42°E (same source)
        (78.0, 8.99, 31, True),
        (78.0, 9.0, 33, True),
        (78.0, 20.99, 33, True),
        (78.0, 21.0, 35, True),
        (78.0, 33.0, 37, True),
        (78.0, 41.99, 37, True),
        (78.0, 42.0, 38, True),
        (71.99, 8.0, 32, True),
    ],
)
def test_utm_zone_rules(lat, lon, zone, north):
    z, n = utm_zone(lat, lon)
    assert (int(z), bool(n)) == (zone, north)


def test_utm_zone_outside_range():
    with pytest.raises(GridError) as info:
        utm_zone(84.5, 10.0)
    assert info.value.code == "outside_utm"


# --- Published worked examples ---------------------------------------------------------------


def test_snyder_transverse_mercator_example():
    # J. P. Snyder, Map Projections — A Working Manual, USGS Professional Paper 1395 (1987), p. 269,
    # ellipsoidal transverse Mercator numerical example [from memory]: Clarke 1866, φ = 40°30′N,
    # λ = 73°30′W, λ0 = 75°W, k0 = 0.9996 → x = 127 106.5 m, y = 4 484 124.4 m, k = 0.9997989.
    conv = TransverseMercatorConversion(
        latitude_natural_origin=0,
        longitude_natural_origin=-75,
        false_easting=0,
        false_northing=0,
        scale_factor_natural_origin=0.9996,
    )
    crs = ProjectedCRS(conversion=conv, geodetic_crs=pyproj.CRS.from_epsg(4267), name="test TM on NAD27")
    g = to_grid(40.5, -73.5, frame_epsg=4267, grid=GridCRS(crs=crs, epsg=None, name=crs.name, unit_to_m=1.0))
    assert float(g.easting_m) == pytest.approx(127106.5, abs=0.05)  # Snyder prints 0.1 m
    assert float(g.northing_m) == pytest.approx(4484124.4, abs=0.05)
    assert float(g.scale_factor) == pytest.approx(0.9997989, abs=5e-8)
    clarke = Ellipsoid("Clarke 1866", 6378206.4, 1 - 6356583.8 / 6378206.4)  # Snyder, Table 1
    k, _ = tm_factors_kruger(40.5, -73.5, lon0_deg=-75.0, k0=0.9996, ellipsoid=clarke)
    assert float(k) == pytest.approx(0.9997989, abs=5e-8)


# ICSM GDA Technical Manual, UTM (MGA zone 55) worked example for Flinders Peak and Buninyong on
# GDA94 [from memory; every digit agrees with PROJ 9.5.1, EPSG:28355]. The manual states convergence
# with the opposite sign (grid bearing = azimuth + γ_GDA), so γ_PROJ = −γ_GDA (sign convention from memory;
# the PROJ values pin it).
GDA_MGA = [
    # name, φ, λ, E, N, k, γ_GDA
    (
        "Flinders Peak",
        dms(37, 57, 3.72030, True),
        dms(144, 25, 29.52440),
        273741.297,
        5796489.777,
        1.00023056,
        -dms(1, 35, 3.65),
    ),
    (
        "Buninyong",
        dms(37, 39, 10.15610, True),
        dms(143, 55, 35.38390),
        228854.052,
        5828259.038,
        1.00050567,
        -dms(1, 52, 43.22),
    ),
]


@pytest.mark.parametrize("name,lat,lon,e,n,k,gamma_gda", GDA_MGA)
def test_gda_mga_example(name, lat, lon, e, n, k, gamma_gda):
    g = to_grid(lat, lon, frame_epsg=4939, grid=28355)  # GDA94 geographic 3D; GDA94 / MGA zone 55
    assert float(g.easting_m) == pytest.approx(e, abs=1e-3), name
    assert float(g.northing_m) == pytest.approx(n, abs=1e-3), name
    assert float(g.scale_factor) == pytest.approx(k, abs=1e-8), name
    assert float(g.convergence_deg) * 3600 == pytest.approx(-gamma_gda * 3600, abs=0.01), name


# --- Convergence sign convention -------------------------------------------------------------


def test_convergence_sign_convention_is_proj_ngs():
    """γ ≈ Δλ·sin φ, positive east of the central meridian in the north; grid azimuth t = α − γ.

    Pinned independently of PROJ's factors by a finite difference: the grid bearing of a short step
    due north (geodetic azimuth α = 0) is t = atan2(dE, dN), and must equal 0 − γ.
    """
    lat, lon = 45.2, -110.0  # 1° east of zone 12's central meridian (111°W)
    g = to_grid(lat, lon, frame_epsg=6319, grid="utm")
    approx = 1.0 * np.sin(np.radians(lat))  # Δλ sin φ, degrees
    assert float(g.convergence_deg) > 0
    assert float(g.convergence_deg) == pytest.approx(approx, abs=0.001)
    north = to_grid(lat + 1e-5, lon, frame_epsg=6319, grid="utm")
    t_north = np.degrees(np.arctan2(north.easting_m - g.easting_m, north.northing_m - g.northing_m))
    assert float(t_north) == pytest.approx(0.0 - float(g.convergence_deg), abs=2e-6)
    # West of the central meridian, and in the southern hemisphere, the sign flips.
    assert float(to_grid(45.2, -112.0, frame_epsg=6319, grid="utm").convergence_deg) < 0
    assert float(to_grid(-45.2, -110.0, frame_epsg=6319, grid="utm").convergence_deg) < 0


def test_kruger_series_agrees_with_proj_get_factors():
    # Independent implementations: Karney (2011) Krüger series to n⁶ (ours) vs PROJ's get_factors.
    rng = np.random.default_rng(2011)
    lat = rng.uniform(-80, 84, 20000)
    lon = -111.0 + rng.uniform(-4.0, 4.0, 20000)
    f = pyproj.Proj("EPSG:6341").get_factors(lon, lat)  # PROJ, numerical factors of its own TM
    k2, gamma2 = tm_factors_kruger(lat, lon, lon0_deg=-111.0, k0=0.9996, ellipsoid=GRS80)
    assert np.max(np.abs(np.asarray(f.meridional_scale) - k2)) < 1e-9
    assert np.max(np.abs(np.asarray(f.meridian_convergence) - gamma2)) * 3600 < 1e-4
    # point_factors takes the analytic path for transverse Mercator grids: same numbers.
    k, gamma = point_factors(lat, lon, grid=utm_grid(12, True, frame_epsg=6319))
    assert np.array_equal(k, k2) and np.array_equal(gamma, gamma2)


def test_other_conformal_grids_use_proj_factors():
    # NAD83(2011) / Montana (EPSG:6514) is Lambert conformal conic: factors come from PROJ's get_factors.
    lat, lon = np.array([45.2, 47.0]), np.array([-110.6, -105.0])
    grid = to_grid(lat, lon, frame_epsg=6319, grid=6514)
    f = pyproj.Proj("EPSG:6514").get_factors(lon, lat)
    assert np.allclose(grid.scale_factor, f.meridional_scale, rtol=0, atol=1e-15)
    assert np.allclose(grid.convergence_deg, f.meridian_convergence, rtol=0, atol=1e-15)
    # LCC convergence is (λ − λ0)·sin φ0 with sin φ0 = n (constant of the cone), positive east of λ0 = 109.5°W.
    assert grid.convergence_deg[0] < 0 < grid.convergence_deg[1]


def test_scale_factor_on_the_central_meridian_is_k0():
    g = to_grid(np.array([0.0, 30.0, 60.0]), -111.0, frame_epsg=6319, grid="utm")
    assert np.allclose(g.scale_factor, 0.9996, atol=1e-12)  # UTM definition: k0 = 0.9996
    assert np.allclose(g.convergence_deg, 0.0, atol=1e-12)
    assert np.allclose(g.easting_m, 500000.0, atol=1e-6)  # false easting 500 000 m


# --- Grid choice, datums, round trips --------------------------------------------------------


def test_utm_on_the_frames_own_datum_and_epsg_lookup():
    g = to_grid(45.2, -110.6, frame_epsg=6319, grid="utm")
    assert g.grid.epsg == 6341 and "UTM zone 12N" in g.grid.name
    itrf = to_grid(45.2, -110.6, frame_epsg=7912, grid="utm")
    assert itrf.grid.epsg is None and itrf.grid.name == "ITRF2014 / UTM zone 12N"
    # Same ellipsoid (GRS80), same projection: identical numbers for identical input coordinates.
    assert float(itrf.easting_m) == pytest.approx(float(g.easting_m), abs=1e-9)


def test_a_grid_on_another_datum_is_refused():
    with pytest.raises(GridError) as info:
        to_grid(45.2, -110.6, frame_epsg=7912, grid=6341)
    assert info.value.code == "datum_mismatch"
    assert "NAD83(2011)" in str(info.value) and "ITRF2014" in str(info.value)


@pytest.mark.parametrize(
    "grid,code",
    [(4326, "not_projected"), (99999999, "unknown_crs"), ("utm zone", "unknown_crs")],
)
def test_bad_grids(grid, code):
    with pytest.raises(GridError) as info:
        to_grid(45.2, -110.6, frame_epsg=6319, grid=grid)
    assert info.value.code == code


def test_non_conformal_grid_is_refused():
    # NAD83 / Conus Albers (EPSG:5070) is equal-area, not conformal: no single point scale factor.
    with pytest.raises(GridError) as info:
        to_grid(45.2, -110.6, frame_epsg=4269, grid=5070)
    assert info.value.code == "not_conformal"


def test_points_in_several_zones_need_one_grid():
    with pytest.raises(GridError) as info:
        to_grid([45.0, 45.0], [-110.0, -115.0], frame_epsg=6319, grid="utm")
    assert info.value.code == "several_zones"


@pytest.mark.parametrize(
    "epsg,lat,lon,foot_m",
    [
        (6614, 43.0, -107.0, 1200 / 3937),  # NAD83(2011) / Wyoming East Central (ftUS): US survey foot = 1200/3937 m
        (6515, 45.2, -110.6, 0.3048),  # NAD83(2011) / Montana (ft): international foot = 0.3048 m exactly
    ],
)
def test_foot_grids_are_returned_in_metres(epsg, lat, lon, foot_m):
    g = to_grid(lat, lon, frame_epsg=6319, grid=epsg)
    crs = pyproj.CRS.from_epsg(epsg)
    x_ft, y_ft = pyproj.Transformer.from_crs(crs.geodetic_crs, crs, always_xy=True).transform(lon, lat)
    assert float(g.easting_m) == pytest.approx(x_ft * foot_m, abs=1e-6)
    assert float(g.northing_m) == pytest.approx(y_ft * foot_m, abs=1e-6)
    lat2, lon2 = from_grid(g.easting_m, g.northing_m, grid=epsg, frame_epsg=6319)
    assert (float(lat2), float(lon2)) == pytest.approx((lat, lon), abs=1e-10)


def test_grid_round_trip():
    rng = np.random.default_rng(5)
    lat = 45.2 + rng.uniform(-1, 1, 1000)
    lon = -110.6 + rng.uniform(-1, 1, 1000)
    g = to_grid(lat, lon, frame_epsg=6319, grid=6341)
    lat2, lon2 = from_grid(g.easting_m, g.northing_m, grid=6341, frame_epsg=6319)
    assert np.max(np.abs(lat2 - lat)) < 1e-10 and np.max(np.abs(lon2 - lon)) < 1e-10


# --- Elevation and combined factors (standard formulas; attribution to Stem 1989, NOAA Manual NOS NGS 5,
# from memory, unconfirmed) ---


def test_elevation_and_combined_factor_simple_example():
    # Invented example, recomputed by hand (EF = R/(R + h), CF = k·EF): k = 0.9999, h = 500 m, R = 6 371 000 m → EF = 0.9999215255, CF = 0.9998215334.
    ef = elevation_factor(500.0, radius_m=6_371_000.0)
    assert float(ef) == pytest.approx(0.9999215255, abs=5e-11)
    assert float(combined_factor(0.9999, ef)) == pytest.approx(0.9998215334, abs=5e-11)


def test_combined_factor_us_feet_forum_example():
    # Common practice (secondary transcription of a surveyors' forum post; low authority): grid factor 0.999981,
    # elevation 500 ft, R = 20 906 000 ft → combined "0.999957" (computed 0.99995708).
    cf = combined_factor(0.999981, elevation_factor(500.0, radius_m=20_906_000.0))
    assert round(float(cf), 6) == 0.999957
    assert float(cf) == pytest.approx(0.99995708, abs=5e-9)


def test_gaussian_radius_and_radius_in_azimuth():
    # √(ρν) lies between ρ and ν, and R_α equals ρ at α = 0° and ν at α = 90° (Euler's theorem).
    from registry.geodesy.conversions import radii_of_curvature_m

    rho, nu = radii_of_curvature_m(45.2)
    r = radius_gaussian_m(45.2)
    assert rho < r < nu
    assert float(radius_in_azimuth_m(45.2, 0.0)) == pytest.approx(float(rho), rel=1e-15)
    assert float(radius_in_azimuth_m(45.2, 90.0)) == pytest.approx(float(nu), rel=1e-15)
    # Which R: EF ≈ 1 − h/R, so a radius change ΔR changes EF by h·ΔR/R². At 45° the meridian and
    # prime-vertical radii differ from √(ρν) by about ±10.7 km, giving up to 2.6e-7 at h = 1 km.
    # (a from-memory note of "< 1e-8" is too small — recomputed here from
    # the formula, ΔR/R² · h = 10.7e3 / 6.378e6² · 1000 ≈ 2.6e-7.)
    ef_g = float(elevation_factor(1000.0, lat_deg=45.2))
    for az in (0.0, 45.0, 90.0):
        ef_a = float(elevation_factor(1000.0, radius_m=radius_in_azimuth_m(45.2, az)))
        expected = 1000.0 * abs(float(radius_in_azimuth_m(45.2, az)) - float(r)) / float(r) ** 2
        assert abs(ef_a - ef_g) == pytest.approx(expected, rel=1e-2, abs=1e-12)  # first-order formula
        assert abs(ef_a - ef_g) < 3e-7


def test_ellipsoidal_not_orthometric_height_matters():
    # Using H instead of h errs by N/R (≈ 4.7 ppm for N = 30 m; computed from EF = R/(R + h)).
    h, n_geoid = 1500.0, -30.0
    ef_h = elevation_factor(h, lat_deg=45.2)
    ef_bigh = elevation_factor(h - n_geoid, lat_deg=45.2)
    assert abs(float(ef_h - ef_bigh)) == pytest.approx(30.0 / float(radius_gaussian_m(45.2)), rel=1e-3)


def test_grid_and_ground_distances():
    cf = 0.99937701
    assert float(grid_distance_m(1000.0, cf)) == pytest.approx(999.37701, abs=1e-9)
    assert float(ground_distance_m(grid_distance_m(1234.567, cf), cf)) == pytest.approx(1234.567, abs=1e-9)
