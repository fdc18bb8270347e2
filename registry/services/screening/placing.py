"""Candidates from the registry's records: each mark's position in the job's frame at its epoch, its terms, its rules.

Position per mark: the published one in the job's frame, else the first published one that
transforms to it (``registry.geodesy.frames.transform_position``, which also moves it to the job's
epoch: along the mark's velocity where known; else, in a dynamic frame, with the plate's rigid
motion from the ITRF2020 plate motion model when ``REGISTRY["PLATE"]`` names a plate; else held).
Without a velocity the assumed rate × |Δt| is added (the residual motion relative to the plate where
the model was applied): the job's rate where the coordinates are held in a dynamic frame, its plate-fixed
rate where they are held in a plate-fixed one (a plate-fixed position is held in its own frame and changes
frame at the job's epoch; a dynamic one changes frame first) (``REGISTRY_ASSUMED_RATE_MM_YR`` / ``REGISTRY_ASSUMED_RATE_PLATE_FIXED_MM_YR`` as a new job's defaults). The σ that epoch change adds per axis is the *drift* term (horizontal: the
larger of east and north). When the position's frame differs from the job's, the frame change's
stated accuracy (PROJ/EPSG, metres, no confidence level stated) is read as a 1σ per axis and added in
quadrature to the *base* term (``rtk.frame_change_sigma_mm``; 0 m "exact by definition" and an
unstated accuracy add nothing).

Base σ from the position's covariance: per-axis horizontal √λmax of the E/N block, vertical √cov_uu
(see ``registry.geodesy.rtk``), plus the frame-change term.
"""

from __future__ import annotations

import datetime as dt
import math

from registry.formatting import format_frame
from registry.geodesy import rtk
from registry.geodesy.frames import FrameTransformError, assumed_rate_in, transform_position
from registry.models import Position
from registry.selectors.screening import MarkRecords
from registry.services.screening import rules
from registry.services.screening.params import ScreeningSettings
from registry.services.screening.result import Candidate


def years_between(earlier: dt.date, later: dt.date) -> float:
    """Years of 365.25 days from ``earlier`` to ``later``."""
    return (later - earlier).days / 365.25


def candidates_from_records(records: list[MarkRecords], s: ScreeningSettings, as_of: dt.date) -> list[Candidate]:
    """One candidate per mark, placed in the job's frame and epoch, with the rules' reasons."""
    out = []
    for rec in records:
        mark = rec.mark
        pubs = list(rec.published)
        pubs.sort(key=lambda p: p.frame_epsg != s.frame_epsg)  # the job's own frame first (stable sort)
        cand = Candidate(mark=mark, reasons=[])
        transformable: bool | None = None if not pubs else False
        for p in pubs:
            try:
                place_position(cand, p, s)
            except FrameTransformError as exc:
                cand.warnings.append(
                    f"{mark.code}: its position in EPSG:{p.frame_epsg} at epoch {p.epoch_yr:.3f} cannot be used: {exc}"
                )
                continue
            transformable = True
            break
        if transformable and s.vertical_deliverable == "orthometric" and rec.height is not None:
            hold_orthometric_height(cand, rec.height)
        good = rec.last_intact_on
        facts = rules.MarkFacts(
            status=rec.status,  # as of the screening's date
            sky_view=mark.sky_view,
            last_visit_condition=rec.last_visit_finding,
            years_since_good_visit=None if good is None else years_between(good, as_of),
            has_published_position=bool(pubs),
            transformable=transformable,
        )
        cand.reasons = rules.rule_reasons(facts, recovery_years=s.recovery_years)
        if cand.unmodelled_hold_yr > rules.DYNAMIC_HOLD_LIMIT_YR:
            # Held in ITRF (or WGS 84) across the gap with neither velocity nor plate model: the
            # plate's centimetres a year are missing from the coordinates, not just from σ.
            cand.reasons.append(rules.REASON_EPOCH_GAP_DYNAMIC)
        if cand.lat_deg is None:  # no usable position: place it by its search location, for the map only
            cand.lat_deg, cand.lon_deg = mark.search_lat_deg, mark.search_lon_deg
        out.append(cand)
    return out


