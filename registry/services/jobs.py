"""Writes on jobs: create, and edit with optimistic concurrency on ``Job.version``.

A job carries everything its base screening needs: the site (GeoJSON Point or
Polygon), the deliverable frame and epoch, tolerances (95 %), the RTK error model and the
screening limits. Each function checks the actor's role (planning jobs is the
:data:`JOB_PLANNING` ability: technicians and managers), validates every field with a coded ``ValidationError``, runs in one transaction
and appends an audit event. Bad input changes nothing.

The fields, their checks and their defaults live in :mod:`registry.services.job_fields`.
"""

from __future__ import annotations

from typing import Any

from django.core.exceptions import ValidationError
from django.db import transaction
from django.db.models import F
from django.utils import timezone

from registry.errors import Conflict
from registry.models import Job
from registry.roles import Ability, has_ability
from registry.services._input import field_error
from registry.services.access import access_job_by_code, require_ability
from registry.services.audit import audit_record, create_audited, json_safe
from registry.services.job_fields import (
    CREATE_FIELDS,
    EDITABLE_FIELDS,
    REQUIRED_ON_CREATE,
    clean_job_fields,
    settings_defaults,
    validate_job,
)

__all__ = ["CREATE_FIELDS", "EDITABLE_FIELDS", "JOB_PLANNING", "job_create", "job_update", "may_plan_jobs"]

#: The ability that plans jobs (create and edit them): technicians (party chiefs) plan their own fieldwork,
#: managers hold it too (every manager records). Everything else managers keep (marks, positions, publishing).
#: Pages, the API and commands all ask this module, so one rule governs every door.
JOB_PLANNING = Ability.RECORD


def may_plan_jobs(user) -> bool:
    """Whether ``user`` may create and edit jobs (for showing or hiding the links; the writes check again)."""
    return has_ability(user, JOB_PLANNING)


def job_create(*, actor, data: dict) -> Job:
    """Create a job.

    Required: ``code``, ``name``, ``site_geojson``, ``frame_epsg``, ``epoch_yr``, ``tol_h_mm``,
    ``tol_v_mm``; everything else has its documented default.

    Raises
    ------
    registry.errors.PermissionDeniedError
        Unless the actor may plan jobs (:data:`JOB_PLANNING`: technicians and managers).
    django.core.exceptions.ValidationError
        Codes: ``required``, ``unknown_field``, ``invalid_code``, ``unique``, ``invalid_number``,
        ``out_of_range``, ``invalid_frame``, ``invalid_grid``, ``invalid_choice``, and the site codes of
        :func:`registry.geodesy.site.parse_site_geojson`.
    """
    require_ability(actor, JOB_PLANNING)
    cleaned = clean_job_fields(data, CREATE_FIELDS)
    missing = [f for f in REQUIRED_ON_CREATE if f not in cleaned or cleaned[f] in (None, "")]
    if missing:
        raise ValidationError({f: ValidationError("This field is required.", code="required") for f in missing})
    values = {**settings_defaults(), **cleaned}
    job = Job(**values, created_by=actor if getattr(actor, "is_authenticated", False) else None)
    validate_job(job)
    return create_audited(job, actor=actor, action="job_create", what="job")


def _parse_version(expected_version: Any) -> int:
    bad = field_error("version", "The version is a whole number (the one you started from).", "invalid_version")
    if expected_version is None or expected_version == "":
        raise field_error("version", "Send the version you started from.", "version_required")
    if isinstance(expected_version, bool):
        raise bad
    try:
        value = int(expected_version)
    except (TypeError, ValueError):
        raise bad from None
    if value < 1 or (isinstance(expected_version, float) and expected_version != value):
        raise bad
    return value


def job_update(*, actor, code: str, expected_version: Any, changes: dict) -> Job:
    """Edit a job, starting from ``expected_version``.

    The UPDATE is conditional on that version and bumps it; of two edits made from the same
    version the first wins and the second raises :class:`registry.errors.Conflict` (code
    ``stale_version``) with ``details = {field: {"yours": ..., "theirs": ...}, "version": ...}``.
    The refused attempt is audited too (``job_update_refused``). Values equal to the stored
    ones change nothing.
    """
    version = _parse_version(expected_version)
    cleaned = clean_job_fields(changes, EDITABLE_FIELDS)
    if not cleaned:
        raise ValidationError("Nothing to change.", code="no_changes")
    conflict: Conflict | None = None
    with transaction.atomic():
        job = access_job_by_code(actor, code, ability=JOB_PLANNING)
        candidate = Job.objects.get(pk=job.pk)
        for key, value in cleaned.items():
            setattr(candidate, key, value)
        validate_job(candidate)
        diff = {k: v for k, v in cleaned.items() if getattr(job, k) != v}
        if not diff and job.version == version:
            return job
        before = {k: getattr(job, k) for k in diff}
        updated = Job.objects.filter(pk=job.pk, version=version).update(
            **diff, version=F("version") + 1, updated_at=timezone.now()
        )
        if updated == 0:
            current = Job.objects.get(pk=job.pk)
            details: dict[str, Any] = {
                k: {"yours": json_safe(v), "theirs": json_safe(getattr(current, k))} for k, v in cleaned.items()
            }
            details["version"] = {"yours": version, "theirs": current.version}
            conflict = Conflict(
                f"Job {current.code} was changed by someone else since version {version} (it is now at version "
                f"{current.version}). Nothing was saved; review their values and submit again.",
                code="stale_version",
                details=details,
            )
            audit_record(
                actor=actor,
                action="job_update_refused",
                obj=current,
                before={**{k: getattr(current, k) for k in cleaned}, "version": current.version},
                after={**cleaned, "version": version},
                note=conflict.message,
            )
        else:
            job.refresh_from_db()
            audit_record(
                actor=actor,
                action="job_update",
                obj=job,
                before={**before, "version": version},
                after={**diff, "version": job.version},
            )
    if conflict is not None:
        raise conflict
    return job
