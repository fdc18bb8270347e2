"""DMS formatting and parsing (registry.geodesy.dms)."""

from __future__ import annotations

import numpy as np
import pytest

from registry.geodesy.dms import (
    AngleParseError,
    format_dms,
    format_lat,
    format_lon,
    format_signed_dms,
    parse_angle,
    split_dms,
)

# ICSM GDA Technical Manual v2.3 worked example (Flinders Peak latitude), secondary transcription;
# sign on the whole angle (common practice).
FLINDERS_LAT = -(37 + 57 / 60 + 3.72030 / 3600)


def test_sign_goes_on_the_whole_angle():
    assert parse_angle("-37 57 03.72030") == pytest.approx(FLINDERS_LAT, abs=1e-15)
    assert parse_angle("37°57′03.72030″ S", kind="lat") == pytest.approx(FLINDERS_LAT, abs=1e-15)
    assert parse_angle("S 37 57 03.72030", kind="lat") == pytest.approx(FLINDERS_LAT, abs=1e-15)
    # Less than one degree: the sign still applies to minutes and seconds (common trap).
    assert parse_angle("-0 30 00") == -0.5
    assert parse_angle("−0:30:00") == -0.5  # true minus sign


def test_format_flinders_peak():
    assert format_lat(FLINDERS_LAT) == "37°57′03.72030″ S"
    assert format_dms(FLINDERS_LAT) == "-37°57′03.72030″"
    assert format_lon(144 + 25 / 60 + 29.52442 / 3600) == "144°25′29.52442″ E"


@pytest.mark.parametrize(
    "angle,decimals,expected",
    [
        (59.999995 / 3600, 5, "0°01′00.00000″"),  # carries into the next minute, never 60″
        (59.9999949 / 3600, 5, "0°00′59.99999″"),
        (1 + 59 / 60 + 59.999996 / 3600, 5, "2°00′00.00000″"),  # carries through minutes into degrees
        (-(59.999995 / 3600), 5, "-0°01′00.00000″"),
        (12.5, 2, "12°30′00.00″"),
        (0.004 / 3600, 2, "0°00′00.00″"),
        (-0.004 / 3600, 2, "0°00′00.00″"),  # rounds to zero: no sign
        (359.999999999, 5, "360°00′00.00000″"),
    ],
)
def test_rounding_carries(angle, decimals, expected):
    assert format_dms(angle, decimals=decimals) == expected


def test_hemisphere_letters_and_zero():
    assert format_lat(0.0) == "0°00′00.00000″ N"
    assert format_lon(-110.6) == "110°36′00.00000″ W"
    assert format_lat(-1e-12) == "0°00′00.00000″ N"  # rounds to zero: northern by convention


def test_signed_dms_for_convergence():
    # Display convention: convergence in DMS to 0.01″ with an explicit sign.
    assert format_signed_dms(1.5843464562) == "+1°35′03.65″"
    assert format_signed_dms(-1.5843464562) == "−1°35′03.65″"


def test_split_dms_is_vectorised():
    s, d, m, sec = split_dms(np.array([FLINDERS_LAT, 0.5, 59.999995 / 3600]), decimals=5)
    assert s.tolist() == [-1, 1, 1]
    assert d.tolist() == [37, 0, 0]
    assert m.tolist() == [57, 30, 1]
    assert sec.tolist() == pytest.approx([3.7203, 0.0, 0.0])


@pytest.mark.parametrize(
    "text,kind,expected",
    [
        ("45.2", "lat", 45.2),
        ("45 12", "lat", 45.2),
        ("45 12.0", "lat", 45.2),
        ("45:12:00", "lat", 45.2),
        ("45°12'00\"N", "lat", 45.2),
        ("45° 12′ 00″ n", "lat", 45.2),
        ("110 36 00 W", "lon", -110.6),
        ("W110 36", "lon", -110.6),
        ("+110.6", "lon", 110.6),
        ("-110.6", "lon", -110.6),
        ("180", "lon", 180.0),
        ("90 00 00 S", "lat", -90.0),
        ("  0 0 0.5  ", None, 0.5 / 3600),
    ],
)
def test_parse_accepts_common_forms(text, kind, expected):
    assert parse_angle(text, kind=kind) == pytest.approx(expected, abs=1e-13)


@pytest.mark.parametrize(
    "text,kind,code",
    [
        ("", None, "empty"),
        ("   ", "lat", "empty"),
        ("45 12 60", "lat", "seconds_out_of_range"),
        ("45 12 60.0 N", "lat", "seconds_out_of_range"),
        ("45 60 00", "lat", "minutes_out_of_range"),
        ("90 00 00.1 N", "lat", "out_of_range"),
        ("91", "lat", "out_of_range"),
        ("180 00 01 E", "lon", "out_of_range"),
        ("-45 12 00 S", "lat", "sign_and_hemisphere"),
        ("45 12 00 E", "lat", "wrong_hemisphere"),
        ("110 36 N", "lon", "wrong_hemisphere"),
        ("45.5 30", "lat", "fraction_not_last"),
        ("45 12.5 30", "lat", "fraction_not_last"),
        ("45 12 03 04", "lat", "too_many_parts"),
        ("forty-five", "lat", "unrecognised"),
        ("45,2", "lat", "unrecognised"),
        ("N S 45", "lat", "unrecognised"),
        ("-12 -30", None, "unrecognised"),
    ],
)
def test_parse_rejects_bad_input_with_a_code(text, kind, code):
    with pytest.raises(AngleParseError) as info:
        parse_angle(text, kind=kind)
    assert info.value.code == code
    assert str(info.value)  # a message for the user


def test_format_rejects_non_finite_and_arrays():
    with pytest.raises(ValueError):
        format_dms(float("nan"))
    with pytest.raises(TypeError):
        format_dms(np.array([1.0, 2.0]))
