"""Template filters for pages: the numbers printed as :mod:`registry.formatting` prints them, ``None`` as a dash.

One way to print each kind of number (DEVELOPERS.md "Display"); states as a word first, with a
colour class second.
"""

from __future__ import annotations

import datetime as dt
import functools

from django import template
from django.utils.html import format_html

from registry.formatting import (
    format_deg9,
    format_epoch,
    format_frame,
    format_lat_dms,
    format_lon_dms,
    format_m3,
    format_mm,
    format_sigma_mm,
    format_utc,
)

register = template.Library()

DASH = "—"


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
    return _state_badge(str(value))


@functools.lru_cache(maxsize=256)
def _state_badge(value: str):
    """The badge of one state (a few dozen states: made once each, not for every row of every list)."""
    label = _state_labels().get(value, value.replace("_", " "))
    short = _SHORT_STATE_WORDS.get(value)
    if short:  # a compact word in tables; the whole label as its title (and on the mark page itself)
        return format_html('<span class="state state-{}" title="{}">{}</span>', value, label, short)
    return format_html('<span class="state state-{}">{}</span>', value, label)


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
