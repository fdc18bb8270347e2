"""Cached base screening of a stored job, for the job page, the API and the CSV/GeoJSON exports.

A job page view and each export used to run the whole screening (:func:`registry.services.screening.run.job_screen`).
The result depends only on the job's row, the registry's marks, positions and visits, the ``as_of`` date and
the registry settings, so it is cached with Django's cache framework under a key made of:

* the job's code, primary key and ``version`` (every job save increments it);
* the largest :class:`~registry.models.AuditEvent` id and its timestamp — every write in the registry goes
  through a service that writes one audit row in the same transaction, so any change to a mark, position,
  visit or job moves this key on (the timestamp guards against a re-created database reusing ids);
* the ``as_of`` date (the recovery rule counts years to it);
* a digest of ``settings.REGISTRY`` (``PLATE`` and every other registry setting), so changing a setting
  and restarting never serves a result computed under the old one.

What is cached is the :class:`~registry.services.screening.result.ScreeningResult` itself (it pickles: plain
dataclasses, numpy arrays and model instances; about 0.2–0.3 MB for the demo jobs). The permission check
runs on every call, before the cache is read: a cached result is never shown to someone who may not view.

The default cache (Django's per-process ``LocMemCache``) is enough for one process; a deployment with
several worker processes may set ``CACHES["default"]`` to a shared backend (e.g. Redis) so the workers share
the results. Writes made outside the services (the Django admin, raw SQL) write no audit row and are not
seen until :data:`SCREENING_CACHE_SECONDS` pass or the job changes.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import json

from django.conf import settings
from django.core.cache import cache

from registry.models import AuditEvent
from registry.roles import Ability
from registry.selectors.conversion import configured_plate
from registry.services.access import access_job_by_code
from registry.services.screening import run as screening
from registry.services.screening.result import ScreeningResult

#: How long a cached screening is kept (s). The key changes on any audited write anyway; this only bounds
#: how long an unaudited change (admin site, SQL) can go unseen.
SCREENING_CACHE_SECONDS = 600
KEY_PREFIX = "registry:job-screen:v1"


def _settings_digest() -> str:
    payload = json.dumps(settings.REGISTRY, sort_keys=True, default=str)
    return hashlib.sha256(payload.encode()).hexdigest()[:16]


def screening_cache_key(job, as_of: dt.date) -> str:
    """The cache key for ``job`` screened as of ``as_of`` (see the module docstring for its parts)."""
    last = AuditEvent.objects.order_by("-id").values_list("id", "at").first()
    last_id, last_at = (0, "") if last is None else (last[0], last[1].isoformat())
    parts = [
        job.code,
        str(job.pk),
        str(job.version),
        str(last_id),
        last_at,
        as_of.isoformat(),
        configured_plate() or "-",
        _settings_digest(),
    ]
    digest = hashlib.sha256("|".join(parts).encode()).hexdigest()[:32]
    return f"{KEY_PREFIX}:{digest}"  # short, no spaces: valid for every cache backend


def job_screen_cached(*, actor, code: str, as_of: dt.date | None = None) -> ScreeningResult:
    """:func:`~registry.services.screening.run.job_screen`, cached (same permission check, same result).

    Parameters
    ----------
    actor
        The user asking (VIEW ability; checked on every call, cache hit or not).
    code
        The job's code.
    as_of
        Screening date; None: today (UTC), fixed here so that it enters the key.

    Returns
    -------
    ScreeningResult
        A fresh object on each call for pickling caches; callers must not change it.
    """
    job = access_job_by_code(actor, code, ability=Ability.VIEW)
    as_of = as_of or dt.datetime.now(dt.UTC).date()
    key = screening_cache_key(job, as_of)
    result = cache.get(key)
    if result is None:
        result = screening.job_screen(actor=actor, code=job.code, as_of=as_of)
        cache.set(key, result, SCREENING_CACHE_SECONDS)
    return result
