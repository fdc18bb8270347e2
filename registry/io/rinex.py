"""Read the header of a RINEX observation file (versions 2.11, 3.x and 4.x; plain or gzip).

Pure Python (no Django): the header is turned into a :class:`RinexHeader` that pre-fills an
occupation (``registry.services.rinex``). Only the header is read; the observations are not.

Sources (the published format documents; column positions below are theirs)
----------------------------------------------------------------------------
- RINEX: The Receiver Independent Exchange Format, Version 2.11 (W. Gurtner, L. Estey; IGS/RTCM,
  10 Dec 2007, revised 26 Jun 2012), Table A1 "GPS Observation Data File - Header Section".
- RINEX: The Receiver Independent Exchange Format, Version 3.05 (IGS RINEX WG and RTCM-SC104,
  1 Dec 2020), Table A2 "GNSS Observation Data File - Header Section Description".
- RINEX: The Receiver Independent Exchange Format, Version 4.01 (IGS RINEX WG and RTCM-SC104,
  July 2023), Table A2 (observation header; the records read here are unchanged from 3.05).
- Compact RINEX (Hatanaka, Y., 2008, "A Compression Format and Tools for GNSS Observation Data",
  Bulletin of the Geospatial Information Authority of Japan 55): its first record is labelled
  ``CRINEX VERS   / TYPE``; such files are refused (decompress them first).

Every header record is an 80-column line whose label sits in columns 61-80. The records read:

=========================  =====================================================================
label                      fields (Fortran formats of the specifications)
=========================  =====================================================================
RINEX VERSION / TYPE       F9.2 version, 11X, A1 file type (``O``), 19X, A1 satellite system
MARKER NAME                A60
MARKER NUMBER              A20
OBSERVER / AGENCY          A20, A40
REC # / TYPE / VERS        3A20: receiver number, type, firmware version
ANT # / TYPE               2A20: antenna number, type
APPROX POSITION XYZ        3F14.4: geocentric X, Y, Z in metres (ITRF, "approximate")
ANTENNA: DELTA H/E/N       3F14.4: antenna height (marker → ARP) and east/north eccentricity, m
INTERVAL                   F10.3: observation interval, s
TIME OF FIRST OBS          5I6, F13.7, 5X, A3: year, month, day, hour, minute, second, time system
TIME OF LAST OBS           same
LEAP SECONDS               I6: the current number of leap seconds (2.11: GPS − UTC; 3.x/4.x: then the
                           future count, its week and day, and A3 the system it refers to, GPS when blank,
                           or BDS: BDT − UTC); when present it is used instead of the table below
# / TYPES OF OBSERV        2.11: I6, 9(4X, A2); continuation lines 6X, 9(4X, A2)
SYS / # / OBS TYPES        3.x/4.x: A1, 2X, I3, 13(1X, A3); continuation lines 7X, 13(1X, A3)
END OF HEADER              (last record of the header)
=========================  =====================================================================

Times: the header gives them in the file's time system (``GPS`` by default for GPS and mixed files,
``GLO`` = UTC for GLONASS-only files, ``GAL`` and ``QZS`` aligned with GPS time, ``BDT`` = GPS − 14 s).
They are converted to UTC with the GPS − UTC leap-second count: the file's own ``LEAP SECONDS`` record
when it has one (receivers write the count they decoded from the satellites' messages, so a leap second
added after this code was written is still right), else IERS Bulletin C's (the table below is from
memory, 18 s since 2017-01-01). Positions: the approximate position is in metres, geocentric
(the specifications call it ITRF; it is only approximate and serves as a plausibility check).

>>> def rec(content, label):
...     return f"{content:<60}{label:<20}\\n"
>>> text = (
...     rec("     3.05           OBSERVATION DATA    M", "RINEX VERSION / TYPE")
...     + rec("ASH-001", "MARKER NAME")
...     + rec("  2025     6     9    14     0    0.0000000     GPS", "TIME OF FIRST OBS")
...     + rec("", "END OF HEADER")
... )
>>> h = parse_rinex_header(text.encode())
>>> (h.version, h.marker_name, h.first_obs_utc.isoformat())
('3.05', 'ASH-001', '2025-06-09T13:59:42+00:00')
"""

