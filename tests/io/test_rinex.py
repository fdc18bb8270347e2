"""The RINEX observation header reader (registry.io.rinex), one demo file per format version.

The demo files (fixtures_demo/rinex/, written by write_headers.py) follow, column for column:
RINEX 2.11 (Gurtner & Estey, IGS/RTCM, 2007/2012, Table A1), RINEX 3.05 (IGS/RTCM-SC104, 2020,
Table A2) and RINEX 4.01 (IGS/RTCM-SC104, 2023, Table A2); the Compact RINEX first line follows
Hatanaka (2008).
"""

from __future__ import annotations

import datetime as dt
import gzip
import os
from pathlib import Path

import pytest
from hypothesis import HealthCheck, example, given, settings
from hypothesis import strategies as st

from fixtures_demo.rinex.write_headers import rec, time_rec, v2_header, v3_header, v4_header
from registry.io.rinex import RinexError, gps_minus_utc_s, parse_rinex_header

DEMO = Path(__file__).resolve().parents[2] / "fixtures_demo" / "rinex"
UTC = dt.UTC


def text(lines: list[str]) -> bytes:
    return ("\n".join(lines) + "\n").encode("ascii")


def replace_record(lines: list[str], label: str, new: str) -> list[str]:
    return [new if line[60:].strip() == label else line for line in lines]


def test_rinex_211_demo_file():
    h = parse_rinex_header((DEMO / "ash012_2024.24o").read_bytes())
    assert h.version == "2.11"
    assert (h.marker_name, h.marker_number) == ("ASH-012", "ASH-012")
    assert (h.receiver_type, h.receiver_number, h.receiver_version) == ("OFFICE GNSS RX2", "RX-0451", "4.10")
    assert (h.antenna_type, h.antenna_number) == ("OFFICE GEOD ANT1", "AN-0188")
    assert (h.antenna_delta_h_m, h.antenna_delta_e_m, h.antenna_delta_n_m) == (1.523, 0.0, 0.0)
    assert h.approx_xyz_m == pytest.approx((-1585364.8861, -4215060.1278, 4503506.4935), abs=1e-4)
    assert h.interval_s == 15.0
    assert h.systems == ["G"]
    assert h.obs_types == {"G": ["L1", "L2", "C1", "P2", "S1", "S2"]}
    assert h.observer == "L. Marchetti"
    # 2024-03-18 15:04:00 GPS time = 15:03:42 UTC (GPS − UTC = 18 s since 2017; IERS Bulletin C, from memory)
    assert h.first_obs_utc == dt.datetime(2024, 3, 18, 15, 3, 42, tzinfo=UTC)
    assert h.last_obs_utc == dt.datetime(2024, 3, 18, 17, 19, 27, tzinfo=UTC)
    assert h.compressed == ""


def test_rinex_305_demo_file_is_gzip_and_mixed():
    h = parse_rinex_header((DEMO / "crv031_2025.rnx.gz").read_bytes())
    assert (h.version, h.compressed, h.marker_name) == ("3.05", "gzip", "CRV-031")
    assert h.systems == ["G", "R", "E"]
    # 14 GPS types: one full line of 13 and a continuation line (3.05 Table A2: 13 per line)
    assert len(h.obs_types["G"]) == 14 and h.obs_types["G"][-1] == "L2L"
    assert h.obs_types["R"] == ["C1C", "L1C", "D1C", "S1C", "C2P", "L2P", "D2P", "S2P"]
    assert h.interval_s == 30.0
    assert h.first_obs_utc == dt.datetime(2025, 6, 9, 13, 59, 42, tzinfo=UTC)
    assert h.antenna_delta_h_m == 1.812


def test_rinex_401_demo_file():
    h = parse_rinex_header((DEMO / "crv104_2026.rnx").read_bytes())
    assert (h.version, h.marker_name, h.receiver_type) == ("4.01", "CRV-104", "OFFICE GNSS RX4")
    assert h.systems == ["G", "E", "C"]
    assert h.obs_types["C"] == ["C2I", "L2I", "C6I", "L6I"]
    assert h.interval_s == 1.0
    assert h.last_obs_utc - h.first_obs_utc == dt.timedelta(hours=2, minutes=15, seconds=59)


def test_plain_and_gzip_give_the_same_header():
    raw = text(v4_header())
    assert parse_rinex_header(raw).as_dict() | {"compressed": ""} == parse_rinex_header(
        gzip.compress(raw)
    ).as_dict() | {"compressed": ""}


