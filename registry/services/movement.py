"""The movement check: a proposed position against the mark's published one, in every path.

Proposing (``services.positions.position_propose``, so the page, the API, commands and imports alike)
stores a check (stage "proposed"); a check that shows possible movement makes the mark suspect
(``services.suspect.mark_make_suspect``). Publishing names the published position it was compared
with; if the mark's published position changed since, publishing is refused (``compared_with_changed``,
HTTP 409); otherwise the check is run again under the mark's lock and stored with the decision (stage
"published"), and publishing against "possible movement" needs a note (the reason), which is audited.

What is compared with what
--------------------------
* The published position of the mark **in the proposal's frame**; if there is none, its most recently
  published position in any frame (:func:`comparison_target`).
* That position is brought to the proposal's frame and epoch by the geodesy core
  (:func:`registry.geodesy.frames.transform_position`): along the published position's velocity if it
  has one (or the proposal's, when both are in the same frame), else with the office's plate model in a
  dynamic frame, else held with the office's assumed rate per axis × |Δt| added to σ. Each frame
  change's stated accuracy (EPSG/PROJ, metres) is added to σ on every axis, as a standard deviation;
  an accuracy PROJ does not state adds nothing and is warned about.
* d = proposed − published (east/north/up at the published point), Σ = Σpub + added + Σprop, one global
  3D test at the office's level, localised by closed testing, with the smallest detectable movement per
  axis (:mod:`registry.geodesy.movement`, Baarda 1968). When that detectable movement is larger than the
  office's threshold (``REGISTRY["MOVEMENT_DETECTABLE_MM"]``, horizontal and vertical), a warning says so.

Settings (``settings.REGISTRY``): ``MOVEMENT_LEVEL`` (α, default 0.05), ``MOVEMENT_POWER`` (default
0.80), ``MOVEMENT_DETECTABLE_MM`` ((horizontal, vertical), default (20, 40)), ``ASSUMED_RATE_MM_YR`` and
``ASSUMED_RATE_PLATE_FIXED_MM_YR`` (by the kind of frame a position is held in, as in conversions and
screening), ``PLATE``.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
from django.conf import settings
from django.db.models import Case, IntegerField, Value, When

from registry.geodesy.accuracy import ComputationInputError
from registry.geodesy.frames import FrameTransformError, assumed_rate_in, format_epoch, transform_position
from registry.geodesy.movement import MovementResult, movement_test
from registry.geodesy.stats import enu_difference_m
from registry.models import MovementVerdict, Position, PositionState
from registry.selectors.conversion import configured_assumed_rates, configured_plate

#: Epochs closer than this are the same epoch (decimal years; about 9 hours).
SAME_EPOCH_TOLERANCE_YR = 1e-3


@dataclass(frozen=True)
class MovementSettings:
    level: float
    power: float
    detectable_h_m: float
    detectable_v_m: float
    assumed_rate_mm_yr: float
    assumed_rate_plate_fixed_mm_yr: float


def movement_settings() -> MovementSettings:
    """The office's movement-check settings (read when called, never at import)."""
    conf = settings.REGISTRY
    h_mm, v_mm = conf.get("MOVEMENT_DETECTABLE_MM", (20.0, 40.0))
    return MovementSettings(
        level=float(conf.get("MOVEMENT_LEVEL", 0.05)),
        power=float(conf.get("MOVEMENT_POWER", 0.80)),
        detectable_h_m=float(h_mm) / 1000.0,
        detectable_v_m=float(v_mm) / 1000.0,
        **configured_assumed_rates(),
    )


def cov_enu_m2(p: Position) -> np.ndarray:
    return np.array(
        [
            [p.cov_ee_m2, p.cov_en_m2, p.cov_eu_m2],
            [p.cov_en_m2, p.cov_nn_m2, p.cov_nu_m2],
            [p.cov_eu_m2, p.cov_nu_m2, p.cov_uu_m2],
        ],
        dtype=float,
    )