from __future__ import annotations

import datetime as _dt
import io
import math
import zlib
from dataclasses import dataclass, field
from typing import Any

#: Longest header accepted (a real header is a few kB; comments rarely push it past 20 kB).
MAX_HEADER_BYTES = 256 * 1024
#: Header lines longer than this are not RINEX (80 columns, with some slack for trailing blanks).
MAX_LINE_CHARS = 120
GZIP_MAGIC = b"\x1f\x8b"
UNIX_COMPRESS_MAGIC = b"\x1f\x9d"

#: Satellite system letters of RINEX 3.05 §3.5 / 4.01 (G GPS, R GLONASS, E Galileo, J QZSS, C BDS,
#: I NavIC/IRNSS, S SBAS, M mixed in the first record).
SYSTEM_NAMES = {
    "G": "GPS",
    "R": "GLONASS",
    "E": "Galileo",
    "J": "QZSS",
    "C": "BDS",
    "I": "NavIC",
    "S": "SBAS",
}

#: GPS − UTC in seconds from the given UTC date (IERS Bulletin C leap seconds; from memory).
_GPS_MINUS_UTC_S = (
    (_dt.datetime(1980, 1, 6, tzinfo=_dt.UTC), 0),
    (_dt.datetime(1981, 7, 1, tzinfo=_dt.UTC), 1),
    (_dt.datetime(1982, 7, 1, tzinfo=_dt.UTC), 2),
    (_dt.datetime(1983, 7, 1, tzinfo=_dt.UTC), 3),
    (_dt.datetime(1985, 7, 1, tzinfo=_dt.UTC), 4),
    (_dt.datetime(1988, 1, 1, tzinfo=_dt.UTC), 5),
    (_dt.datetime(1990, 1, 1, tzinfo=_dt.UTC), 6),
    (_dt.datetime(1991, 1, 1, tzinfo=_dt.UTC), 7),
    (_dt.datetime(1992, 7, 1, tzinfo=_dt.UTC), 8),
    (_dt.datetime(1993, 7, 1, tzinfo=_dt.UTC), 9),
    (_dt.datetime(1994, 7, 1, tzinfo=_dt.UTC), 10),
    (_dt.datetime(1996, 1, 1, tzinfo=_dt.UTC), 11),
    (_dt.datetime(1997, 7, 1, tzinfo=_dt.UTC), 12),
    (_dt.datetime(1999, 1, 1, tzinfo=_dt.UTC), 13),
    (_dt.datetime(2006, 1, 1, tzinfo=_dt.UTC), 14),
    (_dt.datetime(2009, 1, 1, tzinfo=_dt.UTC), 15),
    (_dt.datetime(2012, 7, 1, tzinfo=_dt.UTC), 16),
    (_dt.datetime(2015, 7, 1, tzinfo=_dt.UTC), 17),
    (_dt.datetime(2017, 1, 1, tzinfo=_dt.UTC), 18),
)
#: Offset of each time system from GPS time, s (system time − GPS time), RINEX 3.05 §3.7 / 2.11 §8.
_SYSTEM_MINUS_GPS_S = {"GPS": 0.0, "GAL": 0.0, "QZS": 0.0, "IRN": 0.0, "BDT": -14.0}
#: Range of |r| of a point near the Earth's surface, m: a geocentric position outside it is not a position
#: on land (the GRS80 semi-minor axis 6356752 m less 500 m, the semi-major axis 6378137 m plus 10 km).
_EARTH_RADIUS_RANGE_M = (6356252.0, 6388137.0)


