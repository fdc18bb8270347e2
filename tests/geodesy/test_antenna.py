"""Antenna height: slant to vertical ARP height, h_ARP = √(s² − r²) + Δh (formula: secondary transcription of
a GNSS data-preparation tool's documented slant option, dh + √(s² − (d/2)²))."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from registry.geodesy.accuracy import ComputationInputError
from registry.geodesy.antenna import antenna_height_arp_m, slant_to_vertical_arp_m


def test_calculator_page_example():
    # Secondary transcription of an antenna-height calculator page (unnamed): s = 1.532 m, r = 0.0921 m → 1.52923 m to the slant-measure
    # point ("≈ 1.529 m" on the page); with the 0.0516 m offset and the ARP below the rim → 1.47763 m.
    assert slant_to_vertical_arp_m(1.532, 0.0921) == pytest.approx(1.52923, abs=5e-6)
    assert slant_to_vertical_arp_m(1.532, 0.0921, -0.0516) == pytest.approx(1.47763, abs=5e-6)
    # "Treating the slant as vertical would be wrong by 2.8 mm"
    assert 1.532 - slant_to_vertical_arp_m(1.532, 0.0921) == pytest.approx(0.0028, abs=5e-5)


def test_recomputed_example():
    # s = 2.000 m, r = 0.0953 m, offset 0.0483 m (ARP below) → 1.94943 m: radius and offset as tabulated
    # in a GNSS receiver manual (unnamed; secondary transcription); result recomputed by hand,
    # √(2.000² − 0.0953²) − 0.0483.
    assert antenna_height_arp_m(2.000, kind="slant", radius_m=0.0953, arp_offset_m=-0.0483) == pytest.approx(
        1.94943, abs=5e-6
    )


def test_sign_convention_of_the_arp_offset():
    # Documented: Δh = height(ARP) − height(slant-measure plane); negative when the ARP is below the plane.
    base = slant_to_vertical_arp_m(1.5, 0.1)
    assert slant_to_vertical_arp_m(1.5, 0.1, -0.05) == pytest.approx(base - 0.05, abs=1e-15)
    assert slant_to_vertical_arp_m(1.5, 0.1, +0.05) == pytest.approx(base + 0.05, abs=1e-15)
    assert base == pytest.approx(math.sqrt(1.5**2 - 0.1**2), abs=1e-15)  # Pythagoras


def test_slant_shorter_than_radius_is_an_error():
    with pytest.raises(ComputationInputError) as err:
        slant_to_vertical_arp_m(0.09, 0.0921)
    assert err.value.code == "slant_shorter_than_radius"
    with pytest.raises(ComputationInputError) as err:
        slant_to_vertical_arp_m(np.array([1.5, 0.05]), 0.0921)
    assert err.value.code == "slant_shorter_than_radius"
    assert slant_to_vertical_arp_m(0.0921, 0.0921, -0.01) == pytest.approx(-0.01)  # s = r: on the plane


def test_vertical_input_passes_unchanged():
    assert antenna_height_arp_m(1.4873, kind="vertical") == 1.4873
    heights = np.array([1.2, 1.5, 2.0])
    np.testing.assert_array_equal(antenna_height_arp_m(heights, kind="vertical"), heights)


def test_bad_inputs():
    with pytest.raises(ComputationInputError) as err:
        antenna_height_arp_m(1.5, kind="slant")
    assert err.value.code == "radius_missing"
    with pytest.raises(ComputationInputError) as err:
        antenna_height_arp_m(1.5, kind="tilted")
    assert err.value.code == "bad_height_kind"
    with pytest.raises(ComputationInputError) as err:
        antenna_height_arp_m(-1.5, kind="vertical")
    assert err.value.code == "negative_length"
    with pytest.raises(ComputationInputError) as err:
        slant_to_vertical_arp_m(float("nan"), 0.1)
    assert err.value.code == "not_finite"


@settings(max_examples=60, deadline=None)
@given(st.lists(st.tuples(st.floats(0.3, 3.0), st.floats(0.05, 0.2), st.floats(-0.1, 0.1)), min_size=1, max_size=30))
def test_vectorised_equals_scalar(rows):
    s = np.array([r[0] for r in rows])
    r_ = np.array([r[1] for r in rows])
    dh = np.array([r[2] for r in rows])
    vec = slant_to_vertical_arp_m(s, r_, dh)
    scalar = [slant_to_vertical_arp_m(float(a), float(b), float(c)) for a, b, c in zip(s, r_, dh, strict=True)]
    np.testing.assert_array_equal(vec, scalar)