@pytest.mark.parametrize(
    ("system", "offset_s"),
    [
        ("GPS", 18),  # GPS − UTC since 2017-01-01 (IERS Bulletin C; from memory)
        ("GAL", 18),  # Galileo system time is steered to GPS time (RINEX 3.05 §3.7)
        ("BDT", 4),  # BDT = GPS − 14 s (RINEX 3.05 §3.7), so BDT − UTC = 4 s
        ("GLO", 0),  # GLONASS time tags are UTC in RINEX (RINEX 3.05 §3.7)
    ],
)
def test_time_systems_convert_to_utc(system, offset_s):
    lines = replace_record(
        v3_header(), "TIME OF FIRST OBS", time_rec(2025, 6, 9, 14, 0, 0.0, system, "TIME OF FIRST OBS")
    )
    lines = replace_record(lines, "TIME OF LAST OBS", time_rec(2025, 6, 9, 20, 0, 0.0, system, "TIME OF LAST OBS"))
    h = parse_rinex_header(text(lines))
    assert h.first_obs_utc == dt.datetime(2025, 6, 9, 14, 0, 0, tzinfo=UTC) - dt.timedelta(seconds=offset_s)


def test_leap_second_table_edges():
    # IERS Bulletin C (from memory): 17 s from 2015-07-01, 18 s from 2017-01-01.
    assert gps_minus_utc_s(dt.datetime(2015, 6, 30, 23, 59, 59, tzinfo=UTC)) == 16
    assert gps_minus_utc_s(dt.datetime(2015, 7, 1, tzinfo=UTC)) == 17
    assert gps_minus_utc_s(dt.datetime(2017, 1, 1, tzinfo=UTC)) == 18


def _without_leap_record(lines: list[str]) -> list[str]:
    return [line for line in lines if line[60:].strip() != "LEAP SECONDS"]


def _with_leap_record(lines: list[str], content: str) -> list[str]:
    lines = _without_leap_record(lines)
    end = next(i for i, line in enumerate(lines) if line[60:].strip() == "END OF HEADER")
    return [*lines[:end], rec(content, "LEAP SECONDS"), *lines[end:]]


def test_the_files_leap_seconds_record_is_used_instead_of_the_table():
    """The LEAP SECONDS record (RINEX 2.11 Table A1: I6, GPS − UTC; RINEX 3.05 Table A2: I6 current count, three
    more I6 for a future one, A3 the system it refers to, GPS when blank, BDS for BeiDou time; from memory of the
    specifications). A file that states 19 s (a leap second after the table's last, 2017-01-01) gives UTC one
    second earlier than the table's 18 s; one that states 18 s gives the table's time."""
    base = dt.datetime(2025, 6, 9, 14, 0, 0, tzinfo=UTC)
    for header, content, offset in (
        (v3_header(), f"{19:6d}", 19),
        (v3_header(), f"{18:6d}{19:6d}{2400:6d}{7:6d}GPS", 18),
        (v3_header(), f"{5:6d}{'':18}BDS", 19),  # BDT − UTC 5 s → GPS − UTC 19 s
        (v2_header(), f"{19:6d}", 19),
    ):
        lines = replace_record(
            header, "TIME OF FIRST OBS", time_rec(2025, 6, 9, 14, 0, 0.0, "GPS", "TIME OF FIRST OBS")
        )
        lines = replace_record(lines, "TIME OF LAST OBS", time_rec(2025, 6, 9, 20, 0, 0.0, "GPS", "TIME OF LAST OBS"))
        h = parse_rinex_header(text(_with_leap_record(lines, content)))
        assert h.leap_seconds_s == offset
        assert h.first_obs_utc == base - dt.timedelta(seconds=offset), content
    first = time_rec(2025, 6, 9, 14, 0, 0.0, "GPS", "TIME OF FIRST OBS")
    no_record = parse_rinex_header(text(_without_leap_record(replace_record(v3_header(), "TIME OF FIRST OBS", first))))
    assert no_record.leap_seconds_s is None and no_record.first_obs_utc == base - dt.timedelta(seconds=18)
    with pytest.raises(RinexError) as info:
        parse_rinex_header(text(_with_leap_record(v3_header(), f"{-3:6d}")))
    assert info.value.code == "bad_number" and "Leap seconds" in str(info.value)


def code_of(data: bytes) -> str:
    with pytest.raises(RinexError) as info:
        parse_rinex_header(data)
    return info.value.code