class RinexError(ValueError):
    """A file that is not a readable RINEX observation header; ``code`` says why, ``message`` in words."""

    def __init__(self, code: str, message: str, *, line: int | None = None):
        super().__init__(message)
        self.code = code
        self.message = message
        self.line = line

    def __str__(self) -> str:
        return f"line {self.line}: {self.message}" if self.line else self.message


@dataclass
class RinexHeader:
    """What an observation header says. Times are UTC (aware); lengths in metres; interval in seconds."""

    version: str
    file_type: str
    system_letter: str
    marker_name: str = ""
    marker_number: str = ""
    observer: str = ""
    agency: str = ""
    receiver_number: str = ""
    receiver_type: str = ""
    receiver_version: str = ""
    antenna_number: str = ""
    antenna_type: str = ""
    approx_xyz_m: tuple[float, float, float] | None = None
    antenna_delta_h_m: float | None = None
    antenna_delta_e_m: float | None = None
    antenna_delta_n_m: float | None = None
    interval_s: float | None = None
    first_obs_utc: _dt.datetime | None = None
    last_obs_utc: _dt.datetime | None = None
    time_system: str = ""
    #: GPS − UTC in seconds from the file's LEAP SECONDS record (None: not given; the table applies).
    leap_seconds_s: int | None = None
    obs_types: dict[str, list[str]] = field(default_factory=dict)
    header_lines: int = 0
    compressed: str = ""  # "gzip" or ""

    @property
    def major_version(self) -> int:
        return int(float(self.version))

    @property
    def systems(self) -> list[str]:
        """Satellite systems named by the header (their letters), in the header's order."""
        if self.major_version >= 3:
            return list(self.obs_types)
        letter = self.system_letter or "G"
        return [letter] if letter != "M" else []

    def systems_text(self) -> str:
        if self.major_version < 3 and (self.system_letter or "G") == "M":
            return "mixed (a version 2 header does not list which)"
        return ", ".join(SYSTEM_NAMES.get(s, s) for s in self.systems)

    def as_dict(self) -> dict[str, Any]:
        """JSON-ready summary (times ISO 8601 UTC)."""

        def t(value):
            return value.isoformat().replace("+00:00", "Z") if value else None

        return {
            "rinex_version": self.version,
            "marker_name": self.marker_name,
            "marker_number": self.marker_number,
            "observer": self.observer,
            "agency": self.agency,
            "receiver_type": self.receiver_type,
            "receiver_number": self.receiver_number,
            "receiver_version": self.receiver_version,
            "antenna_type": self.antenna_type,
            "antenna_number": self.antenna_number,
            "antenna_delta_h_m": self.antenna_delta_h_m,
            "antenna_delta_e_m": self.antenna_delta_e_m,
            "antenna_delta_n_m": self.antenna_delta_n_m,
            "approx_x_m": self.approx_xyz_m[0] if self.approx_xyz_m else None,
            "approx_y_m": self.approx_xyz_m[1] if self.approx_xyz_m else None,
            "approx_z_m": self.approx_xyz_m[2] if self.approx_xyz_m else None,
            "first_obs_utc": t(self.first_obs_utc),
            "last_obs_utc": t(self.last_obs_utc),
            "time_system": self.time_system,
            "interval_s": self.interval_s,
            "systems": [SYSTEM_NAMES.get(s, s) for s in self.systems],
            "obs_types": {SYSTEM_NAMES.get(s, s): list(v) for s, v in self.obs_types.items()},
            "compressed": self.compressed,
        }


def gps_minus_utc_s(at_utc: _dt.datetime) -> int:
    """Leap seconds between GPS time and UTC at ``at_utc`` (IERS Bulletin C, from memory).

    >>> gps_minus_utc_s(_dt.datetime(2024, 5, 1, tzinfo=_dt.UTC))
    18
    >>> gps_minus_utc_s(_dt.datetime(2016, 12, 31, tzinfo=_dt.UTC))
    17
    """
    offset = 0
    for start, value in _GPS_MINUS_UTC_S:
        if at_utc >= start:
            offset = value
    return offset


