"""Reads for the fieldwork and position pages: the pre-publication compatibility check, latest visits.

Compatibility check ("notice movement", brief §1 step 3 and §3): a proposed position is
compared with the currently published position of the same mark *in the same frame*.
The difference d = proposed − published in local east/north/up at the published point,
Σ = Σpub + Σobs, T = dᵀΣ⁻¹d against χ²(0.95, k) for k = 2 (horizontal), 1 (vertical) and 3
(3D), computed by :func:`registry.geodesy.stats.compatibility_test` (Koch 1999 §4.2; the
tests' worked example is invented and recomputed with SciPy 1.17.1).

Epochs: when the two epochs differ, the *published* position is brought to the proposed
position's epoch first, in the same frame, with :func:`registry.geodesy.frames.transform_position`:
along the published position's own velocity (its velocity sigmas added ×|Δt|) if it has one,
else along the proposed position's velocity, else (in a dynamic frame with
``settings.REGISTRY["PLATE"]`` set) moved with that plate's rigid motion from the ITRF2020
plate motion model, else held. Without a velocity the office's assumed rate
(``settings.REGISTRY["ASSUMED_RATE_MM_YR"]`` per axis × |Δt|) is added to the published
variances. What was done is returned as text for the page, with the frames module's warnings.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from django.conf import settings

from registry.geodesy.accuracy import ComputationInputError
from registry.geodesy.frames import FrameTransformError, transform_position
from registry.geodesy.stats import compatibility_test, enu_difference_m
from registry.models import Position, PositionState, Visit
from registry.selectors.conversion import configured_plate

#: Epochs closer than this are treated as equal (decimal years; about 9 hours).
SAME_EPOCH_TOLERANCE_YR = 1e-3

_COMPONENT_LABELS = (("horizontal", "Horizontal (E, N)"), ("vertical", "Vertical (U)"), ("3d", "3D (E, N, U)"))


def _cov_enu_m2(p: Position) -> np.ndarray:
    return np.array(
        [
            [p.cov_ee_m2, p.cov_en_m2, p.cov_eu_m2],
            [p.cov_en_m2, p.cov_nn_m2, p.cov_nu_m2],
            [p.cov_eu_m2, p.cov_nu_m2, p.cov_uu_m2],
        ],
        dtype=float,
    )


@dataclass(frozen=True)
class CompatibilityRow:
    label: str
    components: str
    statistic: float  # T
    dof: int  # k
    critical: float
    p_value: float
    compatible: bool


@dataclass
class PositionCheck:
    """The comparison shown before publishing; ``rows`` empty when nothing could be compared (see ``reason``)."""

    proposed: Position
    published: Position | None
    reason: str = ""
    epoch_steps: list[str] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)
    d_enu_m: tuple[float, float, float] | None = None
    added_sigma_enu_m: tuple[float, float, float] | None = None
    rows: list[CompatibilityRow] = field(default_factory=list)

    @property
    def compared(self) -> bool:
        return bool(self.rows)

    @property
    def all_compatible(self) -> bool:
        return all(r.compatible for r in self.rows)


def position_compatibility(*, position: Position) -> PositionCheck:
    """Compare a proposed position with the published one of the same mark and frame (see module docstring)."""
    published = (
        Position.objects.filter(mark_id=position.mark_id, frame_epsg=position.frame_epsg, state=PositionState.PUBLISHED)
        .exclude(pk=position.pk)
        .first()
    )
    check = PositionCheck(proposed=position, published=published)
    if published is None:
        check.reason = (
            f"No position of this mark is published in EPSG:{position.frame_epsg}; there is nothing to compare with. "
            "Publishing makes this the mark's first position in that frame."
        )
        return check

    lat, lon, h = published.lat_deg, published.lon_deg, published.h_m
    cov_pub = _cov_enu_m2(published)
    if abs(published.epoch_yr - position.epoch_yr) > SAME_EPOCH_TOLERANCE_YR:
        velocity, velocity_sigma, whose = None, None, ""
        rate = float(settings.REGISTRY.get("ASSUMED_RATE_MM_YR", 2.0))
        # A velocity without a stated σ gets the assumed unmodelled rate per axis, as base screening
        # does (services.screening.placing.place_position), so the two never disagree about the same epoch gap.
        if published.has_velocity:
            source = published
            whose = "the published position's velocity"
        elif position.has_velocity:
            source = position
            whose = "the proposed position's velocity"
        else:
            source = None
        if source is not None:
            velocity = (source.vel_e_m_yr, source.vel_n_m_yr, source.vel_u_m_yr)
            velocity_sigma = tuple(
                rate / 1000.0 if v is None else v
                for v in (source.vel_sigma_e_m_yr, source.vel_sigma_n_m_yr, source.vel_sigma_u_m_yr)
            )
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
                assumed_rate_mm_yr=rate,
                plate=configured_plate(),
            )
        except FrameTransformError as exc:
            check.reason = f"The published position could not be brought to epoch {position.epoch_yr:.3f}: {exc}"
            return check
        lat, lon, h = float(moved.lat_deg), float(moved.lon_deg), float(moved.h_m)
        added = tuple(float(np.asarray(s)) for s in moved.added_sigma_enu_m)
        cov_pub = cov_pub + np.diag(np.square(added))
        check.added_sigma_enu_m = added
        intro = (
            f"The published position (epoch {published.epoch_yr:.3f}) was brought to the proposed epoch "
            f"{position.epoch_yr:.3f} in the same frame" + (f", along {whose}." if whose else ".")
        )
        check.epoch_steps = [intro, *(s.description for s in moved.steps)]
        check.warnings = list(moved.warnings)
    try:
        d = enu_difference_m(
            published_lat_deg=lat,
            published_lon_deg=lon,
            published_h_m=h,
            observed_lat_deg=position.lat_deg,
            observed_lon_deg=position.lon_deg,
            observed_h_m=position.h_m,
            published_frame_epsg=published.frame_epsg,
            published_epoch_yr=position.epoch_yr,
            observed_frame_epsg=position.frame_epsg,
            observed_epoch_yr=position.epoch_yr,
        )
        cov_obs = _cov_enu_m2(position)
        for components, label in _COMPONENT_LABELS:
            r = compatibility_test(d, cov_pub, cov_obs, components=components)
            check.rows.append(
                CompatibilityRow(
                    label,
                    components,
                    float(r.statistic),
                    int(r.dof),
                    float(r.critical),
                    float(r.p_value),
                    bool(r.compatible),
                )
            )
    except ComputationInputError as exc:
        check.rows = []
        check.reason = f"The test could not be computed: {exc}"
        return check
    check.d_enu_m = (float(d[0]), float(d[1]), float(d[2]))
    return check


def latest_visits(*, mark_ids: list[int]) -> dict[int, Visit]:
    """The latest visit of each mark (by date, then recording time), in one query."""
    latest: dict[int, Visit] = {}
    if not mark_ids:
        return latest
    for visit in Visit.objects.filter(mark_id__in=mark_ids).order_by("mark_id", "-visited_on", "-created_at", "-pk"):
        latest.setdefault(visit.mark_id, visit)
    return latest
