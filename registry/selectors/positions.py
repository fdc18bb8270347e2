"""Reads of positions for the pages and the API, and the accuracy the registry states for one.

A position's network accuracy (FGDC-STD-007.2-1998 Part 2, 95 %) is computed here from its stored
covariance, once, for the API and the mark page: horizontal, the radius of the 95 % circle
r95 = K(C)·σmax of the east/north block (:func:`registry.geodesy.accuracy.fgdc_horizontal_95_m`);
ellipsoid height, 1.9600·σ_u. It is a network accuracy only when the covariance expresses the
position with respect to the datum (the statements say so where they are printed).
"""

from __future__ import annotations

from dataclasses import dataclass

from django.db.models import QuerySet

from registry.geodesy.accuracy import fgdc_horizontal_95_m, sigma_from_variance_m, vertical_95_m
from registry.models import Mark, Position, PositionState

#: What a position's display needs beside its own row (no query per row).
_RELATED = ("mark", "created_by", "decided_by")


@dataclass(frozen=True)
class NetworkAccuracy:
    """FGDC network accuracy at 95 % of one position (m)."""

    horizontal_95_m: float
    ellipsoid_height_95_m: float


def network_accuracy(position: Position) -> NetworkAccuracy:
    """The position's FGDC network accuracy at 95 % from its stored covariance (see the module docstring).

    >>> p = Position(cov_ee_m2=1e-4, cov_en_m2=0.0, cov_nn_m2=1e-4, cov_uu_m2=4e-4)
    >>> a = network_accuracy(p)
    >>> round(a.horizontal_95_m, 9), round(a.ellipsoid_height_95_m, 9)  # K(1)·0.01 = 2.450762·0.01; 1.96·0.02
    (0.02450762, 0.0392)
    """
    h = fgdc_horizontal_95_m(position.cov_ee_m2, position.cov_en_m2, position.cov_nn_m2)
    v = vertical_95_m(sigma_from_variance_m(position.cov_uu_m2))
    return NetworkAccuracy(horizontal_95_m=float(h), ellipsoid_height_95_m=float(v))


def mark_positions(*, mark: Mark, state: str = "") -> QuerySet[Position]:
    """The mark's positions (one state, or every state), newest first."""
    qs = Position.objects.filter(mark=mark).select_related(*_RELATED)
    if state:
        qs = qs.filter(state=state)
    return qs.order_by("-created_at", "-pk")


def published_positions(*, mark: Mark) -> list[Position]:
    """The mark's published positions, the latest decided first."""
    return list(
        Position.objects.filter(mark=mark, state=PositionState.PUBLISHED)
        .select_related(*_RELATED)
        .order_by("-decided_at", "-pk")
    )


def position_for_display(*, position_id: int) -> Position:
    """One position with what its display needs (it was reached through the gatekeeper or just written)."""
    return Position.objects.select_related(*_RELATED).get(pk=position_id)


def positions_in_states(*, mark: Mark, states) -> list[Position]:
    """The mark's positions in ``states``, by frame, then coordinate epoch (the combine page's solutions)."""
    return list(Position.objects.filter(mark=mark, state__in=states).order_by("frame_epsg", "epoch_yr", "pk"))


def frames_in_use() -> list[int]:
    """Every frame (EPSG code) a position of the registry is in, in code order."""
    return list(Position.objects.order_by("frame_epsg").values_list("frame_epsg", flat=True).distinct())