def to_utc(stamp: _dt.datetime, time_system: str, leap_seconds_s: int | None = None) -> _dt.datetime:
    """A header time (naive, in ``time_system``) as an aware UTC datetime.

    ``leap_seconds_s``: GPS − UTC as the file states it (its LEAP SECONDS record); None: the table's.

    >>> to_utc(_dt.datetime(2025, 6, 9, 14, 0, 0), "GPS")
    datetime.datetime(2025, 6, 9, 13, 59, 42, tzinfo=datetime.timezone.utc)
    >>> to_utc(_dt.datetime(2025, 6, 9, 14, 0, 0), "GPS", leap_seconds_s=19)
    datetime.datetime(2025, 6, 9, 13, 59, 41, tzinfo=datetime.timezone.utc)
    """
    stamp = stamp.replace(tzinfo=_dt.UTC)
    if time_system in ("GLO", "UTC"):
        return stamp
    gps = stamp - _dt.timedelta(seconds=_SYSTEM_MINUS_GPS_S.get(time_system, 0.0))
    # The leap-second count is looked up at the (nearly equal) GPS time itself.
    leap = gps_minus_utc_s(gps) if leap_seconds_s is None else leap_seconds_s
    return gps - _dt.timedelta(seconds=leap)


# ----------------------------------------------------------------------------- reading the bytes


def _decompress_head(data: bytes) -> bytes:
    """The first MAX_HEADER_BYTES of a gzip stream (a truncated stream gives what could be read)."""
    out = bytearray()
    decompressor = zlib.decompressobj(16 + zlib.MAX_WBITS)
    try:
        for start in range(0, len(data), 64 * 1024):
            out += decompressor.decompress(data[start : start + 64 * 1024], MAX_HEADER_BYTES - len(out))
            if len(out) >= MAX_HEADER_BYTES or decompressor.unconsumed_tail:
                break
    except zlib.error:
        if not out:
            raise RinexError("bad_gzip", "The file looks gzip-compressed but cannot be decompressed.") from None
    return bytes(out)


def header_text(data: bytes) -> tuple[str, str]:
    """``(text, compression)``: the start of the file as text, decompressed when gzip.

    Unix ``compress`` (.Z) files are refused: decompress them first.
    """
    if not isinstance(data, bytes | bytearray):
        raise RinexError("not_bytes", "Read the file in binary mode.")
    compression = ""
    if data[:2] == GZIP_MAGIC:
        data = _decompress_head(bytes(data))
        compression = "gzip"
    elif data[:2] == UNIX_COMPRESS_MAGIC:
        raise RinexError(
            "unix_compress", "The file is compressed with Unix compress (.Z); decompress it and send the RINEX file."
        )
    head = bytes(data[:MAX_HEADER_BYTES])
    if b"\x00" in head[:1024]:
        raise RinexError("binary", "This is a binary file, not a RINEX observation file (which is text).")
    return head.decode("latin-1"), compression


# ----------------------------------------------------------------------------- fields


def _label(line: str) -> str:
    return line[60:80].strip()


def _float(line: str, start: int, width: int, what: str, number: int) -> float | None:
    raw = line[start : start + width].strip()
    if not raw:
        return None
    try:
        if not raw.isascii():  # RINEX is ASCII; float() would also read other scripts' digits
            raise ValueError(raw)
        value = float(raw.replace("D", "E").replace("d", "e"))
    except ValueError:
        raise RinexError("bad_number", f"{what}: {raw!r} is not a number.", line=number) from None
    if not math.isfinite(value):
        raise RinexError("bad_number", f"{what}: {raw!r} is not a finite number.", line=number)
    return value


