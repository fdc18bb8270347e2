"""Words for people in place of codes: audit events, field names, positions, values in the history.

Pages speak to surveyors in words: no event codes (``position_publish``), field
names (``search_lat_deg``), database ids ("position 497") or microsecond timestamps. The codes stay in
the API and the JSON output (documented in README "API: codes"); this module only turns them into
words for the pages.
"""

from __future__ import annotations

import datetime as dt
from typing import Any

#: Audit event codes → what happened, in words.
ACTION_WORDS: dict[str, str] = {
    "attachment_add": "File attached",
    "certificate_import": "Signing certificate imported",
    "certificate_issue": "Signing certificate issued",
    "certificate_revoke": "Signing certificate revoked",
    "custom_grid_create": "Custom grid created",
    "demo_load": "Demo data loaded",
    "document_check": "Document checked",
    "document_discard": "Document draft discarded",
    "document_out_of_date": "Document marked out of date",
    "document_prepare": "Document prepared",
    "document_request": "Document requested",
    "document_retry": "Document build retried",
    "document_sign": "Document signed",
    "document_supersede": "Document superseded by a newer revision",
    "job_create": "Job created",
    "job_update": "Job edited",
    "job_update_refused": "Job edit refused (someone else had changed it)",
    "mark_clear_suspect": "Suspicion cleared by a control manager",
    "mark_clear_suspect_refused": "Suspicion clearance refused (the mark had changed meanwhile)",
    "mark_create": "Mark created",
    "mark_make_suspect": "Mark made suspect",
    "mark_set_status": "Status changed",
    "mark_set_status_refused": "Status change refused (the mark had changed meanwhile)",
    "mark_update": "Description edited",
    "mark_update_refused": "Edit refused (the mark had changed meanwhile)",
    "marks_import": "Marks imported from a file",
    "occupation_record": "Occupation recorded",
    "office_ca_init": "Office signing authority set up",
    "position_propose": "Position proposed",
    "position_publish": "Position published",
    "position_reject": "Position rejected",
    "position_supersede": "Position superseded",
    "position_withdraw": "Position withdrawn",
    "signatory_set_licence": "Signatory licence recorded",
    "signin_failed": "Sign-in failed",
    "signin_locked": "Sign-in locked after repeated failures",
    "signin_unlock": "Sign-in unlocked",
    "user_create": "User created",
    "user_set_active": "User enabled or disabled",
    "user_set_roles": "User roles changed",
    "visit_record": "Visit recorded",
    "published": "Position published",
    "rejected": "Position rejected",
    "withdrawn": "Position withdrawn",
}

#: Keys of audit snapshots → labels (those not here fall back to the model field's verbose name).
FIELD_WORDS: dict[str, str] = {
    "access_directions": "access directions",
    "monument_detail": "how it is set",
    "marking": "marking as inscribed",
    "stability": "expected stability",
    "sky_view": "sky view",
    "suspect_since": "suspect since",
    "suspect_reason": "why suspect",
    "search_lat_deg": "finding location, latitude (°)",
    "search_lon_deg": "finding location, longitude (°)",
    "version": "edit version",
    "frame_epsg": "frame",
    "datum_epsg": "vertical datum",
    "epoch_yr": "coordinate epoch (year)",
    "lat_deg": "latitude (°)",
    "lon_deg": "longitude (°)",
    "h_m": "ellipsoidal height (m)",
    "cov_ee_m2": "variance east (m²)",
    "cov_nn_m2": "variance north (m²)",
    "cov_uu_m2": "variance up (m²)",
    "cov_en_m2": "covariance east–north (m²)",
    "cov_eu_m2": "covariance east–up (m²)",
    "cov_nu_m2": "covariance north–up (m²)",
    "vel_e_m_yr": "velocity east (m/yr)",
    "vel_n_m_yr": "velocity north (m/yr)",
    "vel_u_m_yr": "velocity up (m/yr)",
    "vel_sigma_e_m_yr": "velocity σ east (m/yr)",
    "vel_sigma_n_m_yr": "velocity σ north (m/yr)",
    "vel_sigma_u_m_yr": "velocity σ up (m/yr)",
    "decided_by_id": "decided by",
    "decided_by": "decided by",
    "decided_at": "decided",
    "superseded_at": "superseded",
    "superseded_by_id": "superseded by",
    "supersedes_id": "supersedes",
    "mark_suspect_since": "mark suspect since",
    "mark_suspect_reason": "why the mark was suspect",
    "mark_version": "mark edit version",
    "superseded_by": "superseded by",
    "result_position_id": "result position",
    "position_id": "position",
    "created_by_id": "recorded by",
    "visited_on": "date of the visit",
    "start_utc": "start",
    "end_utc": "end",
    "antenna_height_measured_m": "antenna height as measured (m)",
    "antenna_height_kind": "how the antenna height was measured",
    "antenna_height_arp_m": "antenna height to the ARP (m)",
    "antenna_radius_m": "antenna radius (m)",
    "arp_offset_m": "ARP offset (m)",
    "original_name": "file name",
    "size_bytes": "size (bytes)",
    "sha256": "SHA-256",
    "visit_id": "visit",
    "occupation_id": "occupation",
    "mark_status": "mark status",
}

