"""Display formatting for pages: one way to print each kind of number (DEVELOPERS.md "Display").

- latitude/longitude in DMS to 0.00001″ with the hemisphere letter (through
  :mod:`registry.geodesy.dms`, so pages, API and PDFs round alike), and in decimal
  degrees to 9 places;
- metres to 3 decimals; sigmas and accuracies in millimetres (1 decimal);
- coordinate epochs as decimal years to 3 places with the calendar date beside;
- frames as "name (EPSG:code)", the name taken from PROJ's EPSG database;
- states as a word first, with a colour class second.

The pure formatting functions (``format_*``, ``decimal_year_to_date``, ``frame_name``)
take plain numbers and return strings, so the PDF and command-line code can print
the same value the same way. The template filters wrap them and turn ``None`` into
an em dash.

Decimal year convention: ``Y + f`` is the instant ``f × (days in year Y)`` after
1 January of year Y, 00:00 UTC (365 or 366 days). This is the plain "fraction of the
calendar year" convention; PROJ's time-dependent transformations take the epoch as
a decimal year and do not depend on the calendar date shown here.
"""

from __future__ import annotations

import calendar
import datetime as dt
import functools
import math
from functools import lru_cache

from django import template
from django.utils.html import format_html

from registry.geodesy import dms

register = template.Library()

DASH = "—"


# --------------------------------------------------------------------------- pure functions


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


def format_m3(value_m: float) -> str:
    """Metres to 3 decimals.

    >>> format_m3(1523.4567)
    '1523.457'
    """
    return _fixed(value_m, 3)


def format_mm(value_m: float, places: int = 1) -> str:
    """A length given in metres, printed in millimetres.

    >>> format_mm(0.0123)
    '12.3'
    """
    return _fixed(value_m * 1000.0, places)


def format_sigma_mm(variance_m2: float, places: int = 1) -> str:
    """The standard deviation (mm) from a variance in m².

    >>> format_sigma_mm(0.004**2)
    '4.0'
    """
    if variance_m2 < 0:
        raise ValueError("a variance cannot be negative")
    return _fixed(math.sqrt(variance_m2) * 1000.0, places)


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


def decimal_year_to_date(epoch_yr: float) -> dt.date:
    """The calendar date (UTC) of a decimal year.

    >>> decimal_year_to_date(2010.0)
    datetime.date(2010, 1, 1)
    """
    return decimal_year_to_datetime(epoch_yr).date()


def format_epoch(epoch_yr: float) -> str:
    """A coordinate epoch as decimal year to 3 places with the calendar date.

    >>> format_epoch(2010.0)
    '2010.000 (2010-01-01)'
    """
    return f"{epoch_yr:.3f} ({decimal_year_to_date(epoch_yr).isoformat()})"


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
    return f"{name} (EPSG:{int(epsg)})"


def format_utc(value: dt.datetime) -> str:
    """A time in UTC with the zone shown, to the minute (pages speak to people; the API keeps
    the full ISO 8601 time).

    >>> format_utc(dt.datetime(2024, 5, 3, 14, 22, 5, tzinfo=dt.UTC))
    '2024-05-03 14:22 UTC'
    """
    if value.tzinfo is not None:
        value = value.astimezone(dt.UTC)
    return f"{value:%Y-%m-%d %H:%M} UTC"


# --------------------------------------------------------------------------- state words


#: States whose label is a phrase: the badge shows this word (the label is its title).
_SHORT_STATE_WORDS = {"suspect": "suspect"}


@functools.cache
def _state_labels() -> dict[str, str]:
    """Every state's label by value (built once: it was rebuilt for every badge, a tenth of a list page)."""
    from registry.models import DocumentState, Finding, MarkStatus, PositionState

    labels: dict[str, str] = {}
    for choices in (MarkStatus, PositionState, Finding, DocumentState):
        labels.update({value: str(label) for value, label in choices.choices})
    return labels


# --------------------------------------------------------------------------- template filters


def _none_safe(func):
    def wrapper(value, *args):
        if value is None or value == "":
            return DASH
        try:
            return func(float(value), *args)
        except (TypeError, ValueError):
            return DASH

    wrapper.__name__ = func.__name__
    wrapper.__doc__ = func.__doc__
    return wrapper


