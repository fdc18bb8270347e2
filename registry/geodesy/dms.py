"""Degrees–minutes–seconds: formatting and parsing of angles.

Pure module (no Django). Conventions (pinned in ``tests/geodesy/test_dms.py``):

- The sign belongs to the whole angle: −37°57′03.72030″ = −(37 + 57/60 + 3.72030/3600) degrees
  (ICSM *GDA Technical Manual*, worked examples; common practice). Minutes and seconds are never
  negative on their own.
- Formatting rounds the *whole* angle to the stated number of decimals of a second first and only
  then splits it into degrees, minutes and seconds, so 0°00′59.999995″ at 5 decimals becomes
  0°01′00.00000″ (never 0°00′60.00000″). Halves round away from zero.
- Parsing accepts decimal degrees ("45.2"), degrees and decimal minutes ("45 12.5") or degrees,
  minutes and seconds ("45 12 03.5", "45°12′03.5″", "45:12:03.5"), with either a sign ("-", "+",
  "−") or a hemisphere letter (N/S for latitude, E/W for longitude) before or after the numbers —
  not both. Only the last component may carry decimals. Minutes and seconds must be below 60;
  latitudes within ±90°, longitudes within ±180°.

Errors are :class:`AngleParseError` (a ``ValueError``) with a machine-readable ``code``.
"""

from __future__ import annotations

import math
import re

import numpy as np

__all__ = [
    "AngleParseError",
    "split_dms",
    "format_dms",
    "format_lat",
    "format_lon",
    "format_signed_dms",
    "parse_angle",
]


class AngleParseError(ValueError):
    """An angle could not be read; ``code`` says why (stable, for tests and API clients)."""

    def __init__(self, message: str, *, code: str):
        super().__init__(message)
        self.code = code


def split_dms(angle_deg, *, decimals: int = 5):
    """Split angles into sign, whole degrees, whole minutes and rounded seconds.

    Parameters
    ----------
    angle_deg : array_like
        Angles in decimal degrees.
    decimals : int
        Decimals of the seconds (0–8).

    Returns
    -------
    sign, deg, minutes, seconds : ndarray
        ``sign`` is −1 or +1 (+1 when the angle rounds to zero), ``deg`` and ``minutes`` are integers,
        ``seconds`` is rounded to ``decimals`` and always < 60.

    Examples
    --------
    >>> s, d, m, sec = split_dms(-(37 + 57 / 60 + 3.72030 / 3600))
    >>> int(s), int(d), int(m), float(sec)
    (-1, 37, 57, 3.7203)
    >>> s, d, m, sec = split_dms(59.999995 / 3600, decimals=5)
    >>> int(d), int(m), float(sec)
    (0, 1, 0.0)
    """
    if not 0 <= int(decimals) <= 8:
        raise ValueError("decimals must be between 0 and 8")
    a = np.asarray(angle_deg, dtype=float)
    if not np.all(np.isfinite(a)):
        raise ValueError("angle must be finite")
    scale = 10 ** int(decimals)
    # Round half away from zero on the magnitude, in integer units of 10^-decimals arc-seconds.
    # The 1e-7 guard absorbs binary representation error of exact halves (1e-7 unit ≤ 1e-7″).
    units = np.floor(np.abs(a) * 3600.0 * scale + 0.5 + 1e-7).astype(np.int64)
    sign = np.where((a < 0) & (units > 0), -1, 1)
    per_deg = 3600 * scale
    per_min = 60 * scale
    deg = units // per_deg
    rem = units - deg * per_deg
    minutes = rem // per_min
    sec_units = rem - minutes * per_min
    seconds = sec_units / scale
    return sign, deg, minutes, seconds


def _one(value) -> float:
    arr = np.asarray(value, dtype=float)
    if arr.ndim != 0:
        raise TypeError("format functions take one angle; use np.vectorize or split_dms for arrays")
    return float(arr)


def format_dms(angle_deg: float, *, decimals: int = 5, positive: str = "", negative: str = "-") -> str:
    """Format one angle as D°MM′SS.sss″.

    ``positive``/``negative`` are the prefix (or, if they are hemisphere letters, suffix) used for
    the sign; the default is a leading "-" for negative angles.

    >>> format_dms(-(0 + 30 / 60))
    '-0°30′00.00000″'
    >>> format_dms(12.5, decimals=2)
    '12°30′00.00″'
    """
    sign, deg, minutes, seconds = split_dms(_one(angle_deg), decimals=decimals)
    width = 3 + decimals if decimals else 2
    body = f"{int(deg)}°{int(minutes):02d}′{float(seconds):0{width}.{decimals}f}″"
    marker = negative if int(sign) < 0 else positive
    if marker and marker.isalpha():
        return f"{body} {marker}"
    return f"{marker}{body}"


def format_lat(lat_deg: float, *, decimals: int = 5) -> str:
    """Latitude with its hemisphere letter, e.g. ``45°12′00.00000″ N``.

    >>> format_lat(-37.951033416666665)
    '37°57′03.72030″ S'
    """
    return format_dms(lat_deg, decimals=decimals, positive="N", negative="S")