def test_hatanaka_is_refused_plain_and_gzip():
    raw = (DEMO / "crv031_2025.crx").read_bytes()
    assert code_of(raw) == "hatanaka"
    assert code_of(gzip.compress(raw)) == "hatanaka"


@pytest.mark.parametrize(
    ("data", "code"),
    [
        (b"", "empty"),
        (b"code,lat,lon\nASH-001,45.2,-110.6\n", "not_rinex"),
        (b"%PDF-1.7\n%\xe2\xe3\xcf\xd3\n", "not_rinex"),
        (b"\x89PNG\r\n\x1a\n\x00\x00", "binary"),
        (b"\x1f\x9d\x90\x00", "unix_compress"),
        (b"\x1f\x8bnot really gzip", "bad_gzip"),
    ],
)
def test_not_rinex(data, code):
    assert code_of(data) == code


def test_truncated_header_is_refused():
    lines = v3_header()
    cut = lines[: lines.index(rec("", "END OF HEADER"))]
    assert code_of(text(cut)) == "truncated"
    assert code_of(gzip.compress(text(v3_header()))[:60]) in ("truncated", "empty")


def test_navigation_file_is_refused():
    nav = rec(f"{3.05:9.2f}{'':11}{'N: GNSS NAV DATA':<20}{'M':<20}", "RINEX VERSION / TYPE")
    assert code_of(text([nav, rec("", "END OF HEADER")])) == "not_observation"


def test_end_before_start_is_refused():
    lines = replace_record(
        v2_header(), "TIME OF LAST OBS", time_rec(2024, 3, 18, 14, 0, 0.0, "GPS", "TIME OF LAST OBS")
    )
    assert code_of(text(lines)) == "end_before_start"


def test_position_off_the_earth_is_refused_and_zero_means_unknown():
    off = replace_record(
        v4_header(), "APPROX POSITION XYZ", rec(f"{1.0:14.4f}{2.0:14.4f}{3.0:14.4f}", "APPROX POSITION XYZ")
    )
    assert code_of(text(off)) == "position_off_earth"
    zero = replace_record(
        v4_header(), "APPROX POSITION XYZ", rec(f"{0.0:14.4f}{0.0:14.4f}{0.0:14.4f}", "APPROX POSITION XYZ")
    )
    assert parse_rinex_header(text(zero)).approx_xyz_m is None


@pytest.mark.parametrize("digit", ["\u00b2", "\u00b9"])  # superscript two and one (Latin-1, as files are read)
def test_non_ascii_digits_are_a_clear_error(digit):
    """Found by the fuzz test: '²2025' passed str.isdigit() and then broke int(). RINEX is ASCII."""
    lines = v2_header()
    i = next(k for k, line in enumerate(lines) if line[60:].strip() == "TIME OF FIRST OBS")
    lines[i] = lines[i][:1] + digit + lines[i][2:]
    data = ("\n".join(lines) + "\n").encode("latin-1")
    assert code_of(data) == "bad_number"


def test_obs_type_count_must_match():
    lines = replace_record(
        v2_header(), "# / TYPES OF OBSERV", rec("     7    L1    L2    C1    P2    S1    S2", "# / TYPES OF OBSERV")
    )
    assert code_of(text(lines)) == "bad_obs_types"


def test_missing_first_obs_is_refused():
    lines = [line for line in v3_header() if line[60:].strip() != "TIME OF FIRST OBS"]
    assert code_of(text(lines)) == "no_first_obs"


# ----------------------------------------------------------------------------- fuzzing (hypothesis)

# 300 examples per fuzz test in the suite; RINEX_FUZZ_EXAMPLES=5000 for a longer run by hand.
FUZZ = settings(
    max_examples=int(os.environ.get("RINEX_FUZZ_EXAMPLES", "300")),
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow],
)


@FUZZ
@given(st.binary(max_size=4000))
@example(b"\x1f\x8b")
@example(b"     3.05           OBSERVATION DATA    M                   RINEX VERSION / TYPE\n")
def test_fuzz_any_bytes_either_parse_or_raise_rinex_error(data):
    try:
        parse_rinex_header(data)
    except RinexError as exc:
        assert exc.code and exc.message