#: Keys whose values are state or choice codes shown as words.
_CHOICE_KEYS = {"state", "status", "finding", "mark_status", "method", "monument", "stability", "sky_view", "kind"}


def action_words(code: str) -> str:
    """An audit event code in words; an unknown code is turned into words rather than shown raw."""
    if code in ACTION_WORDS:
        return ACTION_WORDS[code]
    return str(code).replace("_", " ").capitalize()


def field_words(key: str, model_name: str = "mark") -> str:
    """A snapshot key as a label: our own words, else the model field's verbose name, else plain words."""
    if key in FIELD_WORDS:
        return FIELD_WORDS[key]
    from django.apps import apps

    try:
        model = apps.get_model("registry", model_name)
        name = key[:-3] if key.endswith("_id") else key
        return str(model._meta.get_field(name).verbose_name)
    except Exception:
        return str(key).removesuffix("_id").replace("_", " ")


def time_words(value: Any) -> str:
    """A time to the minute with its zone (UTC); dates stay dates."""
    if isinstance(value, str):
        try:
            value = dt.datetime.fromisoformat(value)
        except ValueError:
            return value
    if isinstance(value, dt.datetime):
        if value.tzinfo is not None:
            value = value.astimezone(dt.UTC)
        return f"{value:%Y-%m-%d %H:%M} UTC"
    if isinstance(value, dt.date):
        return f"{value:%Y-%m-%d}"
    return str(value)


def position_words(frame_epsg: Any, epoch_yr: Any, source: str = "") -> str:
    """A position named by its frame, epoch and source (never by its database id)."""
    from registry.formatting import format_frame

    try:
        frame = format_frame(int(frame_epsg))
    except (TypeError, ValueError):
        frame = "unknown frame"
    try:
        epoch = f"{float(epoch_yr):.3f}"
    except (TypeError, ValueError):
        epoch = "unknown epoch"
    text = f"{frame}, epoch {epoch}"
    if source:
        text += f", from “{source}”"
    return text


def describe_position(position) -> str:
    return position_words(position.frame_epsg, position.epoch_yr, position.source)


#: Snapshot keys that hold a position's id, and those that hold a user's id.
POSITION_KEYS = ("superseded_by_id", "superseded_by", "supersedes_id", "result_position_id", "position_id")
USER_KEYS = ("created_by_id", "decided_by_id", "decided_by", "uploaded_by_id")


def value_words(
    key: str, value: Any, *, positions: dict | None = None, users: dict | None = None, others: dict | None = None
) -> Any:
    """A snapshot value in words: states and choices by their labels, frames by name, times to the
    minute, linked positions and people by what they are. Returns the value itself when it is plain."""
    if value is None or value == "":
        return value
    if key in _CHOICE_KEYS:
        from registry.web.templatetags.registry_format import _state_labels

        labels = _state_labels()
        return labels.get(str(value), _choice_label(key, value))
    if key in ("frame_epsg", "datum_epsg"):
        from registry.formatting import format_frame

        try:
            return format_frame(int(value))
        except (TypeError, ValueError):
            return value
    if key in POSITION_KEYS and positions is not None:
        p = positions.get(_as_int(value))
        return describe_position(p) if p is not None else "a position no longer on record"
    if key in USER_KEYS and users is not None:
        return users.get(_as_int(value), "a former user")
    if key in ("visit_id", "occupation_id") and others is not None:
        return others.get((key, _as_int(value)), "a record no longer on file")
    if key.endswith("_at") or key.endswith("_utc") or key in ("suspect_since", "visited_on"):
        return time_words(value)
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, (dict, list)):
        return _compact(value)
    return value


def _choice_label(key: str, value: Any) -> str:
    from registry.models import Finding, MarkStatus, MonumentKind, SkyView, Stability

    for choices in (MarkStatus, Finding, MonumentKind, SkyView, Stability):
        try:
            return str(choices(value).label)
        except ValueError:
            continue
    return str(value).replace("_", " ")


def _as_int(value: Any) -> int | None:
    try:
        return int(value)
    except (TypeError, ValueError):
        return None


def _compact(value: Any) -> str:
    if isinstance(value, dict):
        return "; ".join(f"{field_words(str(k))}: {_compact(v)}" for k, v in value.items())
    if isinstance(value, list):
        return ", ".join(_compact(v) for v in value)
    return str(value)