@register.filter
@_none_safe
def lat_dms(value):
    return format_lat_dms(value)


@register.filter
@_none_safe
def lon_dms(value):
    return format_lon_dms(value)


@register.filter
@_none_safe
def deg9(value):
    return format_deg9(value)


@register.filter
@_none_safe
def m3(value):
    return format_m3(value)


@register.filter
@_none_safe
def mm(value):
    """Metres → millimetres, 1 decimal."""
    return format_mm(value)


@register.filter
@_none_safe
def percent_level(value):
    """A probability as a percentage for the movement check: level α 0.05 → "95 %", power 0.8 → "80 %".

    Values up to 0.5 are read as a test level α (the confidence 1 − α is shown); above, as a probability.
    """
    p = float(value)
    shown = (1.0 - p) if p <= 0.5 else p
    return f"{100.0 * shown:g} %"


@register.filter
@_none_safe
def sigma_mm(value):
    """Variance in m² → standard deviation in mm, 1 decimal."""
    return format_sigma_mm(value)


@register.filter
@_none_safe
def epoch(value):
    return format_epoch(value)


@register.filter
def frame(value):
    if value is None or value == "":
        return DASH
    try:
        return format_frame(int(value))
    except (TypeError, ValueError):
        return DASH


@register.filter
def utc(value):
    if not value:
        return DASH
    if isinstance(value, str):
        try:
            value = dt.datetime.fromisoformat(value)
        except ValueError:
            return value
    if not isinstance(value, dt.datetime):
        return str(value)
    return format_utc(value)


@register.filter
def state(value):
    """A state or a visit's finding as a word in a bordered badge; the colour class is secondary."""
    if not value:
        return DASH
    label = _state_labels().get(str(value), str(value).replace("_", " "))
    short = _SHORT_STATE_WORDS.get(str(value))
    if short:  # a compact word in tables; the whole label as its title (and on the mark page itself)
        return format_html('<span class="state state-{}" title="{}">{}</span>', str(value), label, short)
    return format_html('<span class="state state-{}">{}</span>', str(value), label)


@register.filter
def person(user, missing=DASH):
    """A user by full name, else user name; ``missing`` (an em dash) for none."""
    if user is None:
        return missing
    return user.get_full_name() or user.get_username() or missing


@register.filter
def action_words(value):
    """An audit event code in words (registry.web.wording)."""
    from registry.web.wording import action_words as words

    return words(str(value or ""))


@register.filter
def position_name(p):
    """A position named by its frame, epoch and source."""
    from registry.web.wording import describe_position

    return describe_position(p) if p is not None else DASH


@register.filter
def field_label(name, model_name="mark"):
    """The verbose name of a model field, for conflict tables and audit history."""
    from django.apps import apps

    try:
        model = apps.get_model("registry", model_name)
        return str(model._meta.get_field(str(name)).verbose_name)
    except Exception:
        return str(name).replace("_", " ")


@register.filter
def choice_label(value, field_name):
    """The label of a Mark choice value (monument, stability, sky view, status)."""
    from registry.models import Mark

    try:
        field = Mark._meta.get_field(field_name)
    except Exception:
        return value
    return dict(field.choices or []).get(value, value)


@register.simple_tag
def clipped_text(text, full_url="", limit=None):
    """A free text for a page: at most ``SHOWN_MAX`` characters (cut at a space), line breaks kept,
    and a "show all" link to the whole text when it was cut (registry/services/limits.py)."""
    from django.template.defaultfilters import linebreaksbr

    from registry.services.limits import SHOWN_MAX

    text = str(text or "")
    limit = int(limit or SHOWN_MAX)
    if len(text) <= limit:
        return linebreaksbr(text)
    cut = text[:limit]
    if " " in cut[limit // 2 :]:
        cut = cut.rsplit(" ", 1)[0]
    if not full_url:
        return format_html("{}…", linebreaksbr(cut))
    return format_html(
        '{}… <a class="show-all" href="{}">show all ({} characters)</a>', linebreaksbr(cut), full_url, f"{len(text):,}"
    )