@FUZZ
@given(
    which=st.sampled_from([v2_header, v3_header, v4_header]),
    line=st.integers(min_value=0, max_value=25),
    column=st.integers(min_value=0, max_value=85),
    char=st.characters(codec="latin-1"),
    gz=st.booleans(),
)
def test_fuzz_one_character_changed_in_a_valid_header(which, line, column, char, gz):
    lines = which()
    i = line % len(lines)
    target = lines[i].ljust(column + 1)
    lines[i] = target[:column] + char + target[column + 1 :]
    data = ("\n".join(lines) + "\n").encode("latin-1")
    if gz:
        data = gzip.compress(data)
    try:
        h = parse_rinex_header(data)
    except RinexError as exc:
        assert exc.code
    else:
        assert h.first_obs_utc is not None and h.first_obs_utc.tzinfo is not None
        assert h.last_obs_utc is None or h.last_obs_utc >= h.first_obs_utc


_name = st.text(alphabet="ABCDEFGHIJKLMNOPQRSTUVWXYZ0123456789-_ ", min_size=1, max_size=20).map(str.strip).filter(bool)


@FUZZ
@given(
    version=st.sampled_from(["2.11", "3.02", "3.04", "3.05", "4.00", "4.01", "4.02"]),
    marker=_name,
    receiver=_name,
    antenna=_name,
    dh=st.floats(min_value=0, max_value=9.9999, allow_nan=False).map(lambda v: round(v, 4)),
    start=st.datetimes(min_value=dt.datetime(2018, 1, 1), max_value=dt.datetime(2099, 1, 1)).map(
        lambda t: t.replace(microsecond=0)
    ),
    hours=st.integers(min_value=0, max_value=48),
    interval=st.sampled_from([0.05, 1.0, 5.0, 15.0, 30.0]),
    types=st.lists(st.sampled_from(["C1C", "L1C", "D1C", "S1C", "C2W", "L2W", "C5Q", "L5Q"]), min_size=1, max_size=30),
)
def test_fuzz_written_headers_read_back(version, marker, receiver, antenna, dh, start, hours, interval, types):
    """Headers written with hypothesis' values in each version's columns read back to the same values."""
    end = start + dt.timedelta(hours=hours)
    lines = [
        rec(f"{float(version):9.2f}{'':11}{'OBSERVATION DATA':<20}{'G':<20}", "RINEX VERSION / TYPE"),
        rec(marker, "MARKER NAME"),
        rec(f"{'':<20}{receiver:<20}{'1.0':<20}", "REC # / TYPE / VERS"),
        rec(f"{'':<20}{antenna:<20}", "ANT # / TYPE"),
        rec(f"{dh:14.4f}{0.0:14.4f}{0.0:14.4f}", "ANTENNA: DELTA H/E/N"),
        rec(f"{interval:10.3f}", "INTERVAL"),
        time_rec(
            start.year, start.month, start.day, start.hour, start.minute, start.second, "GPS", "TIME OF FIRST OBS"
        ),
        time_rec(end.year, end.month, end.day, end.hour, end.minute, end.second, "GPS", "TIME OF LAST OBS"),
    ]
    if version.startswith("2"):
        v2types = [t[:2] for t in types]
        for k in range(0, len(v2types), 9):
            head = f"{len(v2types):6d}" if k == 0 else " " * 6
            lines.append(rec(head + "".join(f"    {t:>2}" for t in v2types[k : k + 9]), "# / TYPES OF OBSERV"))
        expected = v2types
    else:
        for k in range(0, len(types), 13):
            head = f"G  {len(types):3d}" if k == 0 else " " * 6
            lines.append(rec(head + "".join(f" {t:<3}" for t in types[k : k + 13]), "SYS / # / OBS TYPES"))
        expected = types
    lines.append(rec("", "END OF HEADER"))
    h = parse_rinex_header(text(lines))
    assert (h.version, h.marker_name, h.receiver_type, h.antenna_type) == (version, marker, receiver, antenna)
    assert h.antenna_delta_h_m == dh and h.interval_s == interval
    assert h.obs_types == {"G": expected}
    assert h.first_obs_utc == start.replace(tzinfo=UTC) - dt.timedelta(
        seconds=gps_minus_utc_s(start.replace(tzinfo=UTC))
    )
    assert h.last_obs_utc - h.first_obs_utc == end - start


def test_binary_bytes_in_the_observations_do_not_matter_but_in_the_header_they_do():
    """Regression: only the header must be text; a stray NUL in the data section is not the header's business."""
    lines = v3_header()
    body = text(lines) + b"G05 \x00\x00 broken epoch\n" * 2000  # past the first kilobyte
    assert parse_rinex_header(body).marker_name == "CRV-031"
    lines[2] = lines[2][:5] + "\x00" + lines[2][6:]
    assert code_of(("\n".join(lines) + "\n").encode("latin-1")) == "binary"