@dataclass
class MovementOutcome:
    """A comparison, not yet stored (:func:`movement_check_store` keeps it)."""

    position: Position
    compared_with: Position | None
    verdict: str
    level: float
    power: float
    result: MovementResult | None = None
    frame_chain: list[str] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)
    reason: str = ""
    added_sigma_enu_m: tuple[float, float, float] = (0.0, 0.0, 0.0)
    used_velocity: bool = False
    above_threshold: bool = False

    @property
    def compared(self) -> bool:
        return self.result is not None

    @property
    def possible_movement(self) -> bool:
        return self.verdict == MovementVerdict.POSSIBLE_MOVEMENT

    def as_dict(self) -> dict[str, Any]:
        """Plain values for the API and the command (millimetres, rounded to 0.01 mm; T and p unrounded)."""
        r = self.result

        def mm(value: float) -> float:
            return round(float(value) * 1000.0, 2)

        return {
            "verdict": self.verdict,
            "verdict_words": MovementVerdict(self.verdict).label,
            "compared_with": None if self.compared_with is None else self.compared_with.pk,
            "level": self.level,
            "power": self.power,
            "d_east_mm": None if r is None else mm(r.d_enu_m[0]),
            "d_north_mm": None if r is None else mm(r.d_enu_m[1]),
            "d_up_mm": None if r is None else mm(r.d_enu_m[2]),
            "t_global": None if r is None else r.statistic,
            "dof": None if r is None else r.dof,
            "critical": None if r is None else r.critical,
            "p_value": None if r is None else r.p_value,
            "moved_horizontal": None if r is None else r.moved_horizontal,
            "moved_vertical": None if r is None else r.moved_vertical,
            "detectable_mm": None
            if r is None
            else {k: mm(v) for k, v in zip(("east", "north", "up"), r.detectable_enu_m, strict=True)},
            "detectable_above_threshold": self.above_threshold,
            "added_sigma_mm": {k: mm(v) for k, v in zip(("east", "north", "up"), self.added_sigma_enu_m, strict=True)},
            "used_velocity": self.used_velocity,
            "frame_chain": list(self.frame_chain),
            "warnings": list(self.warnings),
            "reason": self.reason,
        }


def comparison_target(position: Position) -> Position | None:
    """The published position ``position`` is compared with: same frame first, else the newest in any frame."""
    same_frame_first = Case(
        When(frame_epsg=position.frame_epsg, then=Value(0)), default=Value(1), output_field=IntegerField()
    )
    qs = Position.objects.filter(mark_id=position.mark_id, state=PositionState.PUBLISHED)
    if position.pk is not None:
        qs = qs.exclude(pk=position.pk)
    return qs.annotate(_other_frame=same_frame_first).order_by("_other_frame", "-decided_at", "-id").first()


def movement_compare(*, position: Position, published: Position | None) -> MovementOutcome:
    """Compare ``position`` (saved or not) with ``published`` (see the module docstring). Reads nothing else."""
    return movement_compare_many([(position, published)])[0]


def movement_compare_many(pairs: list[tuple[Position, Position | None]]) -> list[MovementOutcome]:
    """:func:`movement_compare` for many (position, published) pairs: one vectorised test for all of them.

    Each pair's frame change stays its own (the transformation PROJ picks depends on the point's area);
    the statistical test (:func:`registry.geodesy.movement.movement_test`) runs once on the stacked
    differences and covariances, and gives each pair the values it would give it alone.
    """
    conf = movement_settings()
    outcomes: list[MovementOutcome] = []
    ready: list[tuple[MovementOutcome, np.ndarray, np.ndarray, np.ndarray]] = []
    for position, published in pairs:
        prepared = _prepare(position, published, conf)
        if isinstance(prepared, MovementOutcome):
            outcomes.append(prepared)
        else:
            outcomes.append(prepared[0])
            ready.append(prepared)
    results: list[MovementResult | None] | None = None
    if len(ready) > 1:
        try:
            stacked = movement_test(
                np.stack([r[1] for r in ready]), np.stack([r[2] for r in ready]), level=conf.level, power=conf.power
            )
            results = [_one(stacked, i) for i in range(len(ready))]
        except ComputationInputError:
            results = None  # one pair cannot be tested: test each alone, so that only that one says so
    if results is None:
        results = []
        for outcome, d, cov, _added in ready:
            try:
                results.append(movement_test(d, cov, level=conf.level, power=conf.power))
            except ComputationInputError as exc:
                outcome.reason = f"The test could not be computed: {exc}"
                results.append(None)
    for (outcome, _d, _cov, added), result in zip(ready, results, strict=True):
        if result is not None:
            _finish(outcome, result, added, conf)
    return outcomes