def _int(line: str, start: int, width: int, what: str, number: int) -> int | None:
    raw = line[start : start + width].strip()
    if not raw:
        return None
    # ASCII digits only: str.isdigit() also accepts '²' and other Unicode digits that int() refuses
    digits = raw[1:] if raw.startswith("-") else raw
    if not (digits.isascii() and digits.isdigit()):
        raise RinexError("bad_number", f"{what}: {raw!r} is not a whole number.", line=number)
    return int(raw)


def _time(line: str, number: int, what: str) -> tuple[_dt.datetime, str]:
    """TIME OF FIRST/LAST OBS: 5I6, F13.7, 5X, A3 (both specification versions)."""
    parts = [_int(line, 6 * i, 6, what, number) for i in range(5)]
    seconds = _float(line, 30, 13, what, number)
    if any(p is None for p in parts) or seconds is None:
        raise RinexError("bad_time", f"{what}: the date and time are incomplete.", line=number)
    year, month, day, hour, minute = parts
    if year < 100:  # 2-digit years are not allowed in these records, but old writers used them
        year += 2000 if year < 80 else 1900
    if not 0.0 <= seconds < 61.0:
        raise RinexError("bad_time", f"{what}: seconds {seconds} are out of range.", line=number)
    try:
        stamp = _dt.datetime(year, month, day, hour, minute) + _dt.timedelta(seconds=seconds)
    except (ValueError, OverflowError):
        raise RinexError(
            "bad_time", f"{what}: {year}-{month}-{day} {hour}:{minute} is not a date.", line=number
        ) from None
    if not 1980 <= stamp.year <= 2100:
        raise RinexError("bad_time", f"{what}: the year {stamp.year} is outside 1980-2100.", line=number)
    return stamp, line[48:51].strip().upper()


def _codes(chunk: str, width: int, count: int) -> list[str]:
    """``count`` codes of ``width`` characters each, separated by ``width + 1``-column cells."""
    return [chunk[i * (width + 1) + 1 : (i + 1) * (width + 1)].strip() for i in range(count)]


# ----------------------------------------------------------------------------- the parser


