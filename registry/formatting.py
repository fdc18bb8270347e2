"""How a person reads a number: one way to print each kind, for pages, PDFs, statements and commands.

The rules are in DEVELOPERS.md "Display":

- latitude/longitude in DMS to 0.00001″ with the hemisphere letter (through
  :mod:`registry.geodesy.dms`, so pages, API and PDFs round alike), and in decimal
  degrees to 9 places;
- metres to 3 decimals; sigmas and accuracies in millimetres (1 decimal);
- coordinate epochs as decimal years to 3 places with the calendar date beside;
- frames as "name (EPSG:code)", the name taken from PROJ's EPSG database;
- states as a word first, with a colour class second.

Every function takes plain numbers and returns a string; no Django here, so the
computation core's statements (:mod:`registry.geodesy.statements`) use it as well as the
template filters (:mod:`registry.web.templatetags.registry_format`, which turn ``None``
into an em dash), the PDFs and the commands. Machine output (JSON) is not rounded here.

Decimal year convention: ``Y + f`` is the instant ``f × (days in year Y)`` after
1 January of year Y, 00:00 UTC (365 or 366 days). This is the plain "fraction of the
calendar year" convention; PROJ's time-dependent transformations take the epoch as
a decimal year and do not depend on the calendar date shown here.
"""

from __future__ import annotations

import calendar
import datetime as dt
import math
from functools import lru_cache

from registry.geodesy import dms
from registry.geodesy.accuracy import sigma_from_variance_m

# Epochs are written one way everywhere: the geodesy core's definition, re-exported here.
from registry.geodesy.frames import crs_label
from registry.geodesy.frames import decimal_year_to_date as decimal_year_to_date
from registry.geodesy.frames import format_epoch as format_epoch


def decimal_year_to_datetime(epoch_yr: float) -> dt.datetime:
    """The UTC instant of a decimal year (fraction of the calendar year, see module docstring).

    >>> decimal_year_to_datetime(2020.5).isoformat()
    '2020-07-02T00:00:00+00:00'
    """
    if epoch_yr is None or not math.isfinite(epoch_yr):
        raise ValueError(f"not a finite epoch: {epoch_yr!r}")
    year = math.floor(epoch_yr)
    days_in_year = 366 if calendar.isleap(year) else 365
    start = dt.datetime(year, 1, 1, tzinfo=dt.UTC)
    return start + dt.timedelta(days=(epoch_yr - year) * days_in_year)


def format_lat_dms(lat_deg: float) -> str:
    """Latitude as DMS to 0.00001″ with N/S (one implementation: :mod:`registry.geodesy.dms`).

    >>> format_lat_dms(45.2)
    '45°12′00.00000″ N'
    """
    return dms.format_lat(lat_deg, decimals=5)


def format_lon_dms(lon_deg: float) -> str:
    """Longitude as DMS to 0.00001″ with E/W.

    >>> format_lon_dms(-110.6)
    '110°36′00.00000″ W'
    """
    return dms.format_lon(lon_deg, decimals=5)


def _fixed(value: float, places: int) -> str:
    text = f"{value:.{places}f}"
    if text.startswith("-") and float(text) == 0.0:  # no "-0.000"
        text = text[1:]
    return text


def format_deg9(value_deg: float) -> str:
    """Decimal degrees to 9 places (about 0.1 mm on the ground); ASCII minus so that it copies.

    >>> format_deg9(-110.6)
    '-110.600000000'
    """
    return _fixed(value_deg, 9)


def format_m(value_m: float, decimals: int = 3) -> str:
    """Metres with a fixed number of decimals (3 unless asked), never "-0.000".

    >>> format_m(1523.4567), format_m(0.21), format_m(-0.0001)
    ('1523.457', '0.210', '0.000')
    """
    return _fixed(value_m, decimals)


def format_m3(value_m: float) -> str:
    """Metres to 3 decimals.

    >>> format_m3(1523.4567)
    '1523.457'
    """
    return format_m(value_m, 3)


def format_mm(value_m: float, places: int = 1) -> str:
    """A length given in metres, printed in millimetres.

    >>> format_mm(0.0123)
    '12.3'
    """
    return _fixed(value_m * 1000.0, places)


def format_cm(value_m: float, places: int = 1) -> str:
    """A length given in metres, printed in centimetres (ASPRS tables use centimetres).

    >>> format_cm(0.0449)
    '4.5'
    """
    return _fixed(value_m * 100.0, places)


def format_sigma_mm(variance_m2: float, places: int = 1) -> str:
    """The standard deviation (mm) from a variance in m².

    >>> format_sigma_mm(0.004**2)
    '4.0'
    """
    return _fixed(float(sigma_from_variance_m(variance_m2)) * 1000.0, places)


@lru_cache(maxsize=256)
def frame_name(epsg: int) -> str | None:
    """The CRS name from PROJ's EPSG database, or ``None`` if PROJ does not know the code."""
    from pyproj import CRS
    from pyproj.exceptions import CRSError

    try:
        return CRS.from_epsg(int(epsg)).name
    except (CRSError, ValueError, TypeError):
        return None


def format_frame(epsg: int) -> str:
    """A frame (or any CRS) as "name (EPSG:code)".

    >>> format_frame(7912)
    'ITRF2014 (EPSG:7912)'
    """
    name = frame_name(int(epsg))
    if name is None:
        return f"EPSG:{int(epsg)} (not in the EPSG database)"
    return crs_label(name, epsg)


def format_utc(value: dt.datetime) -> str:
    """A time in UTC with the zone shown, to the minute (pages speak to people; the API keeps
    the full ISO 8601 time).

    >>> format_utc(dt.datetime(2024, 5, 3, 14, 22, 5, tzinfo=dt.UTC))
    '2024-05-03 14:22 UTC'
    """
    if value.tzinfo is not None:
        value = value.astimezone(dt.UTC)
    return f"{value:%Y-%m-%d %H:%M} UTC"