def format_lon(lon_deg: float, *, decimals: int = 5) -> str:
    """Longitude with its hemisphere letter, e.g. ``110°36′00.00000″ W``.

    >>> format_lon(-110.6)
    '110°36′00.00000″ W'
    """
    return format_dms(lon_deg, decimals=decimals, positive="E", negative="W")


def format_signed_dms(angle_deg: float, *, decimals: int = 2) -> str:
    """A signed angle such as a convergence: ``+1°35′03.65″`` / ``−1°35′03.65″`` (true minus sign).

    >>> format_signed_dms(-1.5843464562)
    '−1°35′03.65″'
    """
    return format_dms(angle_deg, decimals=decimals, positive="+", negative="−")


_SIGNS = {"+": 1, "-": -1, "−": -1, "–": -1}
_HEMI = {"N": ("lat", 1), "S": ("lat", -1), "E": ("lon", 1), "W": ("lon", -1)}
_SEPARATORS = re.compile(r"[\s:°º˚'′’\"″”]+")
_NUMBER = re.compile(r"^(\d+(\.\d*)?|\.\d+)$")
_LIMITS = {"lat": 90.0, "lon": 180.0, None: 360.0}


def parse_angle(text: str, *, kind: str | None = None) -> float:
    """Read an angle in decimal degrees or D M S form; return decimal degrees.

    Parameters
    ----------
    text : str
        The angle as typed (see the module docstring for the accepted forms).
    kind : {"lat", "lon", None}
        Restricts hemisphere letters and the range (±90° / ±180°; ±360° when None).

    Raises
    ------
    AngleParseError
        With ``code`` one of ``empty``, ``unrecognised``, ``sign_and_hemisphere``,
        ``wrong_hemisphere``, ``fraction_not_last``, ``minutes_out_of_range``,
        ``seconds_out_of_range``, ``out_of_range``, ``too_many_parts``.

    Examples
    --------
    >>> parse_angle("37 57 03.72030 S", kind="lat") == -(37 + 57 / 60 + 3.72030 / 3600)
    True
    >>> parse_angle("-0 30 00")
    -0.5
    >>> parse_angle("110°36′W", kind="lon")
    -110.6
    """
    if kind not in _LIMITS:
        raise ValueError("kind must be 'lat', 'lon' or None")
    if text is None or not str(text).strip():
        raise AngleParseError("An angle is required.", code="empty")
    raw = str(text).strip()
    s = raw
    sign = 0
    hemi = 0
    # Hemisphere letter at either end.
    for pos in (0, -1):
        ch = s[pos].upper() if s else ""
        neighbour = (s[1:2] if pos == 0 else s[-2:-1]) if s else ""
        if ch in _HEMI and not neighbour.isalpha():
            h_kind, h_sign = _HEMI[ch]
            if kind is not None and h_kind != kind:
                expected = "N or S" if kind == "lat" else "E or W"
                raise AngleParseError(
                    f"'{raw}': hemisphere letter {ch} does not fit a {'latitude' if kind == 'lat' else 'longitude'} "
                    f"(use {expected}).",
                    code="wrong_hemisphere",
                )
            if hemi:
                raise AngleParseError(f"'{raw}': more than one hemisphere letter.", code="unrecognised")
            hemi = h_sign
            s = s[1:] if pos == 0 else s[:-1]
            s = s.strip()
    if s and s[0] in _SIGNS:
        sign = _SIGNS[s[0]]
        s = s[1:].strip()
    if sign and hemi:
        raise AngleParseError(
            f"'{raw}': give either a sign or a hemisphere letter, not both.", code="sign_and_hemisphere"
        )
    parts = [p for p in _SEPARATORS.split(s) if p]
    if not parts:
        raise AngleParseError(f"'{raw}' has no number in it.", code="unrecognised")
    if len(parts) > 3:
        raise AngleParseError(f"'{raw}': at most degrees, minutes and seconds.", code="too_many_parts")
    for p in parts:
        if not _NUMBER.match(p):
            raise AngleParseError(f"'{raw}': '{p}' is not a number here.", code="unrecognised")
    for p in parts[:-1]:
        if "." in p:
            raise AngleParseError(
                f"'{raw}': only the last part (degrees, minutes or seconds) may have decimals.",
                code="fraction_not_last",
            )
    values = [float(p) for p in parts]
    deg = values[0]
    minutes = values[1] if len(values) > 1 else 0.0
    seconds = values[2] if len(values) > 2 else 0.0
    if minutes >= 60.0:
        raise AngleParseError(f"'{raw}': minutes must be below 60.", code="minutes_out_of_range")
    if seconds >= 60.0:
        raise AngleParseError(f"'{raw}': seconds must be below 60.", code="seconds_out_of_range")
    value = deg + minutes / 60.0 + seconds / 3600.0
    value *= sign or hemi or 1
    limit = _LIMITS[kind]
    if not math.isfinite(value) or abs(value) > limit:
        what = {"lat": "A latitude", "lon": "A longitude", None: "An angle"}[kind]
        raise AngleParseError(f"'{raw}': {what} must be within ±{limit:g}°.", code="out_of_range")
    return value