def parse_rinex_header(data: bytes) -> RinexHeader:
    """Parse the header of a RINEX observation file (2.11, 3.x, 4.x; plain or gzip).

    Raises :class:`RinexError` (with a ``code``) for files that are not RINEX, Compact RINEX
    (Hatanaka), navigation or meteorological files, truncated headers and inconsistent headers
    (last observation before the first, an approximate position that is not near the Earth's surface,
    a version outside 2.xx-4.xx).
    """
    text, compression = header_text(data)
    lines = text.splitlines()
    if not lines or not lines[0].strip():
        raise RinexError("empty", "The file is empty.")
    first = lines[0]
    label = _label(first)
    if label.startswith("CRINEX VERS") or "COMPACT RINEX" in first.upper():
        raise RinexError(
            "hatanaka",
            "This is a Hatanaka-compressed (Compact RINEX) file. Decompress it to a RINEX observation file "
            "(CRX2RNX) and send that.",
            line=1,
        )
    if label != "RINEX VERSION / TYPE":
        raise RinexError(
            "not_rinex",
            "This is not a RINEX file: its first line should end with 'RINEX VERSION / TYPE'.",
            line=1,
        )
    version_raw = first[0:9].strip()
    try:
        version_number = float(version_raw)
    except ValueError:
        raise RinexError("bad_version", f"The RINEX version {version_raw!r} is not a number.", line=1) from None
    if not 2.0 <= version_number < 5.0:
        raise RinexError(
            "unsupported_version", f"RINEX version {version_raw} is not supported (2.11, 3.x and 4.x are).", line=1
        )
    file_type = first[20:21].upper()
    if file_type != "O":
        kind = {"N": "navigation", "G": "GLONASS navigation", "M": "meteorological", "H": "SBAS navigation"}
        raise RinexError(
            "not_observation",
            f"This is a RINEX {kind.get(file_type, 'non-observation')} file; send an observation file (type O).",
            line=1,
        )
    header = RinexHeader(
        version=f"{version_number:.2f}", file_type=file_type, system_letter=first[40:41].strip().upper()
    )
    major = header.major_version
    pending_v2_types: list[str] = []
    v2_count: int | None = None
    pending_sys: str | None = None
    sys_counts: dict[str, int] = {}
    ended = False
    for index, line in enumerate(lines[1:], start=2):
        if len(line) > MAX_LINE_CHARS:
            raise RinexError(
                "not_rinex", "A header line is longer than 80 columns: this is not a RINEX header.", line=index
            )
        if "\x00" in line:
            raise RinexError("binary", "The header holds binary data: this is not a RINEX header.", line=index)
        label = _label(line)
        if label == "END OF HEADER":
            header.header_lines = index
            ended = True
            break
        if label == "MARKER NAME":
            header.marker_name = line[0:60].strip()
        elif label == "MARKER NUMBER":
            header.marker_number = line[0:20].strip()
        elif label == "OBSERVER / AGENCY":
            header.observer = line[0:20].strip()
            header.agency = line[20:60].strip()
        elif label == "REC # / TYPE / VERS":
            header.receiver_number = line[0:20].strip()
            header.receiver_type = line[20:40].strip()
            header.receiver_version = line[40:60].strip()
        elif label == "ANT # / TYPE":
            header.antenna_number = line[0:20].strip()
            header.antenna_type = line[20:40].strip()
        elif label == "APPROX POSITION XYZ":
            xyz = [_float(line, 14 * i, 14, "Approximate position", index) for i in range(3)]
            if any(v is None for v in xyz):
                raise RinexError("bad_number", "Approximate position: X, Y and Z are all needed.", line=index)
            header.approx_xyz_m = (xyz[0], xyz[1], xyz[2])
        elif label == "ANTENNA: DELTA H/E/N":
            dh, de, dn = (_float(line, 14 * i, 14, "Antenna delta H/E/N", index) for i in range(3))
            header.antenna_delta_h_m, header.antenna_delta_e_m, header.antenna_delta_n_m = dh, de, dn
        elif label == "INTERVAL":
            header.interval_s = _float(line, 0, 10, "Interval", index)
        elif label == "TIME OF FIRST OBS":
            stamp, system = _time(line, index, "Time of first observation")
            header.first_obs_utc, header.time_system = stamp, system  # converted after the loop
        elif label == "TIME OF LAST OBS":
            stamp, system = _time(line, index, "Time of last observation")
            header.last_obs_utc = stamp
            header.time_system = header.time_system or system
        elif label == "LEAP SECONDS":
            count = _int(line, 0, 6, "Leap seconds", index)
            if count is not None:
                # 3.x/4.x: a count that refers to BeiDou time is BDT − UTC, 14 s less than GPS − UTC
                refers_to = line[24:27].strip().upper() if major >= 3 else ""
                header.leap_seconds_s = count + 14 if refers_to == "BDS" else count
                if not 0 <= header.leap_seconds_s <= 100:
                    raise RinexError(
                        "bad_number", f"Leap seconds: {count} is not a possible count (GPS − UTC).", line=index
                    )
        elif label == "# / TYPES OF OBSERV" and major == 2:
            count = _int(line, 0, 6, "Number of observation types", index)
            if count is not None:
                v2_count = count
            pending_v2_types += [c for c in _codes(line[6:60], 5, 9) if c]
        elif label == "SYS / # / OBS TYPES" and major >= 3:
            letter = line[0:1].strip().upper()
            if letter:
                if letter not in SYSTEM_NAMES:
                    raise RinexError("bad_system", f"Unknown satellite system letter {letter!r}.", line=index)
                count = _int(line, 3, 3, "Number of observation types", index)
                if count is None:
                    raise RinexError("bad_number", "Number of observation types is missing.", line=index)
                pending_sys = letter
                sys_counts[letter] = count
                header.obs_types[letter] = []
            if pending_sys is None:
                raise RinexError(
                    "bad_obs_types", "A continuation of observation types comes before its system.", line=index
                )
            header.obs_types[pending_sys] += [c for c in _codes(line[6:58], 3, 13) if c]
    if not ended:
        raise RinexError(
            "truncated",
            "The header has no 'END OF HEADER' line: the file is truncated or not a RINEX observation file.",
        )
    if major == 2:
        header.obs_types = {header.system_letter or "G": pending_v2_types} if pending_v2_types else {}
        if v2_count is not None and v2_count != len(pending_v2_types):
            raise RinexError(
                "bad_obs_types",
                f"The header announces {v2_count} observation types but lists {len(pending_v2_types)}.",
            )
    else:
        for letter, types in header.obs_types.items():
            if len(types) != sys_counts[letter]:
                raise RinexError(
                    "bad_obs_types",
                    f"The header announces {sys_counts[letter]} observation types for {SYSTEM_NAMES[letter]} "
                    f"but lists {len(types)}.",
                )
    header.compressed = compression
    _finish(header)
    return header


