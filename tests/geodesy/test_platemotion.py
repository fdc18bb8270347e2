"""ITRF2020 plate motion model (registry.geodesy.platemotion) against PROJ and a hand cross product.

Sources named beside each check:
- Altamimi et al. (2023), "ITRF2020 plate motion model", GRL, doi:10.1029/2023GL106373 — the
  rotation poles (secondary transcription, via PROJ's ITRF2020 data file, which cites the paper).
- PROJ 9.5.1's data file ``ITRF2020`` (shipped with pyproj 3.7.2), which carries the same poles in
  arcsec/yr as Helmert rotation rates (position-vector convention) and is evaluated here by PROJ
  itself: ``+init=ITRF2020:<PLATE> +t_epoch=t0`` applied at epoch t moves X by ω × X (t − t0).
"""

from __future__ import annotations

import math
import os
import re
from pathlib import Path

import numpy as np
import pyproj
import pytest

from registry.geodesy import platemotion as pmm
from registry.geodesy.conversions import GRS80, enu_rotation_matrix, geodetic_to_ecef

#: 1 mas in radians, π/(180·3600·1000) (definition; = 4.8481368e-9).
MAS_RAD = 4.84813681109536e-9


def proj_plate_velocity_ecef(x_m, y_m, z_m, code: str, *, years: float = 100.0):
    """Velocity (m/yr) from PROJ's own evaluation of its ``ITRF2020:<code>`` entry (independent route)."""
    tr = pyproj.Transformer.from_pipeline(f"+proj=pipeline +step +init=ITRF2020:{code} +t_epoch=2000.0")
    x, y, z = (np.atleast_1d(np.asarray(v, dtype=float)) for v in (x_m, y_m, z_m))
    x2, y2, z2, _ = tr.transform(x, y, z, np.full(x.size, 2000.0 + years))
    return (np.asarray(x2) - x) / years, (np.asarray(y2) - y) / years, (np.asarray(z2) - z) / years


def test_pole_table_is_proj_data_file_digit_for_digit():
    # PROJ data file ITRF2020 ("ITRF2020 Plate Motion Model parameters", citing Altamimi et al. 2023):
    # +drx/+dry/+drz in arcsec/yr; ours in mas/yr (× 1000).
    # pyproj's own data folder is the first entry (configure_proj appends the office's grid folders).
    text = (Path(pyproj.datadir.get_data_dir().split(os.pathsep)[0]) / "ITRF2020").read_text()
    found = {}
    for code, rx, ry, rz in re.findall(
        r"^<([A-Z]{4})> \+proj=helmert \+drx=(\S+) \+dry=(\S+) \+drz=(\S+) ", text, flags=re.M
    ):
        found[code] = tuple(round(float(v) * 1000.0, 6) for v in (rx, ry, rz))
    assert set(found) == set(pmm.PLATES) and len(found) == 13
    for code, omega in found.items():
        assert pmm.PLATES[code].omega_mas_yr == omega, code
    # Altamimi et al. (2023), GRL, doi:10.1029/2023GL106373 (secondary transcription), two rows quoted directly: NOAM (0.045, −0.666, −0.098), AUST (1.487, 1.175, 1.223).
    assert pmm.PLATES["NOAM"].omega_mas_yr == (0.045, -0.666, -0.098)
    assert pmm.PLATES["AUST"].omega_mas_yr == (1.487, 1.175, 1.223)
    # Same file, the *_T entries: origin rate bias +dx=0.00037 +dy=0.00035 +dz=0.00074 (m/yr), Table 2 of the paper.
    assert "+dx=0.00037 +dy=0.00035 +dz=0.00074" in text
    assert pmm.ORIGIN_RATE_BIAS_MM_YR == (0.37, 0.35, 0.74)


def test_hand_computed_cross_product_on_the_equator():
    # [hand] X = (a, 0, 0) with a = 6 378 137 m (GRS80): ω × X = (0, ω_z·a, −ω_y·a).
    #   NOAM ω_z = −0.098 mas/yr × 4.8481368e-9 = −4.751174e-10 rad/yr → v_y = −4.751174e-10 × 6 378 137 = −3.030364 mm/yr
    #   NOAM ω_y = −0.666 mas/yr × 4.8481368e-9 = −3.228859e-9 rad/yr  → v_z = +3.228859e-9 × 6 378 137 = +20.594105 mm/yr
    vx, vy, vz = pmm.velocity_ecef_m_yr(6378137.0, 0.0, 0.0, plate="NOAM")
    assert float(vx) == 0.0
    assert float(vy) * 1000 == pytest.approx(-3.030364, abs=2e-6)
    assert float(vz) * 1000 == pytest.approx(20.594105, abs=2e-6)
    assert pmm.rotation_rad_yr("NOAM")[1] == pytest.approx(-0.666 * MAS_RAD, rel=1e-15)


def test_hand_computed_cross_product_at_the_demo_district():
    # Demo district point 45.2° N, 110.6° W, h 1500 m (invented); X from the GRS80 closed form
    # (checked against PROJ +proj=cart in test_conversions):
    x, y, z = (float(v) for v in geodetic_to_ecef(45.2, -110.6, 1500.0, ellipsoid=GRS80))
    assert (x, y, z) == pytest.approx((-1584309.0774, -4214985.9920, 4504101.9851), abs=1e-3)
    # [hand] ω (rad/yr) = (0.045, −0.666, −0.098) × 4.8481368e-9 = (2.181662e-10, −3.228859e-9, −4.751174e-10)
    #   v_x = ω_y Z − ω_z Y = −3.228859e-9 × 4504101.985 − (−4.751174e-10)(−4214985.992) = −14.543111 − 2.002613 = −16.545724 mm/yr
    #   v_y = ω_z X − ω_x Z = −4.751174e-10 × (−1584309.077) − 2.181662e-10 × 4504101.985 = 0.752733 − 0.982643 = −0.229910 mm/yr
    #   v_z = ω_x Y − ω_y X = 2.181662e-10 × (−4214985.992) − (−3.228859e-9)(−1584309.077) = −0.919567 − 5.115511 = −6.035078 mm/yr
    vx, vy, vz = pmm.velocity_ecef_m_yr(x, y, z, plate="NOAM")
    assert float(vx) * 1000 == pytest.approx(-16.545724, abs=2e-6)
    assert float(vy) * 1000 == pytest.approx(-0.229910, abs=2e-6)
    assert float(vz) * 1000 == pytest.approx(-6.035078, abs=2e-6)


