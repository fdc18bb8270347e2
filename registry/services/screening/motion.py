"""Each base's motion relative to the site, from the deliverable epoch up to the field date.

A rover point is computed from the base's coordinates held at the deliverable epoch. If the base
moves differently from the ground the site stands on, every rover point inherits the difference:

    offset = (v_site − v_base) · (t_field − t_deliverable)            (per axis, mm)

- ``v_base``: the base position's published velocity (in its own frame).
- ``v_site``: the motion the site shares: the per-axis median of the published velocities of the
  marks within the maximum baseline of the site whose positions are in the same frame as the base's
  (at least :data:`SITE_VELOCITY_MIN_MARKS`), with the median's standard error; otherwise zero in a
  plate-fixed frame (the frame is fixed to the plate the site is on) with the job's plate-fixed rate
  as its uncertainty; in a dynamic frame without enough velocities, no offset is predicted and the
  job's dynamic rate is the uncertainty.
- A base without a velocity is assumed to move with the site: no offset; its uncertainty is the
  assumed rate of the job's kind of frame (plate-fixed or dynamic) × |Δt|. (The scatter of the
  nearby velocities is not used for it: marks that get velocities are usually the monitored,
  moving ones, so their scatter would overstate how ordinary marks move.)

The budget term per axis is √(offset² + (σ_rel · |Δt|)²), σ_rel = √(σ_v,base² + σ_site²) with σ_site
the median's standard error (base with a velocity); the
horizontal offset is the length of the east/north offset (:func:`registry.geodesy.rtk.relative_motion_mm`).
A term larger than a third of the tolerance gets a warning. The coordinate-epoch → deliverable-epoch
change is a separate term (*drift*, :mod:`registry.services.screening.placing`).
"""

from __future__ import annotations

import datetime as dt

import numpy as np

from registry.geodesy import rtk
from registry.geodesy.frames import date_to_decimal_year
from registry.services.screening.params import ScreeningSettings
from registry.services.screening.result import Candidate

#: Fewest published velocities needed to take their median as the site's motion.
SITE_VELOCITY_MIN_MARKS = 3
#: A motion term above this fraction of the tolerance (H or V) gets a warning.
MOTION_WARN_FRACTION = 1.0 / 3.0


def field_epoch_yr(s: ScreeningSettings, as_of: dt.date) -> tuple[dt.date, float]:
    """The field date (the job's, else the screening's date) and its decimal year."""
    day = s.field_date or as_of
    return day, date_to_decimal_year(day)


def site_velocities(
    cands: list[Candidate], s: ScreeningSettings, near_m: float
) -> dict[int, tuple[np.ndarray, np.ndarray, np.ndarray, int]]:
    """Per position frame (EPSG): the median velocity of nearby marks, their scatter about it, the median's
    standard error (mm/yr each, :func:`registry.geodesy.rtk.median_velocity_mm_yr`) and the count.

    Nearby: within ``near_m`` of the site's reference point (the caller passes the site radius plus
    the maximum baseline). Frames with fewer than :data:`SITE_VELOCITY_MIN_MARKS` velocities are left out.
    """
    groups: dict[int, list[tuple[float, float, float]]] = {}
    for c in cands:
        if c.velocity_mm_yr is None or c.position is None or not (c.distance_m <= near_m):
            continue
        groups.setdefault(c.position.frame_epsg, []).append(c.velocity_mm_yr)
    out = {}
    for epsg, vels in groups.items():
        if len(vels) >= SITE_VELOCITY_MIN_MARKS:
            med, scatter, se = rtk.median_velocity_mm_yr(np.array(vels))
            out[epsg] = (med, scatter, se, len(vels))
    return out


def apply_site_motion(cands: list[Candidate], s: ScreeningSettings, as_of: dt.date, *, near_m: float) -> None:
    """Fill every placed candidate's motion term (``distance_m``: from the site's reference point)."""
    day, field_yr = field_epoch_yr(s, as_of)
    years = field_yr - s.epoch_yr
    site = site_velocities(cands, s, near_m)
    for c in cands:
        if c.position is None:
            continue
        group = site.get(c.position.frame_epsg)
        if group is not None:
            v_site, _scatter, se_site, n = group
            site_words = (
                f"site motion: median of {n} published velocities within the maximum baseline "
                f"({v_site[0]:+.1f}, {v_site[1]:+.1f}, {v_site[2]:+.1f} mm/yr east, north, up)"
            )
        elif not s.frame_is_dynamic:
            v_site = np.zeros(3)
            se_site = np.full(3, s.assumed_rate_plate_fixed_mm_yr)
            site_words = (
                f"site motion: none in the plate-fixed frame, ± {s.assumed_rate_plate_fixed_mm_yr:g} mm/yr "
                "(assumed rate; too few published velocities nearby)"
            )
        else:
            v_site = None
            se_site = np.full(3, s.assumed_rate_mm_yr)
            site_words = f"site motion unknown (too few published velocities nearby), ± {s.assumed_rate_mm_yr:g} mm/yr"
        if c.velocity_mm_yr is None or v_site is None:
            # Without its own velocity a base is taken to move with the site, give or take the assumed rate of
            # the job's kind of frame (the site's own figure, in a dynamic frame without enough velocities).
            sig = np.full(3, s.epoch_rate_mm_yr) if c.velocity_mm_yr is None else se_site
            h, v, off = rtk.relative_motion_mm(np.zeros(3), np.zeros(3), sig, years)
            base_words = "no velocity: assumed to move with the site" if c.velocity_mm_yr is None else "own velocity"
            c.motion_offset_mm = None
        else:
            sig = np.hypot(np.asarray(c.velocity_sigma_mm_yr), se_site)
            h, v, off = rtk.relative_motion_mm(v_site, np.asarray(c.velocity_mm_yr), sig, years)
            base_words = (
                f"own velocity ({c.velocity_mm_yr[0]:+.1f}, {c.velocity_mm_yr[1]:+.1f}, "
                f"{c.velocity_mm_yr[2]:+.1f} mm/yr)"
            )
            c.motion_offset_mm = (float(off[0]), float(off[1]), float(off[2]))
        c.motion_h_mm, c.motion_v_mm = float(h), float(v)
        c.motion_note = (
            f"from the deliverable epoch {s.epoch_yr:.3f} to the field date {day.isoformat()} "
            f"({years:+.2f} yr); {base_words}; {site_words}"
        )
        if c.motion_offset_mm is not None:
            e, n_, u = c.motion_offset_mm
            c.motion_note += f"; predicted offset {e:+.1f} / {n_:+.1f} / {u:+.1f} mm east / north / up"
        limit_h, limit_v = s.tol_h_mm * MOTION_WARN_FRACTION, s.tol_v_mm * MOTION_WARN_FRACTION
        if c.motion_h_mm > limit_h or c.motion_v_mm > limit_v:
            c.warnings.append(
                f"{c.mark.code} moves relative to the site by about {c.motion_h_mm:.1f} mm horizontally and "
                f"{c.motion_v_mm:.1f} mm vertically between the deliverable epoch and the field date, more than a "
                f"third of the tolerance ({limit_h:.1f} / {limit_v:.1f} mm): prefer another base, or publish a "
                "position of it at an epoch near the field date."
            )
