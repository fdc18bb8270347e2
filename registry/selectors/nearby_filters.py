"""The nearby search's input: bounds, filters and the candidate path, checked before anything is read.

Every refusal is a :class:`registry.errors.InvalidInput` with a ``code`` (``out_of_range``,
``invalid_number``, ``invalid_choice``, ``postgis_unavailable``). The filters are described in
:mod:`registry.selectors.nearby`.
"""

from __future__ import annotations

import datetime as dt
import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

from django.db import connection

from registry.errors import InvalidInput
from registry.models import MarkStatus, Stability
from registry.selectors import spatial_sql

#: Largest search radius accepted (m). A registry search wider than this is a listing.
MAX_RADIUS_M = 1_000_000.0
#: Largest ``limit`` accepted (the command line may ask this many).
MAX_LIMIT = 10_000
#: What the page and the API let a person ask: the radius in km (at most MAX_RADIUS_M), at most this
#: many marks (default DEFAULT_LIMIT), and the filters' bounds, which the selector checks again.
RADIUS_MIN_KM = 0.001
RADIUS_MAX_KM = MAX_RADIUS_M / 1000.0
ASKED_LIMIT_MAX = 500
DEFAULT_LIMIT = 50
INTACT_VISIT_MIN_YR = 0.001
INTACT_VISIT_MAX_YR = 200.0
ACCURACY_MIN_M = 0.0001
ACCURACY_MAX_M = 100.0
FRAME_EPSG_MIN = 1024
PATH_AUTO = "auto"
PATH_POSTGIS = "postgis"
PATH_PORTABLE = "portable"
PATHS = (PATH_AUTO, PATH_POSTGIS, PATH_PORTABLE)


@dataclass(frozen=True)
class Filters:
    shape: spatial_sql.FilterShape
    frame_epsg: int | None
    visit_cutoff: dt.date | None
    accuracy_max_m: float | None
    usable_only: bool = False


# ----------------------------------------------------------------------------- validation


def number_in_range(name: str, value: Any, *, lo: float, hi: float, lo_open: bool = False) -> float:
    try:
        x = float(value)
    except (TypeError, ValueError):
        raise InvalidInput(f"{name} must be a number.", code="invalid_number", details={"field": name}) from None
    if not math.isfinite(x) or x > hi or x < lo or (lo_open and x == lo):
        bound = f"greater than {lo:g}" if lo_open else f"at least {lo:g}"
        raise InvalidInput(
            f"{name} must be {bound} and at most {hi:g}.", code="out_of_range", details={"field": name, "value": value}
        )
    return x


def _choices(name: str, values: str | Sequence[str] | None, allowed) -> tuple[str, ...] | None:
    values = spatial_sql.normalise_choices(values)
    if values is None:
        return None
    bad = [v for v in values if v not in allowed.values]
    if bad or not values:
        raise InvalidInput(
            f"{name} must be one or more of: {', '.join(allowed.values)}.",
            code="invalid_choice",
            details={"field": name, "invalid": bad},
        )
    return values


def parse_filters(
    *,
    status,
    stability,
    intact_visit_within_yr,
    frame_epsg,
    accuracy_class_max_m,
    as_of: dt.date | None,
    usable_only: bool = False,
) -> Filters:
    statuses = _choices("status", status, MarkStatus)
    stabilities = _choices("stability", stability, Stability)
    cutoff = None
    if intact_visit_within_yr is not None:
        years = number_in_range(
            "intact_visit_within_yr", intact_visit_within_yr, lo=0.0, hi=INTACT_VISIT_MAX_YR, lo_open=True
        )
        today = as_of or dt.datetime.now(dt.UTC).date()
        cutoff = today - dt.timedelta(days=math.floor(years * 365.25))
    if frame_epsg is not None:
        try:
            frame_epsg = int(frame_epsg)
        except (TypeError, ValueError):
            raise InvalidInput(
                "frame_epsg must be an EPSG code (integer).", code="invalid_number", details={"field": "frame_epsg"}
            ) from None
        if not FRAME_EPSG_MIN <= frame_epsg <= 32767 and not 100000 <= frame_epsg <= 999999:
            raise InvalidInput(
                "frame_epsg is not a plausible EPSG code.", code="out_of_range", details={"field": "frame_epsg"}
            )
    accuracy = None
    if accuracy_class_max_m is not None:
        accuracy = number_in_range(
            "accuracy_class_max_m", accuracy_class_max_m, lo=0.0, hi=ACCURACY_MAX_M, lo_open=True
        )
    shape = spatial_sql.FilterShape(
        statuses=statuses,
        stabilities=stabilities,
        frame=frame_epsg is not None,
        needs_published=accuracy is not None,
        intact_visit=cutoff is not None,
    )
    return Filters(shape, frame_epsg, cutoff, accuracy, bool(usable_only))


def resolve_path(path: str) -> str:
    if path not in PATHS:
        raise InvalidInput(f"path must be one of {', '.join(PATHS)}.", code="invalid_choice", details={"field": "path"})
    if path == PATH_AUTO:
        return PATH_POSTGIS if connection.vendor == "postgresql" else PATH_PORTABLE
    if path == PATH_POSTGIS and connection.vendor != "postgresql":
        raise InvalidInput("The PostGIS path needs PostgreSQL with PostGIS.", code="postgis_unavailable")
    return path
