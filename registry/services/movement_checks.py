"""Movement checks kept: a comparison's outcome stored with its position (on proposing and at publication),
read back, and put in words for the API, commands and audit rows.

The comparison itself is :mod:`registry.services.movement`.
"""

from __future__ import annotations

from types import SimpleNamespace
from typing import Any

from registry.models import CheckStage, MovementCheck, MovementVerdict
from registry.services.movement import MovementOutcome

__all__ = [
    "CheckStage",
    "check_summary",
    "latest_check",
    "movement_check_build",
    "movement_check_store",
    "movement_check_values",
    "stored_check_dict",
]


def movement_check_store(*, outcome: MovementOutcome, stage: str, actor) -> MovementCheck:
    """Keep ``outcome`` for its (saved) position; call inside the caller's transaction."""
    check = movement_check_build(outcome=outcome, stage=stage, actor=actor)
    check.save(force_insert=True)
    return check


def movement_check_build(*, outcome: MovementOutcome, stage: str, actor) -> MovementCheck:
    """The unsaved check row of ``outcome``."""
    return MovementCheck(**movement_check_values(outcome=outcome, stage=stage, actor=actor))


def movement_check_values(*, outcome: MovementOutcome, stage: str, actor) -> dict[str, Any]:
    """The fields of ``outcome``'s check row (model field names; the batch import inserts many at once)."""
    r = outcome.result
    values: dict[str, Any] = {}
    if r is not None:
        values = {
            "statistic": r.statistic,
            "dof": r.dof,
            "critical": r.critical,
            "p_value": r.p_value,
            "statistic_horizontal": r.statistic_horizontal,
            "statistic_vertical": r.statistic_vertical,
            "moved_horizontal": r.moved_horizontal,
            "moved_vertical": r.moved_vertical,
            "d_east_m": float(r.d_enu_m[0]),
            "d_north_m": float(r.d_enu_m[1]),
            "d_up_m": float(r.d_enu_m[2]),
            "detectable_east_m": float(r.detectable_enu_m[0]),
            "detectable_north_m": float(r.detectable_enu_m[1]),
            "detectable_up_m": float(r.detectable_enu_m[2]),
            "added_sigma_east_m": outcome.added_sigma_enu_m[0],
            "added_sigma_north_m": outcome.added_sigma_enu_m[1],
            "added_sigma_up_m": outcome.added_sigma_enu_m[2],
        }
    return {
        "position": outcome.position,
        "compared_with": outcome.compared_with,
        "stage": stage,
        "verdict": outcome.verdict,
        "level": outcome.level,
        "power": outcome.power,
        "above_threshold": outcome.above_threshold,
        "used_velocity": outcome.used_velocity,
        "frame_chain": outcome.frame_chain,
        "warnings": outcome.warnings,
        "reason": outcome.reason,
        "created_by": actor if getattr(actor, "is_authenticated", False) else None,
        **values,
    }


def latest_check(position_id: int, stage: str | None = None) -> MovementCheck | None:
    qs = MovementCheck.objects.filter(position_id=position_id)
    if stage:
        qs = qs.filter(stage=stage)
    return qs.order_by("-created_at", "-id").first()


def _mm(value: float | None) -> float | None:
    return None if value is None else round(float(value) * 1000.0, 2)


def stored_check_dict(check: MovementCheck) -> dict[str, Any]:
    """A stored check in the shape of :meth:`MovementOutcome.as_dict` (plus when, and at which stage)."""
    compared = check.statistic is not None
    return {
        "verdict": check.verdict,
        "verdict_words": MovementVerdict(check.verdict).label,
        "compared_with": check.compared_with_id,
        "level": check.level,
        "power": check.power,
        "d_east_mm": _mm(check.d_east_m),
        "d_north_mm": _mm(check.d_north_m),
        "d_up_mm": _mm(check.d_up_m),
        "t_global": check.statistic,
        "dof": check.dof,
        "critical": check.critical,
        "p_value": check.p_value,
        "moved_horizontal": check.moved_horizontal,
        "moved_vertical": check.moved_vertical,
        "detectable_mm": {
            "east": _mm(check.detectable_east_m),
            "north": _mm(check.detectable_north_m),
            "up": _mm(check.detectable_up_m),
        }
        if compared
        else None,
        "detectable_above_threshold": check.above_threshold,
        "added_sigma_mm": {
            "east": _mm(check.added_sigma_east_m) or 0.0,
            "north": _mm(check.added_sigma_north_m) or 0.0,
            "up": _mm(check.added_sigma_up_m) or 0.0,
        },
        "used_velocity": check.used_velocity,
        "frame_chain": list(check.frame_chain),
        "warnings": list(check.warnings),
        "reason": check.reason,
        "stage": check.stage,
        "checked_at": check.created_at,
    }


def check_summary(check: MovementCheck | SimpleNamespace) -> dict[str, Any]:
    """What the audit row keeps of a stored check (a saved one, or the values a batch inserted with its id)."""
    return {
        "movement_check_id": check.pk,
        "movement_verdict": check.verdict,
        "movement_t": check.statistic,
        "movement_p": check.p_value,
        "compared_with_id": check.compared_with_id,
    }
