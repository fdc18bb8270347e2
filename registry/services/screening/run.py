"""Base screening of a stored job or an ad-hoc site (reads only, nothing is written).

Steps:

1. Candidates: every mark within ``site radius + 1.25 × maximum baseline`` of the site's reference
   point (:mod:`registry.selectors.screening`), so marks just beyond the baseline limit are listed,
   excluded, with their reason.
2. Each mark placed in the job's frame at its epoch with its base and drift terms, and the exclusion
   rules applied (:mod:`registry.services.screening.placing`, :mod:`registry.services.screening.rules`).
3. Height difference: the largest |Δh| from the base to the site's given ellipsoidal heights (GeoJSON
   third coordinates), reported per candidate with a warning above ``rtk.HEIGHT_DIFFERENCE_WARN_M``; it
   does not enter the budget.
4. The pure core (``registry.geodesy.rtk.screen_candidates``) on the site's local plane.
5. The chosen bases, the check marks (:mod:`registry.services.screening.checks`) and the statement
   (:mod:`registry.services.screening.statement`).
"""

from __future__ import annotations

import datetime as dt
import math

import numpy as np
from django.core.exceptions import ValidationError

from registry.geodesy import geodesic, rtk
from registry.geodesy import site as site_geo
from registry.roles import Ability
from registry.selectors.screening import screening_records
from registry.services.access import access_job_by_code, require_ability
from registry.services.screening import rules
from registry.services.screening.checks import choose_check_marks
from registry.services.screening.deliverable import deliverable_grid_at_site
from registry.services.screening.motion import apply_site_motion, field_epoch_yr
from registry.services.screening.params import ScreeningSettings, settings_from_data, settings_from_job
from registry.services.screening.placing import candidates_from_records
from registry.services.screening.result import Candidate, ScreeningResult
from registry.services.screening.statement import screening_statement

#: Candidates are searched within site radius + this factor × maximum baseline.
SEARCH_FACTOR = 1.25
#: Most candidates considered (nearest first).
MAX_CANDIDATES = 5_000


def run_screening(s: ScreeningSettings, *, as_of: dt.date | None = None) -> ScreeningResult:
    """Screen the marks of the registry for ``s`` (no permission check: callers do that)."""
    as_of = as_of or dt.datetime.now(dt.UTC).date()
    plane = site_geo.site_plane(s.site)
    try:
        grid = site_geo.build_site_grid(s.site, plane, s.grid_spacing_m)
    except site_geo.SiteError as exc:
        raise ValidationError({"grid_spacing_m": ValidationError(exc.message, code=exc.code)}) from None
    radius = site_geo.site_radius_m(s.site, plane) + SEARCH_FACTOR * s.max_baseline_m
    records = screening_records(
        lat_deg=s.site.ref_lat_deg,
        lon_deg=s.site.ref_lon_deg,
        radius_m=radius,
        as_of=as_of,
        limit=MAX_CANDIDATES,
        with_heights=s.vertical_deliverable == "orthometric",
    )
    cands = candidates_from_records(records, s, as_of)
    # an ad-hoc site has no deliverable grid (it is a job setting)
    grid_label, warnings = (
        deliverable_grid_at_site(s.site, frame_epsg=s.frame_epsg, grid=s.grid) if s.job_code else ("", [])
    )
    if not cands:
        return ScreeningResult(
            s,
            as_of,
            plane,
            grid,
            [],
            None,
            None,
            [],
            [],
            f"No marks in the registry within {radius / 1000:.1f} km of the site. Nothing can serve as a base.",
            warnings,
            grid_label=grid_label,
        )
    k = len(cands)
    lat = np.array([c.lat_deg for c in cands], dtype=float)
    lon = np.array([c.lon_deg for c in cands], dtype=float)
    ce, cn = plane.to_local_m(lat, lon)
    # GRS80 geodesics from the site's reference point (job frames are GRS80-based or within mm of it here).
    inv = geodesic.inverse(np.full(k, s.site.ref_lat_deg), np.full(k, s.site.ref_lon_deg), lat, lon)
    az, geodesic_m = inv.azimuth12_deg, inv.distance_m
    for i, c in enumerate(cands):
        c.distance_m = float(geodesic_m[i])  # from the reference point; the site's nearest point below
    apply_site_motion(cands, s, as_of, near_m=site_geo.site_radius_m(s.site, plane) + s.max_baseline_m)
    usable = np.array([not c.reasons for c in cands])

    def terms(name: str) -> np.ndarray:
        return np.nan_to_num(np.array([getattr(c, name) for c in cands], dtype=float), nan=0.0)

    core = rtk.screen_candidates(
        grid.e_m,
        grid.n_m,
        grid.is_cell,
        ce,
        cn,
        base_h_mm=terms("base_h_mm"),
        base_v_mm=terms("base_v_mm"),
        drift_h_mm=terms("drift_h_mm"),
        drift_v_mm=terms("drift_v_mm"),
        motion_h_mm=terms("motion_h_mm"),
        motion_v_mm=terms("motion_v_mm"),
        geoid_v_mm=s.geoid_v_mm,
        usable=usable,
        model=s.model,
        tol_h_mm=s.tol_h_mm,
        tol_v_mm=s.tol_v_mm,
        max_baseline_m=s.max_baseline_m,
    )
    base_h = np.array([math.nan if c.position is None else c.h_m for c in cands], dtype=float)
    max_dh = rtk.max_abs_height_difference_m(base_h, np.array(s.site.heights_m, dtype=float))
    for i, c in enumerate(cands):
        c.e_m, c.n_m = float(ce[i]), float(cn[i])
        if s.site.is_point:  # the exact geodesic distance (the core's planar one agrees to < 1e-5)
            c.distance_m = c.max_distance_m = float(geodesic_m[i])
        else:  # nearest and farthest evaluation point of the polygon, on the local plane
            c.distance_m = float(core.min_distance_m[i])
            c.max_distance_m = float(core.max_distance_m[i])
        c.azimuth_deg = None if c.distance_m < 0.001 else float(az[i]) % 360.0
        c.reaches_site = bool(core.reaches_site[i])
        if core.beyond_baseline[i]:
            c.reasons.append(rules.REASON_BEYOND_MAX_BASELINE)
        if c.position is not None:
            c.h95_mm = float(core.worst_h95_mm[i])
            c.v95_mm = float(core.worst_v95_mm[i])
            c.margin_mm = float(core.margin_mm[i])
            c.coverage = float(core.coverage[i])
            c.max_dh_m = float(max_dh[i])
            if c.max_dh_m > rtk.HEIGHT_DIFFERENCE_WARN_M:
                c.warnings.append(
                    f"{c.mark.code} is up to {c.max_dh_m:.0f} m above or below the site (ellipsoidal heights): "
                    f"beyond {rtk.HEIGHT_DIFFERENCE_WARN_M:.0f} m, unmodelled troposphere degrades RTK, mostly in "
                    "height (common practice); the budget does not include it."
                )
            c.budget = rtk.error_budget_mm(
                core.max_distance_m[i],
                model=s.model,
                base_h_mm=c.base_h_mm,
                base_v_mm=c.base_v_mm,
                drift_h_mm=c.drift_h_mm,
                drift_v_mm=c.drift_v_mm,
                motion_h_mm=c.motion_h_mm,
                motion_v_mm=c.motion_v_mm,
                geoid_v_mm=s.geoid_v_mm,
            )
    ordered = [cands[i] for i in core.order]
    for rank, c in enumerate(ordered, start=1):
        c.rank = rank
    pair = None if core.pair is None else (cands[core.pair[0]], cands[core.pair[1]])
    if pair is not None and pair[1].rank < pair[0].rank:
        pair = (pair[1], pair[0])
    usable_ranked = [c for c in ordered if not c.excluded]
    chosen = _choose_bases(core, cands, usable_ranked, pair)
    assignment = _service_assignment(core, grid, ce, cn, s, [cands.index(c) for c in chosen])
    checks = choose_check_marks(s, ordered, chosen)
    for c in chosen:
        for w in c.warnings:
            if w not in warnings:
                warnings.append(w)
    statement = screening_statement(s, core, usable_ranked, pair, chosen)
    return ScreeningResult(
        s,
        as_of,
        plane,
        grid,
        ordered,
        core,
        pair,
        chosen,
        checks,
        statement,
        warnings,
        assignment=assignment,
        field_date=field_epoch_yr(s, as_of)[0],
        grid_label=grid_label,
    )