def _one(r: MovementResult, i: int) -> MovementResult:
    """Element ``i`` of a stacked result, with the Python scalars a single test gives."""
    return MovementResult(
        level=r.level,
        power=r.power,
        statistic=float(r.statistic[i]),
        dof=r.dof,
        critical=r.critical,
        p_value=float(r.p_value[i]),
        verdict=str(r.verdict[i]),
        statistic_horizontal=float(r.statistic_horizontal[i]),
        p_value_horizontal=float(r.p_value_horizontal[i]),
        moved_horizontal=bool(r.moved_horizontal[i]),
        statistic_vertical=float(r.statistic_vertical[i]),
        p_value_vertical=float(r.p_value_vertical[i]),
        moved_vertical=bool(r.moved_vertical[i]),
        lambda0=r.lambda0,
        detectable_enu_m=r.detectable_enu_m[i],
        d_enu_m=r.d_enu_m[i],
        cov_m2=r.cov_m2[i],
    )


def _prepare(
    position: Position, published: Position | None, conf: MovementSettings
) -> MovementOutcome | tuple[MovementOutcome, np.ndarray, np.ndarray, np.ndarray]:
    """The outcome so far, with the difference, its covariance and the added σ; or the final outcome."""
    outcome = MovementOutcome(
        position=position,
        compared_with=published,
        verdict=MovementVerdict.NOT_COMPARED,
        level=conf.level,
        power=conf.power,
    )
    if published is None:
        outcome.reason = "No position of this mark is published; there is nothing to compare with."
        return outcome
    same_frame = published.frame_epsg == position.frame_epsg
    same_epoch = abs(published.epoch_yr - position.epoch_yr) <= SAME_EPOCH_TOLERANCE_YR
    velocity = velocity_sigma = None
    whose = ""
    source = published if published.has_velocity else (position if same_frame and position.has_velocity else None)
    if source is not None and not same_epoch:
        velocity = (source.vel_e_m_yr, source.vel_n_m_yr, source.vel_u_m_yr)
        # a velocity without its σ: the assumed rate of the kind of frame it is given in (as screening does)
        rate_m_yr = (
            assumed_rate_in(
                source.frame_epsg,
                dynamic_mm_yr=conf.assumed_rate_mm_yr,
                plate_fixed_mm_yr=conf.assumed_rate_plate_fixed_mm_yr,
            )
            / 1000.0
        )
        velocity_sigma = tuple(
            rate_m_yr if v is None else v
            for v in (source.vel_sigma_e_m_yr, source.vel_sigma_n_m_yr, source.vel_sigma_u_m_yr)
        )
        whose = "the published position's velocity" if source is published else "the proposed position's velocity"
    lat, lon, h = published.lat_deg, published.lon_deg, published.h_m
    added = np.zeros(3)
    if same_frame and same_epoch:
        outcome.frame_chain = ["Both positions are in the same frame at the same epoch: compared directly."]
    else:
        try:
            moved = transform_position(
                lat,
                lon,
                h,
                from_epsg=published.frame_epsg,
                from_epoch_yr=published.epoch_yr,
                to_epsg=position.frame_epsg,
                to_epoch_yr=position.epoch_yr,
                velocity_enu_m_yr=velocity,
                velocity_sigma_enu_m_yr=velocity_sigma,
                assumed_rate_mm_yr=conf.assumed_rate_mm_yr,
                assumed_rate_plate_fixed_mm_yr=conf.assumed_rate_plate_fixed_mm_yr,
                plate=configured_plate(),
            )
        except FrameTransformError as exc:
            outcome.reason = (
                f"The published position could not be brought to the proposal's frame and epoch "
                f"(EPSG:{position.frame_epsg}, {format_epoch(position.epoch_yr)}): {exc}"
            )
            return outcome
        lat, lon, h = float(moved.lat_deg), float(moved.lon_deg), float(moved.h_m)
        added = np.array([float(np.asarray(s)) for s in moved.added_sigma_enu_m])
        frame_sigma = 0.0
        for step in moved.steps:
            if step.kind == "frame_change" and step.accuracy_m is not None:
                frame_sigma = float(np.hypot(frame_sigma, step.accuracy_m))
        added = np.sqrt(added**2 + frame_sigma**2)
        intro = (
            f"The published position (EPSG:{published.frame_epsg} at epoch "
            f"{format_epoch(published.epoch_yr)}) was brought to EPSG:{position.frame_epsg} at epoch "
            f"{format_epoch(position.epoch_yr)}" + (f", along {whose}." if whose else ".")
        )
        outcome.frame_chain = [intro, *(s.description for s in moved.steps)]
        if frame_sigma:
            outcome.frame_chain.append(
                f"the frame change's stated accuracy ({frame_sigma * 1000:.0f} mm) added to σ on every axis"
            )
        outcome.warnings = list(moved.warnings)
        outcome.used_velocity = any(s.kind == "velocity" for s in moved.steps)
    try:
        d = enu_difference_m(
            published_lat_deg=lat,
            published_lon_deg=lon,
            published_h_m=h,
            observed_lat_deg=position.lat_deg,
            observed_lon_deg=position.lon_deg,
            observed_h_m=position.h_m,
            published_frame_epsg=position.frame_epsg,
            published_epoch_yr=position.epoch_yr,
            observed_frame_epsg=position.frame_epsg,
            observed_epoch_yr=position.epoch_yr,
        )
        cov = cov_enu_m2(published) + np.diag(added**2) + cov_enu_m2(position)
    except ComputationInputError as exc:
        outcome.reason = f"The test could not be computed: {exc}"
        return outcome
    return outcome, np.asarray(d, dtype=float), cov, added


