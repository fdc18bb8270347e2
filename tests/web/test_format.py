"""Display formatting (registry.formatting, which the template filters of registry_format wrap).

Check values and their sources are beside each case.
"""

from __future__ import annotations

import datetime as dt

import pytest
from django.template import Context, Template

from registry import formatting as fmt


def dms_to_deg(d: int, m: int, s: float, sign: int = 1) -> float:
    """Sign on the whole angle (common practice; as in the ICSM GDA Technical Manual v2.3 examples)."""
    return sign * (d + m / 60 + s / 3600)


# ---------------------------------------------------------------- latitude / longitude


@pytest.mark.parametrize(
    "lat,lon,lat_text,lon_text",
    [
        # ICSM GDA Technical Manual v2.3, geographic ↔ cartesian worked example, Flinders Peak
        # (secondary transcription of the ICSM GDA Technical Manual v2.3).
        (dms_to_deg(37, 57, 3.72030, -1), dms_to_deg(144, 25, 29.52442), "37°57′03.72030″ S", "144°25′29.52442″ E"),
        # Same source, Buninyong.
        (dms_to_deg(37, 39, 10.15611, -1), dms_to_deg(143, 55, 35.38393), "37°39′10.15611″ S", "143°55′35.38393″ E"),
        # Vincenty (1975), Survey Review XXIII(176), Table II line (b): φ1 and L (secondary transcription).
        (dms_to_deg(37, 19, 54.95367), dms_to_deg(41, 28, 35.50729), "37°19′54.95367″ N", "41°28′35.50729″ E"),
        # Vincenty (1975) Table II line (d): φ2 = −0°59′53.83076″ (a southern latitude below 1°).
        (dms_to_deg(0, 59, 53.83076, -1), dms_to_deg(179, 17, 48.02997, -1), "0°59′53.83076″ S", "179°17′48.02997″ W"),
    ],
)
def test_dms_round_trips_published_angles(lat, lon, lat_text, lon_text):
    assert fmt.format_lat_dms(lat) == lat_text
    assert fmt.format_lon_dms(lon) == lon_text


def test_dms_carries_instead_of_printing_sixty_seconds():
    # Definition (rounding the whole angle first): 45°00′59.999996″ to 0.00001″ is 45°01′00.00000″.
    assert fmt.format_lat_dms(dms_to_deg(45, 0, 59.999996)) == "45°01′00.00000″ N"
    # and 44°59′59.999996″ carries into the degrees.
    assert fmt.format_lat_dms(dms_to_deg(44, 59, 59.999996)) == "45°00′00.00000″ N"


def test_dms_of_zero_has_no_southern_hemisphere():
    assert fmt.format_lat_dms(-1e-12) == "0°00′00.00000″ N"


@pytest.mark.parametrize(
    "value,text",
    [
        # By hand from the GDA Flinders Peak latitude: 37 + 57/60 + 3.72030/3600 = 37.951033416 666…
        (dms_to_deg(37, 57, 3.72030, -1), "-37.951033417"),
        (-110.6, "-110.600000000"),
        (-1e-12, "0.000000000"),  # no "-0.000000000"
    ],
)
def test_decimal_degrees_to_nine_places(value, text):
    assert fmt.format_deg9(value) == text


def test_metres_and_millimetres():
    assert fmt.format_m3(1523.4567) == "1523.457"  # rounding to 3 decimals
    assert fmt.format_m3(-0.0004) == "0.000"
    assert fmt.format_mm(0.0121) == "12.1"
    assert fmt.format_sigma_mm(1.6e-5) == "4.0"  # √(1.6e-5 m²) = 0.004 m
    with pytest.raises(ValueError):
        fmt.format_sigma_mm(-1e-6)


# ---------------------------------------------------------------- epochs


@pytest.mark.parametrize(
    "epoch,text",
    [
        (2010.0, "2010.000 (2010-01-01)"),  # definition: Y.0 is 1 January of Y
        # 2020 is a leap year: 0.5 × 366 d = 183 d after 1 Jan → 2 July (hand count: 31+29+31+30+31+30 = 182).
        (2020.5, "2020.500 (2020-07-02)"),
        # 0.25 × 366 d = 91.5 d after 1 Jan 2024 → 1 April 12:00 (31 + 29 + 31 = 91).
        (2024.25, "2024.250 (2024-04-01)"),
        # 0.999 × 365 d = 364.6 d after 1 Jan 2019 → 31 December.
        (2019.999, "2019.999 (2019-12-31)"),
    ],
)
def test_epoch_as_decimal_year_with_date(epoch, text):
    assert fmt.format_epoch(epoch) == text


def test_decimal_year_instant_is_utc():
    assert fmt.decimal_year_to_datetime(2024.25) == dt.datetime(2024, 4, 1, 12, 0, tzinfo=dt.UTC)


# ---------------------------------------------------------------- frames, times, states


@pytest.mark.parametrize(
    "epsg,text",
    [
        # Names of the EPSG dataset as shipped with PROJ 9.5.1 (shared contracts; from memory, confirmed with pyproj).
        (7912, "ITRF2014 (EPSG:7912)"),
        (9989, "ITRF2020 (EPSG:9989)"),
        (6319, "NAD83(2011) (EPSG:6319)"),
        (5703, "NAVD88 height (EPSG:5703)"),
        (999999, "EPSG:999999 (not in the EPSG database)"),
    ],
)
def test_frame_names_come_from_the_epsg_database(epsg, text):
    assert fmt.format_frame(epsg) == text


def test_utc_times_show_the_zone():
    eastern = dt.timezone(dt.timedelta(hours=-5))
    assert (
        fmt.format_utc(dt.datetime(2024, 5, 3, 9, 22, 5, tzinfo=eastern)) == "2024-05-03 14:22 UTC"
    )  # to the minute on pages (issue 10, item 9)


def test_filters_in_a_template():
    template = Template(
        "{% load registry_format %}{{ lat|lat_dms }}|{{ lat|deg9 }}|{{ none|m3 }}|{{ s|state }}|{{ c|state }}|{{ e|epoch }}"
    )
    out = template.render(
        Context({"lat": 45.2, "none": None, "s": "superseded", "c": "searched_not_found", "e": 2010.0})
    )
    assert out == (
        "45°12′00.00000″ N|45.200000000|—|"
        '<span class="state state-superseded">superseded</span>|'
        '<span class="state state-searched_not_found">searched, not found</span>|2010.000 (2010-01-01)'
    )


def test_the_suspect_badge_is_a_word_with_the_whole_label_as_its_title():
    out = Template("{% load registry_format %}{{ s|state }}").render(Context({"s": "suspect"}))
    assert out == '<span class="state state-suspect" title="suspect — awaiting re-observation">suspect</span>'
