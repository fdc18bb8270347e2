"""Many comparisons at once (the batch import) give each pair what it gets alone.

Positions are invented (near 45.21° N, 110.62° W). Frames: EPSG:7912 (ITRF2014), EPSG:9989 (ITRF2020),
EPSG:6319 (NAD83(2011)), geographic 3D in the EPSG database shipped with PROJ. The expected values
are the single comparisons' own (``movement_compare``); the verdicts asked of the pairs are the
plain consequences of their inputs (identical positions: no movement; 5 m apart at millimetre
sigmas: possible movement), so that the comparison below compares something.
"""

from __future__ import annotations

import numpy as np

from registry.models import Position
from registry.services.movement import movement_compare, movement_compare_many


def pos(pk, frame, epoch, lat, lon, h, sigma_mm, vel=None):
    v = (sigma_mm / 1000.0) ** 2
    extra = {}
    if vel is not None:
        extra = dict(zip(("vel_e_m_yr", "vel_n_m_yr", "vel_u_m_yr"), vel, strict=True))
    return Position(
        pk=pk,
        frame_epsg=frame,
        epoch_yr=epoch,
        lat_deg=lat,
        lon_deg=lon,
        h_m=h,
        cov_ee_m2=v,
        cov_en_m2=0.0,
        cov_eu_m2=0.0,
        cov_nn_m2=v,
        cov_nu_m2=0.0,
        cov_uu_m2=4 * v,
        source="invented",
        **extra,
    )


def test_stacked_comparisons_equal_single_ones():
    a = pos(1, 7912, 2021.5, 45.21, -110.62, 1500.0, 3)
    pairs = [
        (pos(2, 9989, 2021.5, 45.21, -110.62, 1500.0, 3), a),  # same place, another ITRF
        (pos(3, 7912, 2021.5, 45.21005, -110.62, 1500.0, 1), a),  # about 5.6 m north
        (pos(4, 6319, 2010.0, 45.210001, -110.620001, 1499.0, 5), a),  # frame and epoch change
        (pos(5, 7912, 2024.0, 45.21, -110.62, 1500.0, 4, vel=(0.01, 0.005, 0.001)), a),  # own velocity
        (pos(6, 7912, 2021.5, 45.21, -110.62, 1500.0, 3), None),  # nothing to compare with
    ]
    many = movement_compare_many(pairs)
    for (position, published), got in zip(pairs, many, strict=True):
        alone = movement_compare(position=position, published=published)
        assert got.as_dict() == alone.as_dict()
        assert got.verdict == alone.verdict and got.reason == alone.reason
        if alone.result is not None:
            assert isinstance(got.result.statistic, float) and isinstance(got.result.moved_horizontal, bool)
            np.testing.assert_array_equal(got.result.detectable_enu_m, alone.result.detectable_enu_m)
    assert [m.verdict for m in many][:2] == ["no_movement", "possible_movement"]
    assert many[4].verdict == "not_compared"