def _finish(outcome: MovementOutcome, result: MovementResult, added: np.ndarray, conf: MovementSettings) -> None:
    outcome.result = result
    outcome.verdict = result.verdict
    outcome.added_sigma_enu_m = (float(added[0]), float(added[1]), float(added[2]))
    mdb = result.detectable_enu_m
    if max(mdb[0], mdb[1]) > conf.detectable_h_m or mdb[2] > conf.detectable_v_m:
        outcome.above_threshold = True
        outcome.warnings.append(
            f"This check could not have seen a movement smaller than about {mdb[0] * 1000:.0f} mm east, "
            f"{mdb[1] * 1000:.0f} mm north and {mdb[2] * 1000:.0f} mm up (at the {100 * (1 - conf.level):g} % "
            f"level with {100 * conf.power:g} % power); the office asks to detect "
            f"{conf.detectable_h_m * 1000:g} mm horizontally and {conf.detectable_v_m * 1000:g} mm vertically. "
            "A velocity for the mark, or a published position closer in time, makes the check sharper."
        )


__all__ = [
    "SAME_EPOCH_TOLERANCE_YR",
    "MovementOutcome",
    "comparison_target",
    "cov_enu_m2",
    "movement_compare",
    "movement_compare_many",
    "movement_settings",
]