def hold_orthometric_height(cand: Candidate, height) -> None:
    """Orthometric heights delivered from a base that has one on record: the crew holds that height, so its σ is
    the base's vertical term (in place of the ellipsoidal σ and any frame change, which do not reach a height in
    a vertical datum). The rover's H = H_base + Δh − ΔN: the relative geoid error ΔN is the separate geoid term."""
    sigma_mm = float(height.sigma_m) * 1000.0
    if height.method == "levelled":
        what = f"its levelled orthometric height ({format_frame(height.datum_epsg)}), σ {sigma_mm:.1f} mm"
    else:
        model = f" {height.geoid_model}" if height.geoid_model else ""
        what = f"its orthometric height from the geoid model{model} ({format_frame(height.datum_epsg)}), σ {sigma_mm:.1f} mm"
    cand.base_v_mm = sigma_mm
    cand.height_note = what + ", held instead of the ellipsoidal σ"


def _mm3(values_m: tuple[float, ...]) -> tuple[float, float, float]:
    """East, north, up in metres (or m/yr) as millimetres (mm/yr)."""
    e, n, u = (float(v) * 1e3 for v in values_m)
    return e, n, u


def place_position(cand: Candidate, p: Position, s: ScreeningSettings) -> None:
    """Move position ``p`` to the job's frame and epoch; fill the base and drift terms."""
    velocity = sigma = None
    # a velocity without its σ: the assumed rate of the kind of frame the velocity is given in (the position's)
    rate_mm_yr = assumed_rate_in(
        p.frame_epsg, dynamic_mm_yr=s.assumed_rate_mm_yr, plate_fixed_mm_yr=s.assumed_rate_plate_fixed_mm_yr
    )
    if p.has_velocity:
        velocity = (p.vel_e_m_yr, p.vel_n_m_yr, p.vel_u_m_yr)
        rate_m_yr = rate_mm_yr / 1000.0
        sigma = tuple(
            rate_m_yr if v is None else v for v in (p.vel_sigma_e_m_yr, p.vel_sigma_n_m_yr, p.vel_sigma_u_m_yr)
        )
        cand.velocity_mm_yr = _mm3(velocity)
        cand.velocity_sigma_mm_yr = _mm3(sigma)
    r = transform_position(
        p.lat_deg,
        p.lon_deg,
        p.h_m,
        from_epsg=p.frame_epsg,
        from_epoch_yr=p.epoch_yr,
        to_epsg=s.frame_epsg,
        to_epoch_yr=s.epoch_yr,
        velocity_enu_m_yr=velocity,
        velocity_sigma_enu_m_yr=sigma,
        assumed_rate_mm_yr=s.assumed_rate_mm_yr,
        assumed_rate_plate_fixed_mm_yr=s.assumed_rate_plate_fixed_mm_yr,
        plate=s.plate or None,
    )
    cand.position = p
    cand.lat_deg, cand.lon_deg, cand.h_m = float(r.lat_deg), float(r.lon_deg), float(r.h_m)
    se, sn, su = (float(v) for v in r.added_sigma_enu_m)
    cand.drift_h_mm, cand.drift_v_mm = max(se, sn) * 1e3, su * 1e3
    bh, bv = rtk.base_sigma_from_covariance_mm(p.cov_ee_m2, p.cov_en_m2, p.cov_nn_m2, p.cov_uu_m2)
    cand.position_h_mm, cand.position_v_mm = float(bh), float(bv)
    fc = 0.0
    notes = []
    if p.frame_epsg != s.frame_epsg:
        for st in r.steps:
            if st.kind != "frame_change":
                continue
            term = rtk.frame_change_sigma_mm(st.accuracy_m)
            fc = math.hypot(fc, term)
            if st.accuracy_m is None:
                notes.append(f"frame change {st.from_label} → {st.to_label}: accuracy not stated, nothing added")
            elif term == 0.0:
                notes.append(f"frame change {st.from_label} → {st.to_label}: stated exact (0 m), adds nothing")
            else:
                notes.append(
                    f"+ frame change {st.from_label} → {st.to_label}: stated accuracy {st.accuracy_m:g} m, "
                    f"read as 1σ per axis ({term:.1f} mm, horizontal and vertical)"
                )
    cand.frame_change_mm = fc
    cand.frame_change_note = "; ".join(notes)
    cand.base_h_mm, cand.base_v_mm = math.hypot(float(bh), fc), math.hypot(float(bv), fc)
    cand.steps = [st.as_dict() for st in r.steps]
    cand.warnings.extend(r.warnings)
    cand.unmodelled_hold_yr = r.unmodelled_dynamic_hold_yr