def _choose_bases(core, cands: list[Candidate], usable_ranked: list[Candidate], pair) -> list[Candidate]:
    """The chosen bases: coverage first, then margin.

    The best single base when it covers the whole site; else the best pair when it covers the
    whole site; else the greedy cover (up to ``rtk.MAX_COVER_BASES``) when it covers more than the
    pair; else the pair when it covers more than one base; else the best single base (by coverage).
    """
    if not usable_ranked:
        return []
    best = usable_ranked[0]
    if best.covers_site:
        return [best]
    if pair is not None and core.pair_worst_margin_mm >= 0:
        return list(pair)
    cover = [cands[i] for i in core.cover]
    pair_cov = core.pair_coverage if pair is not None else best.coverage
    if len(cover) > 2 and core.cover_coverage > pair_cov:
        return cover
    if pair is not None:
        return list(pair)
    return [best]


def _service_assignment(core, grid, ce, cn, s: ScreeningSettings, idx: list[int]) -> np.ndarray | None:
    """Per site point, which chosen base serves it (position in ``idx``; −1: none within tolerance)."""
    if not idx or core is None:
        return None
    m = rtk.point_margins_mm(
        idx,
        grid.e_m,
        grid.n_m,
        ce,
        cn,
        core.const_h2,
        core.const_v2,
        model=s.model,
        tol_h_mm=s.tol_h_mm,
        tol_v_mm=s.tol_v_mm,
        max_baseline_m=s.max_baseline_m,
    )
    return rtk.assign_service_areas(m)


def job_screen(*, actor, code: str, as_of: dt.date | None = None) -> ScreeningResult:
    """Screen the stored job ``code`` (any role that may view the registry)."""
    job = access_job_by_code(actor, code, ability=Ability.VIEW)
    return run_screening(settings_from_job(job), as_of=as_of)


def site_screen(*, actor, data: dict, as_of: dt.date | None = None) -> ScreeningResult:
    """Screen an ad-hoc site given as job fields (``site_geojson``, ``frame_epsg``, ``epoch_yr``,
    ``tol_h_mm``, ``tol_v_mm`` and optionally any screening setting of a job)."""
    require_ability(actor, Ability.VIEW)
    return run_screening(settings_from_data(data), as_of=as_of)