def _finish(header: RinexHeader) -> None:
    """Convert times to UTC and check what a header cannot truthfully say."""
    if not header.time_system:
        header.time_system = {"R": "GLO", "E": "GAL", "J": "QZS", "C": "BDT", "I": "IRN"}.get(
            header.system_letter, "GPS"
        )
    if header.time_system not in ("GPS", "GLO", "GAL", "QZS", "BDT", "IRN", "UTC"):
        raise RinexError("bad_time_system", f"Unknown time system {header.time_system!r}.")
    if header.first_obs_utc is None:
        raise RinexError("no_first_obs", "The header has no 'TIME OF FIRST OBS' record (required by the format).")
    header.first_obs_utc = to_utc(header.first_obs_utc, header.time_system, header.leap_seconds_s)
    if header.last_obs_utc is not None:
        header.last_obs_utc = to_utc(header.last_obs_utc, header.time_system, header.leap_seconds_s)
        if header.last_obs_utc < header.first_obs_utc:
            raise RinexError(
                "end_before_start",
                "The header's last observation time is before its first observation time.",
            )
    if header.interval_s is not None and not 0.0 <= header.interval_s <= 86400.0:
        raise RinexError("bad_interval", f"An interval of {header.interval_s} s is not possible.")
    if header.approx_xyz_m is not None:
        r_m = math.sqrt(sum(v * v for v in header.approx_xyz_m))
        if r_m == 0.0:
            header.approx_xyz_m = None  # "unknown" (all zeros), allowed by the format
        elif not _EARTH_RADIUS_RANGE_M[0] <= r_m <= _EARTH_RADIUS_RANGE_M[1]:
            raise RinexError(
                "position_off_earth",
                f"The approximate position is {r_m / 1000:.1f} km from the Earth's centre: not a point on the ground.",
            )
    for name in ("antenna_delta_h_m", "antenna_delta_e_m", "antenna_delta_n_m"):
        value = getattr(header, name)
        if value is not None and abs(value) > 100.0:
            raise RinexError("bad_antenna_delta", f"An antenna offset of {value} m is not possible.")


def read_rinex_header(stream: io.BufferedIOBase | Any) -> RinexHeader:
    """Parse the header from a binary file object (reads at most what the header needs)."""
    head = stream.read(MAX_HEADER_BYTES if not _is_gzip(stream) else 8 * MAX_HEADER_BYTES)
    return parse_rinex_header(head)


def _is_gzip(stream) -> bool:
    try:
        pos = stream.tell()
        magic = stream.read(2)
        stream.seek(pos)
        return magic == GZIP_MAGIC
    except (AttributeError, OSError):
        return False


__all__ = [
    "RinexError",
    "RinexHeader",
    "SYSTEM_NAMES",
    "gps_minus_utc_s",
    "parse_rinex_header",
    "read_rinex_header",
    "to_utc",
]