@pytest.mark.parametrize("code", sorted(pmm.PLATES))
def test_every_plate_matches_proj_evaluation_on_a_global_grid(code):
    # PROJ's own Helmert with the ITRF2020:<code> rotation rates (the independent implementation).
    lat, lon = np.meshgrid(np.linspace(-85, 85, 18), np.linspace(-180, 170, 36), indexing="ij")
    x, y, z = geodetic_to_ecef(lat.ravel(), lon.ravel(), 250.0, ellipsoid=GRS80)
    ours = pmm.velocity_ecef_m_yr(x, y, z, plate=code)
    theirs = proj_plate_velocity_ecef(x, y, z, code)
    for a, b in zip(ours, theirs, strict=True):
        # 1e-8 m/yr = 0.00001 mm/yr: the float rounding of a 100-year difference of ~6e6 m coordinates.
        np.testing.assert_allclose(a, b, rtol=0, atol=1e-8)


def test_origin_rate_bias_matches_proj_t_entries():
    # PROJ ITRF2020:NOAM_T = NOAM rotation + translation rate (0.37, 0.35, 0.74) mm/yr.
    x, y, z = geodetic_to_ecef(np.array([45.2, -30.0]), np.array([-110.6, 140.0]), 0.0, ellipsoid=GRS80)
    ours = pmm.velocity_ecef_m_yr(x, y, z, plate="NOAM", origin_rate_bias=True)
    theirs = proj_plate_velocity_ecef(x, y, z, "NOAM_T")
    for a, b in zip(ours, theirs, strict=True):
        np.testing.assert_allclose(a, b, rtol=0, atol=1e-8)
    plain = pmm.velocity_ecef_m_yr(x, y, z, plate="NOAM")
    assert [float(np.mean(a - b)) * 1000 for a, b in zip(ours, plain, strict=True)] == pytest.approx([0.37, 0.35, 0.74])


def test_enu_velocity_is_the_rotated_ecef_velocity():
    lat = np.array([45.2, -33.9, 51.5, 0.0])
    lon = np.array([-110.6, 151.2, -0.1, 30.0])
    h = np.array([1500.0, 20.0, 50.0, 0.0])
    ve, vn, vu = pmm.velocity_enu_m_yr(lat, lon, h, plate="EURA")
    x, y, z = geodetic_to_ecef(lat, lon, h, ellipsoid=GRS80)
    v_xyz = np.stack(pmm.velocity_ecef_m_yr(x, y, z, plate="EURA"), axis=-1)
    # The 3×3 matrix form (conversions.enu_rotation_matrix), an independent code path from the written-out rows.
    v_enu = np.einsum("kij,kj->ki", enu_rotation_matrix(lat, lon), v_xyz)
    np.testing.assert_allclose(np.stack([ve, vn, vu], axis=-1), v_enu, rtol=0, atol=1e-12)
    # Rigid rotation about the centre: speed preserved; up only from the radius/normal angle (≤ 0.2 mm/yr).
    np.testing.assert_allclose(np.sqrt(ve**2 + vn**2 + vu**2), np.linalg.norm(v_xyz, axis=-1), rtol=1e-12)
    assert np.all(np.abs(vu) < 2e-4)


def test_demo_district_velocity_points_south_west_at_about_17_mm_per_year():
    # North America in ITRF2020 near 45° N, 110° W moves west-south-west at ~1.7 cm/yr (consistent with the
    # hand cross product above: |(−16.546, −0.230, −6.035)| = √(273.76 + 0.05 + 36.42) = 17.614 mm/yr).
    ve, vn, vu = (float(v) * 1000 for v in pmm.velocity_enu_m_yr(45.2, -110.6, 1500.0, plate="NOAM"))
    assert math.sqrt(ve**2 + vn**2 + vu**2) == pytest.approx(17.614, abs=1e-3)
    assert ve < 0 and vn < 0 and abs(vu) < 0.1


def test_shapes_scalar_and_array():
    v = pmm.velocity_enu_m_yr(45.0, -110.0, 0.0, plate="NOAM")
    assert all(np.ndim(c) == 0 for c in v)
    v = pmm.velocity_enu_m_yr(np.zeros((2, 3)), np.zeros((2, 3)), 0.0, plate="noam")
    assert all(np.shape(c) == (2, 3) for c in v)


@pytest.mark.parametrize("bad", ["", "XXXX", None, "NOAM_T"])
def test_unknown_plate_is_refused_with_a_code(bad):
    with pytest.raises(pmm.PlateMotionError) as info:
        pmm.velocity_ecef_m_yr(6378137.0, 0.0, 0.0, plate=bad)
    assert info.value.code == "unknown_plate"
    assert "NOAM" in str(info.value)  # the message lists the known plates


def test_model_label_names_model_paper_and_plate():
    assert pmm.model_label("PCFC") == "ITRF2020-PMM (Altamimi et al. 2023) Pacific plate (PCFC)"
    assert pmm.model_label("noam", origin_rate_bias=True).endswith("(NOAM) with origin rate bias")
