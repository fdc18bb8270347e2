"""From repeat solutions to one proposed position: a weighted combination, or a velocity estimate.

The manager picks solutions (positions) of one mark in one frame; the geodesy core does the arithmetic
(:func:`registry.geodesy.stats.weighted_combination`, :func:`registry.geodesy.stats.velocity_fit`,
Koch 1999) and the result is *proposed* through ``position_propose`` — so it gets the same rules and the
same movement check as any other proposal — and a manager publishes it as usual. Each step is audited
(``positions_combine`` / ``positions_velocity``, with the ids used, Ω, s0 and the spread verdict).

* **Combination**: every solution at the same coordinate epoch (within 0.001 yr); east/north/up
  offsets from the first solution, generalised weighted mean with full covariance, the variance-of-unit-
  weight test; the proposed covariance is the weighted formal one, scaled by s0² only when the spread is
  significantly too large (``stats``' rule).
* **Velocity**: at least 3 solutions spanning at least 2.5 years (``stats.velocity_rule``); the proposed
  position is x₀ at the reference epoch with the fitted velocity and its stated σ.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from django.core.exceptions import ValidationError
from django.db import transaction

from registry.formatting import format_utc
from registry.geodesy.accuracy import ComputationInputError
from registry.geodesy.conversions import (
    ecef_to_geodetic,
    ellipsoid_of_epsg,
    enu_delta_to_ecef,
    geodetic_to_ecef,
    geodetic_to_enu,
)
from registry.geodesy.statements import combination_text
from registry.geodesy.stats import velocity_fit, weighted_combination
from registry.models import AuditEvent, Position, PositionState
from registry.roles import Ability
from registry.services._input import field_error
from registry.services.access import access_mark_by_code
from registry.services.audit import audit_record
from registry.services.movement import SAME_EPOCH_TOLERANCE_YR, cov_enu_m2
from registry.services.positions import position_propose

USABLE_STATES = (PositionState.PROPOSED, PositionState.PUBLISHED, PositionState.SUPERSEDED)


def _solutions(actor, mark_code: str, position_ids: list[Any], *, minimum: int) -> list[Position]:
    # Locked (inside the caller's transaction) so that two requests for the same proposal run one after the
    # other and the second sees the first's (``_refuse_repeat``).
    mark = access_mark_by_code(actor, mark_code, ability=Ability.MANAGE, for_update=True)
    try:
        ids = sorted({int(i) for i in position_ids})
    except (TypeError, ValueError):
        raise field_error("position_ids", "Give position ids (whole numbers).", "invalid_integer") from None
    if len(ids) < minimum:
        raise field_error(
            "position_ids", f"Choose at least {minimum} different solutions.", "too_few_solutions", minimum=minimum
        )
    # ids past the database's 64-bit key range cannot exist (and would overflow SQLite's parameter): unknown
    storable = [i for i in ids if 0 < i < 2**63]
    found = list(
        Position.objects.filter(mark=mark, pk__in=storable, state__in=USABLE_STATES).order_by("epoch_yr", "pk")
    )
    missing = sorted(set(ids) - {p.pk for p in found})
    if missing:
        raise field_error(
            "position_ids",
            f"Not usable solutions of {mark.code}: {', '.join(map(str, missing))} (another mark's, rejected, "
            "withdrawn or unknown).",
            "unknown_solution",
        )
    frames = {p.frame_epsg for p in found}
    if len(frames) != 1:
        raise field_error("position_ids", "All solutions must be in one frame; transform them first.", "mixed_frames")
    return found


def _refuse_repeat(action: str, found: list[Position]) -> None:
    """A combination or velocity of exactly these solutions that still waits for a decision is not proposed
    again (a double click, a resent form, a retried request): the manager decides the first one."""
    mark = found[0].mark
    ids = sorted(p.pk for p in found)
    waiting = {
        str(pk): when
        for pk, when in Position.objects.filter(mark=mark, state=PositionState.PROPOSED).values_list("pk", "created_at")
    }
    if not waiting:
        return
    events = AuditEvent.objects.filter(
        mark=mark, action=action, object_type=Position._meta.model_name, object_id__in=list(waiting)
    ).values_list("object_id", "after")
    for object_id, after in events:
        if sorted((after or {}).get("from_position_ids") or []) == ids:
            what = "combination" if action == "positions_combine" else "velocity fit"
            raise field_error(
                "position_ids",
                f"A {what} of these {len(ids)} solutions of {mark.code} was already proposed "
                f"({format_utc(waiting[object_id])}) and waits for a decision on the proposals page; "
                "publish or reject it before proposing it again.",
                "already_proposed",
            )


def _offsets(found: list[Position]) -> tuple[np.ndarray, np.ndarray, Position]:
    origin = found[0]
    ell = ellipsoid_of_epsg(origin.frame_epsg)
    e, n, u = geodetic_to_enu(
        np.array([p.lat_deg for p in found]),
        np.array([p.lon_deg for p in found]),
        np.array([p.h_m for p in found]),
        lat0_deg=origin.lat_deg,
        lon0_deg=origin.lon_deg,
        h0_m=origin.h_m,
        ellipsoid=ell,
    )
    return np.stack([e, n, u], axis=-1), np.stack([cov_enu_m2(p) for p in found]), origin


def _geodetic(origin: Position, enu_m: np.ndarray) -> tuple[float, float, float]:
    ell = ellipsoid_of_epsg(origin.frame_epsg)
    x0, y0, z0 = geodetic_to_ecef(origin.lat_deg, origin.lon_deg, origin.h_m, ellipsoid=ell)
    dx, dy, dz = enu_delta_to_ecef(enu_m[0], enu_m[1], enu_m[2], origin.lat_deg, origin.lon_deg)
    lat, lon, h = ecef_to_geodetic(x0 + dx, y0 + dy, z0 + dz, ellipsoid=ell)
    return float(lat), float(lon), float(h)


def _cov_fields(cov: np.ndarray) -> dict[str, float]:
    return {
        "cov_ee_m2": float(cov[0, 0]),
        "cov_en_m2": float(cov[0, 1]),
        "cov_eu_m2": float(cov[0, 2]),
        "cov_nn_m2": float(cov[1, 1]),
        "cov_nu_m2": float(cov[1, 2]),
        "cov_uu_m2": float(cov[2, 2]),
    }


def positions_combine(*, actor, mark_code: str, position_ids: list[Any]) -> tuple[Position, Any]:
    """Propose the weighted combination of solutions at one epoch (manager). Returns (proposal, result)."""
    with transaction.atomic():
        found = _solutions(actor, mark_code, position_ids, minimum=2)
        _refuse_repeat("positions_combine", found)
        epochs = [p.epoch_yr for p in found]
        if max(epochs) - min(epochs) > SAME_EPOCH_TOLERANCE_YR:
            raise field_error(
                "position_ids",
                "The solutions are at different epochs; estimate a velocity instead, or bring them to one epoch.",
                "mixed_epochs",
            )
        x, cov, origin = _offsets(found)
        try:
            result = weighted_combination(x, cov)
        except ComputationInputError as exc:
            raise ValidationError({"position_ids": ValidationError(str(exc), code=exc.code)}) from None
        lat, lon, h = _geodetic(origin, result.mean_m)
        text = combination_text(result)
        ids = [p.pk for p in found]
        proposal = position_propose(
            actor=actor,
            mark_code=mark_code,
            data={
                "frame_epsg": origin.frame_epsg,
                "epoch_yr": float(np.mean(epochs)),
                "lat_deg": lat,
                "lon_deg": lon,
                "h_m": h,
                **_cov_fields(result.cov_statement_m2),
                "source": _source("weighted combination", found),
                "note": text,
            },
        )
        audit_record(
            actor=actor,
            action="positions_combine",
            obj=proposal,
            after={
                "from_position_ids": ids,
                "omega": result.omega,
                "dof": result.dof,
                "s0": result.s0,
                "spread": result.spread,
                "scaled": result.scaled,
            },
            note=text,
            mark=proposal.mark,
        )
    return proposal, result


def _source(method: str, found: list[Position]) -> str:
    """The proposal's source in words: the method and the solutions' epochs (their ids stay in the audit row)."""
    epochs = ", ".join(f"{p.epoch_yr:.3f}" for p in found)
    return f"{method} of {len(found)} solutions (epochs {epochs})"[:200]


def _x0_covariance(found: list[Position], cov: np.ndarray, fit: Any) -> np.ndarray:
    """Covariance of x₀ at the reference epoch: the position block of (AᵀWA)⁻¹ for x(t) = x₀ + v(t − t_ref),
    scaled by s0² when the spread is too large (the rule ``stats`` states for combinations and velocities)."""
    tau = np.array([p.epoch_yr for p in found]) - fit.ref_epoch_yr
    w = np.linalg.inv(cov)
    normal = np.block(
        [
            [w.sum(axis=0), (tau[:, None, None] * w).sum(axis=0)],
            [(tau[:, None, None] * w).sum(axis=0), (tau[:, None, None] ** 2 * w).sum(axis=0)],
        ]
    )
    block = np.linalg.inv(normal)[:3, :3]
    return block * fit.s0**2 if fit.spread == "too_large" else block


def positions_velocity(*, actor, mark_code: str, position_ids: list[Any]) -> tuple[Position, Any]:
    """Propose x₀ and the velocity fitted to ≥ 3 solutions spanning ≥ 2.5 yr (manager). Returns (proposal, fit)."""
    with transaction.atomic():
        found = _solutions(actor, mark_code, position_ids, minimum=3)
        _refuse_repeat("positions_velocity", found)
        x, cov, origin = _offsets(found)
        try:
            fit = velocity_fit([p.epoch_yr for p in found], x, cov)
        except ComputationInputError as exc:
            raise ValidationError({"position_ids": ValidationError(str(exc), code=exc.code)}) from None
        lat, lon, h = _geodetic(origin, fit.position_m)
        ids = [p.pk for p in found]
        v, sv = fit.velocity_m_yr, fit.sigma_velocity_stated_m_yr
        text = (
            f"Velocity from {fit.n} solutions over {fit.span_yr:.2f} years: "
            f"{v[0] * 1000:.1f} ± {sv[0] * 1000:.1f} east, {v[1] * 1000:.1f} ± {sv[1] * 1000:.1f} north, "
            f"{v[2] * 1000:.1f} ± {sv[2] * 1000:.1f} up (mm/yr); s0 = {fit.s0:.3f} with {fit.dof} degrees of "
            f"freedom ({fit.spread.replace('_', ' ')})."
        )
        proposal = position_propose(
            actor=actor,
            mark_code=mark_code,
            data={
                "frame_epsg": origin.frame_epsg,
                "epoch_yr": fit.ref_epoch_yr,
                "lat_deg": lat,
                "lon_deg": lon,
                "h_m": h,
                **_cov_fields(_x0_covariance(found, cov, fit)),
                "vel_e_m_yr": float(v[0]),
                "vel_n_m_yr": float(v[1]),
                "vel_u_m_yr": float(v[2]),
                "vel_sigma_e_m_yr": float(sv[0]),
                "vel_sigma_n_m_yr": float(sv[1]),
                "vel_sigma_u_m_yr": float(sv[2]),
                "source": _source("velocity fit", found),
                "note": text,
            },
        )
        audit_record(
            actor=actor,
            action="positions_velocity",
            obj=proposal,
            after={
                "from_position_ids": ids,
                "span_yr": fit.span_yr,
                "s0": fit.s0,
                "dof": fit.dof,
                "spread": fit.spread,
            },
            note=text,
            mark=proposal.mark,
        )
    return proposal, fit
