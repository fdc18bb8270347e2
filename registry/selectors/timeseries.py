"""The mark page's position-history plot: which positions, offsets from which reference, in which frame.

Frame: the one holding most of the mark's positions (ties: the frame of its most recently published
position). Reference: the published position in that frame (else the newest one in it). Only positions in
that frame are plotted, as east/north/up offsets from it computed on that frame's ellipsoid
(``registry.geodesy.conversions.geodetic_to_enu``); positions in other frames are counted and named
beside the plot, never mixed in (carrying them across frames is the position services' business).
The drawing is ``registry.reports.timeseries``.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from registry.geodesy.accuracy import sigma_from_variance_m
from registry.geodesy.conversions import ellipsoid_of_epsg, geodetic_to_enu
from registry.models import Mark, Position, PositionState
from registry.reports.timeseries import K95_1D, SeriesPoint, timeseries_svg


@dataclass
class TimeSeriesPlot:
    svg: str
    frame_epsg: int
    reference: Position
    points: list[SeriesPoint]
    other_frames: dict[int, int]  # EPSG code → positions not plotted
    has_velocity: bool


def mark_timeseries(*, mark: Mark, frame_label=lambda epsg: f"EPSG:{epsg}") -> TimeSeriesPlot | None:
    """The plot of ``mark``'s positions, or ``None`` when it has no position."""
    positions = list(Position.objects.filter(mark=mark).order_by("epoch_yr", "created_at", "pk"))
    if not positions:
        return None
    # the frame holding most of the history (ties: the frame of the most recently published position)
    counts: dict[int, int] = {}
    for p in positions:
        counts[p.frame_epsg] = counts.get(p.frame_epsg, 0) + 1
    latest_published = max(
        (p for p in positions if p.state == PositionState.PUBLISHED),
        key=lambda p: (p.decided_at or p.created_at, p.pk),
        default=None,
    )
    frame = max(
        counts, key=lambda epsg: (counts[epsg], latest_published is not None and latest_published.frame_epsg == epsg)
    )
    published = [p for p in positions if p.state == PositionState.PUBLISHED and p.frame_epsg == frame]
    reference = (
        max(published, key=lambda p: (p.decided_at or p.created_at, p.pk))
        if published
        else max((p for p in positions if p.frame_epsg == frame), key=lambda p: (p.created_at, p.pk))
    )
    same = [p for p in positions if p.frame_epsg == frame]
    others: dict[int, int] = {}
    for p in positions:
        if p.frame_epsg != frame:
            others[p.frame_epsg] = others.get(p.frame_epsg, 0) + 1
    try:
        ellipsoid = ellipsoid_of_epsg(frame)
        kwargs = {"ellipsoid": ellipsoid}
    except (ValueError, RuntimeError):  # not in PROJ: the offsets on GRS80 differ by far less than a millimetre
        kwargs = {}
    lat = np.array([p.lat_deg for p in same])
    lon = np.array([p.lon_deg for p in same])
    h = np.array([p.h_m for p in same])
    e, n, u = geodetic_to_enu(
        lat, lon, h, lat0_deg=reference.lat_deg, lon0_deg=reference.lon_deg, h0_m=reference.h_m, **kwargs
    )
    points = [
        SeriesPoint(
            epoch_yr=p.epoch_yr,
            e_mm=float(e[i]) * 1000.0,
            n_mm=float(n[i]) * 1000.0,
            u_mm=float(u[i]) * 1000.0,
            e95_mm=K95_1D * float(sigma_from_variance_m(p.cov_ee_m2)) * 1000.0,
            n95_mm=K95_1D * float(sigma_from_variance_m(p.cov_nn_m2)) * 1000.0,
            u95_mm=K95_1D * float(sigma_from_variance_m(p.cov_uu_m2)) * 1000.0,
            state=p.state,
            label=f"{p.state} position, epoch {p.epoch_yr:.3f}",
        )
        for i, p in enumerate(same)
    ]
    velocity = None
    if reference.has_velocity:
        velocity = (reference.vel_e_m_yr * 1000.0, reference.vel_n_m_yr * 1000.0, reference.vel_u_m_yr * 1000.0)
    description = (
        f"East, north and up offsets in millimetres of {len(points)} position(s) of {mark.code} in "
        f"{frame_label(frame)}, from the {'published' if published else 'newest'} position at epoch "
        f"{reference.epoch_yr:.3f}, against coordinate epoch; error bars 95 %."
    )
    svg = timeseries_svg(
        points,
        velocity_mm_yr=velocity,
        velocity_epoch_yr=reference.epoch_yr if velocity else None,
        title=f"Position history of {mark.code}",
        description=description,
    )
    return TimeSeriesPlot(
        svg=svg, frame_epsg=frame, reference=reference, points=points, other_frames=others, has_velocity=bool(velocity)
    )
