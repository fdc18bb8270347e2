"""Base screening of a stored job or an ad-hoc site (brief §4; reads only, nothing is written).

Steps:

1. Candidates: every mark within ``site radius + 1.25 × maximum baseline`` of the site's
   reference point, through the nearby-search selector (so marks just beyond the baseline
   limit are listed, excluded, with their reason).
2. Facts per mark: status, sky view, last visit, last *intact* visit (``as_of`` minus it, in
   years of 365.25 days), published positions.
3. Position per mark: the published one in the job's frame, else the first published one
   that transforms to it (``registry.geodesy.frames.transform_position``, which also moves it
   to the job's epoch: along the mark's velocity where known; else, in a dynamic frame, with
   the plate's rigid motion from the ITRF2020 plate motion model when ``REGISTRY["PLATE"]``
   names a plate; else held). Without a velocity the assumed rate × |Δt| is added (the
   residual motion relative to the plate where the model was applied). The σ that epoch
   change adds per axis is the *drift* term (horizontal: the larger of east and north).
   When the position's frame differs from the job's, the frame change's stated accuracy
   (PROJ/EPSG, metres, no confidence level stated) is read as a 1σ per axis and added in
   quadrature to the *base* term (``rtk.frame_change_sigma_mm``; 0 m "exact by definition"
   and an unstated accuracy add nothing). Bases, pairs and check marks published in different
   frames thus each carry their own frame-change uncertainty; the term's description says so.
4. Base σ from the position's covariance: per-axis horizontal √λmax of the E/N block,
   vertical √cov_uu (see ``registry.geodesy.rtk``), plus the frame-change term of step 3.
   Height difference: the largest |Δh| from the base to the site's given ellipsoidal heights
   (GeoJSON third coordinates), reported per candidate with a warning above
   ``rtk.HEIGHT_DIFFERENCE_WARN_M``; it does not enter the budget.
5. The pure core (``registry.geodesy.rtk.screen_candidates``) on the site's local plane.
6. Check marks: marks passing every rule, not one of the chosen bases, within
   ``CHECK_NEAR_M`` of the site (preferring those within 250 m or 10 % of the site radius
   when there are enough) and within the maximum baseline of a chosen base; the one nearest
   the site first, then farthest-point selection away from the chosen ones and the bases. Each gets the largest check-shot discrepancy still consistent at 95 % from each
   chosen base (rover centring on the check mark included; base and check positions taken as
   independent, which makes the allowance lenient when they come from one adjustment:
   ``rtk.check_shot_allowance_mm``).
"""

from __future__ import annotations

import datetime as dt
import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from django.core.exceptions import ValidationError
from django.db.models import Max

from registry.geodesy import rtk
from registry.geodesy import site as site_geo
from registry.geodesy.frames import FrameTransformError, frame_info, transform_position
from registry.models import Finding, Job, Mark, Position, PositionState, Visit
from registry.roles import Ability
from registry.selectors.conversion import configured_plate
from registry.services.access import access_job_by_code, require_ability

#: Check marks are looked for within this distance of the site (m).
CHECK_NEAR_M = 2_000.0
#: Marks this close to the site (the larger of 250 m and 10 % of the site radius) are preferred as
#: check marks when there are enough of them; otherwise any within ``CHECK_NEAR_M``.
CHECK_CLOSE_MIN_M = 250.0
CHECK_CLOSE_FRACTION = 0.10
#: How many check marks to suggest.
CHECK_MARK_COUNT = 2
#: Candidates are searched within site radius + this factor × maximum baseline.
SEARCH_FACTOR = 1.25
#: Most candidates considered (nearest first).
MAX_CANDIDATES = 5_000

CAUTIONS = (
    "Screening is a planning aid computed from the registry's records, the job's error model and "
    "common-practice defaults. It is not a guarantee of the accuracy achieved in the field.",
    "Before relying on a base, confirm on site that it is the right mark and undisturbed, check its "
    "published coordinates, frame and epoch against this sheet, and measure the antenna height twice.",
    "Check in on at least one other trusted mark at the start and end of each session and compare the "
    "discrepancy with the allowance shown; stop and investigate if it is larger.",
    "RTK figures assume a fixed (ambiguity-resolved) solution and an open sky. The a + b ppm error model is a "
    "reading of receiver specifications (common practice), not a field result: multipath, canopy, float "
    "solutions and large height differences between base and rover make the field error larger.",
    "Local codes, agency specifications and licensed professional practice govern. A licensed surveyor "
    "decides what control is adequate.",
)


#: Where each error-budget term comes from (the base term's text is per candidate: ``Candidate.base_description``).
BUDGET_TERM_DESCRIPTIONS = (
    ("rtk", "receiver a + b·d at the farthest site point (job's error model)"),
    ("base", "published position's σ from its covariance, plus any frame change's stated accuracy"),
    ("drift", "epoch change to the job's epoch (velocity σ × |Δt|, or the assumed rate × |Δt|)"),
    ("setup", "base centring (per axis) and antenna height"),
)


@dataclass(frozen=True)
class ScreeningSettings:
    """Everything a screening needs besides the marks (from a job, or given ad hoc)."""

    site: site_geo.Site
    site_geojson: dict
    frame_epsg: int
    epoch_yr: float
    tol_h_mm: float
    tol_v_mm: float
    model: rtk.RtkErrorModel
    assumed_rate_mm_yr: float
    max_baseline_m: float
    recovery_years: float
    grid_spacing_m: float | None = None
    job_code: str | None = None
    #: Plate of the ITRF2020 plate motion model (``REGISTRY["PLATE"]``); "" applies none.
    plate: str = ""

    @property
    def site_radius_m(self) -> float:
        return site_geo.site_radius_m(self.site, site_geo.site_plane(self.site))


@dataclass
class Candidate:
    mark: Mark
    reasons: list[str]
    position: Position | None = None
    lat_deg: float | None = None
    lon_deg: float | None = None
    h_m: float | None = None
    base_h_mm: float = math.nan
    base_v_mm: float = math.nan
    drift_h_mm: float = math.nan
    drift_v_mm: float = math.nan
    #: The base term's parts: the position's own σ (H per axis, V) and the frame change's 1σ per axis.
    position_h_mm: float = math.nan
    position_v_mm: float = math.nan
    frame_change_mm: float = 0.0
    frame_change_note: str = ""
    #: Largest |Δh| (m) from the base to the site's given heights (NaN when the site has none).
    max_dh_m: float = math.nan
    steps: list[dict] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)
    #: Years its position was held unmodelled in a dynamic frame (see frames.FrameTransformResult).
    unmodelled_hold_yr: float = 0.0
    # filled after the core has run
    rank: int = 0
    distance_m: float = math.nan
    max_distance_m: float = math.nan
    azimuth_deg: float | None = None
    h95_mm: float = math.nan
    v95_mm: float = math.nan
    margin_mm: float = math.nan
    coverage: float = 0.0
    budget: dict | None = None
    e_m: float = 0.0
    n_m: float = 0.0

    @property
    def excluded(self) -> bool:
        return bool(self.reasons)

    @property
    def covers_site(self) -> bool:
        return not self.excluded and self.margin_mm >= 0

    @property
    def coverage_words(self) -> str:
        """How much of the site it covers: "covers site", "covers N %" or "covers none" (review S-13).

        "covers site" only when the whole site, boundary included, is within both tolerances;
        a percentage never rounds to 0 or 100 when it is not exactly that.
        """
        if self.covers_site:
            return "covers site"
        pct = float(self.coverage) * 100.0
        if pct <= 0.0:
            return "covers none"
        if pct < 1.0:
            return "covers <1 %"
        if pct > 99.0:
            return "covers >99 %"
        return f"covers {pct:.0f} %"

    def base_description(self) -> str:
        """Where the base term comes from, in words (with the frame-change part when there is one)."""
        text = "published position's σ from its covariance (horizontal √λmax of east/north, vertical √σ²up)"
        if self.frame_change_note:
            text += "; " + self.frame_change_note
        return text


@dataclass
class CheckMark:
    candidate: Candidate
    allowances: list[dict]


@dataclass
class ScreeningResult:
    settings: ScreeningSettings
    as_of: dt.date
    plane: site_geo.LocalPlane
    grid: site_geo.SiteGrid
    candidates: list[Candidate]
    core: rtk.ScreeningCore | None
    pair: tuple[Candidate, Candidate] | None
    chosen: list[Candidate]
    check_marks: list[CheckMark]
    statement: str
    warnings: list[str]
    cautions: tuple[str, ...] = CAUTIONS

    @property
    def frame_label(self) -> str:
        return frame_info(self.settings.frame_epsg).label

    @property
    def usable_candidates(self) -> list[Candidate]:
        return [c for c in self.candidates if not c.excluded]

    def as_dict(self) -> dict[str, Any]:
        """Plain JSON values; mm to 1 decimal, m to 3, degrees to 9, fractions to 4."""
        s = self.settings
        core = self.core
        return {
            "job": s.job_code,
            "as_of": self.as_of.isoformat(),
            "site": {
                "geojson": s.site_geojson,
                "kind": s.site.kind,
                "reference_lat_deg": round(s.site.ref_lat_deg, 9),
                "reference_lon_deg": round(s.site.ref_lon_deg, 9),
                "area_m2": round(self.grid.area_m2, 1),
                "grid_spacing_m": round(self.grid.spacing_m, 3),
                "grid_cells": self.grid.n_cells,
                "boundary_samples": int((~self.grid.is_cell).sum()),
                "heights_given": len(s.site.heights_m),
            },
            "frame": {"epsg": s.frame_epsg, "name": self.frame_label},
            "epoch_yr": s.epoch_yr,
            "tolerances": {"horizontal_95_mm": s.tol_h_mm, "vertical_95_mm": s.tol_v_mm},
            "settings": {
                "rtk_h_fixed_mm": s.model.h_fixed_mm,
                "rtk_h_ppm": s.model.h_ppm,
                "rtk_v_fixed_mm": s.model.v_fixed_mm,
                "rtk_v_ppm": s.model.v_ppm,
                "rtk_combination": s.model.combination,
                "rtk_h_meaning": s.model.h_meaning,
                "setup_h_mm": s.model.setup_h_mm,
                "setup_v_mm": s.model.setup_v_mm,
                "assumed_rate_mm_yr": s.assumed_rate_mm_yr,
                "plate_model": s.plate or None,
                "max_baseline_m": s.max_baseline_m,
                "recovery_years": s.recovery_years,
            },
            "candidates": [_candidate_dict(c) for c in self.candidates],
            "best_pair": None
            if self.pair is None
            else {
                "bases": [self.pair[0].mark.code, self.pair[1].mark.code],
                "coverage": round(core.pair_coverage, 4),
                "covers_site": core.pair_worst_margin_mm >= 0,
                "worst_horizontal_95_mm": _mm(core.pair_worst_h95_mm),
                "worst_vertical_95_mm": _mm(core.pair_worst_v95_mm),
                "worst_margin_mm": _mm(core.pair_worst_margin_mm),
            },
            "chosen_bases": [c.mark.code for c in self.chosen],
            "check_marks": [
                {
                    "code": cm.candidate.mark.code,
                    "distance_m": _m(cm.candidate.distance_m),
                    "lat_deg": _deg(cm.candidate.lat_deg),
                    "lon_deg": _deg(cm.candidate.lon_deg),
                    "h_m": _m(cm.candidate.h_m),
                    "allowances": cm.allowances,
                }
                for cm in self.check_marks
            ],
            "achievable": None
            if core is None
            else {
                "horizontal_95_mm": _mm(core.achievable_h95_mm),
                "vertical_95_mm": _mm(core.achievable_v95_mm),
                "coverage_any_base": round(core.any_coverage, 4),
            },
            "statement": self.statement,
            "warnings": self.warnings,
            "cautions": list(self.cautions),
        }


def _mm(x) -> float | None:
    return None if x is None or not math.isfinite(x) else round(float(x), 1)


def _m(x) -> float | None:
    return None if x is None or not math.isfinite(x) else round(float(x), 3)


def _deg(x) -> float | None:
    return None if x is None else round(float(x), 9)


def _candidate_dict(c: Candidate) -> dict[str, Any]:
    p = c.position
    return {
        "rank": c.rank,
        "code": c.mark.code,
        "name": c.mark.name,
        "distance_m": _m(c.distance_m),
        "max_distance_m": _m(c.max_distance_m),
        "azimuth_deg": None if c.azimuth_deg is None else round(c.azimuth_deg, 6),
        "lat_deg": _deg(c.lat_deg),
        "lon_deg": _deg(c.lon_deg),
        "h_m": _m(c.h_m),
        "position": None
        if p is None
        else {"id": p.pk, "frame_epsg": p.frame_epsg, "epoch_yr": p.epoch_yr, "source": p.source},
        "horizontal_95_mm": _mm(c.h95_mm),
        "vertical_95_mm": _mm(c.v95_mm),
        "margin_mm": _mm(c.margin_mm),
        "coverage": round(float(c.coverage), 4),
        "covers_site": c.covers_site,
        "coverage_words": c.coverage_words,
        "max_height_difference_m": _m(c.max_dh_m),
        "excluded": c.excluded,
        "reasons": [{"code": r, "words": rtk.REASON_WORDS[r]} for r in c.reasons],
        "budget": None
        if c.budget is None
        else [
            {"term": t, "h_mm": _mm(c.budget[t]["h"]), "v_mm": _mm(c.budget[t]["v"]), "description": d}
            for t, d in ((t, c.base_description() if t == "base" else d) for t, d in BUDGET_TERM_DESCRIPTIONS)
        ],
        "sigma_h_mm": None if c.budget is None else _mm(c.budget["sigma_h"]),
        "sigma_v_mm": None if c.budget is None else _mm(c.budget["sigma_v"]),
        "steps": c.steps,
        "warnings": c.warnings,
    }


# ----------------------------------------------------------------------------- settings


def settings_from_job(job: Job) -> ScreeningSettings:
    site = site_geo.parse_site_geojson(job.site_geojson)
    return ScreeningSettings(
        site=site,
        site_geojson=job.site_geojson,
        frame_epsg=job.frame_epsg,
        epoch_yr=job.epoch_yr,
        tol_h_mm=job.tol_h_mm,
        tol_v_mm=job.tol_v_mm,
        model=rtk.RtkErrorModel(
            h_fixed_mm=job.rtk_h_fixed_mm,
            h_ppm=job.rtk_h_ppm,
            v_fixed_mm=job.rtk_v_fixed_mm,
            v_ppm=job.rtk_v_ppm,
            combination=job.rtk_combination,
            h_meaning=job.rtk_h_meaning,
            setup_h_mm=job.setup_h_mm,
            setup_v_mm=job.setup_v_mm,
        ),
        assumed_rate_mm_yr=job.assumed_rate_mm_yr,
        max_baseline_m=job.max_baseline_m,
        recovery_years=job.recovery_years,
        grid_spacing_m=job.grid_spacing_m,
        job_code=job.code,
        plate=configured_plate() or "",
    )


def settings_from_data(data: dict) -> ScreeningSettings:
    """Ad-hoc screening settings, validated exactly as a job's fields are (same codes)."""
    from registry.services.jobs import EDITABLE_FIELDS, _clean, _settings_defaults

    allowed = tuple(f for f in EDITABLE_FIELDS if f not in ("name", "client", "status", "notes", "grid_epsg"))
    cleaned = _clean(data, allowed)
    missing = [f for f in ("site_geojson", "frame_epsg", "epoch_yr", "tol_h_mm", "tol_v_mm") if cleaned.get(f) is None]
    if missing:
        raise ValidationError({f: ValidationError("This field is required.", code="required") for f in missing})
    defaults = {f.name: f.default for f in Job._meta.concrete_fields if f.name.startswith(("rtk_", "setup_"))}
    values = {**defaults, **_settings_defaults(), **cleaned}
    job = Job(code="AD-HOC", name="ad-hoc site", **values)
    from registry.services.jobs import _validate_whole

    _validate_whole(job)
    s = settings_from_job(job)
    return ScreeningSettings(**{**s.__dict__, "job_code": None})


# ----------------------------------------------------------------------------- gathering


def _years_between(earlier: dt.date, later: dt.date) -> float:
    return (later - earlier).days / 365.25


def _gather(s: ScreeningSettings, plane: site_geo.LocalPlane, radius_m: float, as_of: dt.date) -> list[Candidate]:
    from registry.selectors.nearby import marks_near

    found = marks_near(
        lat_deg=s.site.ref_lat_deg, lon_deg=s.site.ref_lon_deg, radius_m=radius_m, limit=MAX_CANDIDATES, as_of=as_of
    )
    marks = [nm.mark for nm in found]
    ids = [m.pk for m in marks]
    last_visit: dict[int, str] = {}
    for mark_id, cond in (
        Visit.objects.filter(mark_id__in=ids, visited_on__lte=as_of)
        .order_by("mark_id", "-visited_on", "-created_at", "-id")
        .values_list("mark_id", "finding")
    ):
        last_visit.setdefault(mark_id, cond)
    last_good = dict(
        Visit.objects.filter(mark_id__in=ids, finding=Finding.INTACT, visited_on__lte=as_of)
        .values("mark_id")
        .annotate(last=Max("visited_on"))
        .values_list("mark_id", "last")
    )
    positions: dict[int, list[Position]] = {}
    for p in Position.objects.filter(mark_id__in=ids, state=PositionState.PUBLISHED).order_by(
        "mark_id", "-epoch_yr", "-id"
    ):
        positions.setdefault(p.mark_id, []).append(p)

    out = []
    for mark in marks:
        pubs = positions.get(mark.pk, [])
        pubs.sort(key=lambda p: p.frame_epsg != s.frame_epsg)  # the job's own frame first (stable sort)
        cand = Candidate(mark=mark, reasons=[])
        transformable: bool | None = None if not pubs else False
        for p in pubs:
            try:
                _place(cand, p, s)
            except FrameTransformError as exc:
                cand.warnings.append(f"Position {p.pk} (EPSG:{p.frame_epsg}): {exc}")
                continue
            transformable = True
            break
        good = last_good.get(mark.pk)
        facts = rtk.MarkFacts(
            status=mark.status,
            sky_view=mark.sky_view,
            last_visit_condition=last_visit.get(mark.pk),
            years_since_good_visit=None if good is None else _years_between(good, as_of),
            has_published_position=bool(pubs),
            transformable=transformable,
        )
        cand.reasons = rtk.rule_reasons(facts, recovery_years=s.recovery_years)
        if cand.unmodelled_hold_yr > rtk.DYNAMIC_HOLD_LIMIT_YR:
            # Held in ITRF (or WGS 84) across the gap with neither velocity nor plate model: the
            # plate's centimetres a year are missing from the coordinates, not just from σ.
            cand.reasons.append(rtk.REASON_EPOCH_GAP_DYNAMIC)
        if cand.lat_deg is None:  # no usable position: place it by its search location, for the map only
            cand.lat_deg, cand.lon_deg = mark.search_lat_deg, mark.search_lon_deg
        out.append(cand)
    return out


def _place(cand: Candidate, p: Position, s: ScreeningSettings) -> None:
    """Move position ``p`` to the job's frame and epoch; fill the base and drift terms."""
    velocity = sigma = None
    if p.has_velocity:
        velocity = (p.vel_e_m_yr, p.vel_n_m_yr, p.vel_u_m_yr)
        rate_m_yr = s.assumed_rate_mm_yr / 1000.0
        sigma = tuple(
            rate_m_yr if v is None else v for v in (p.vel_sigma_e_m_yr, p.vel_sigma_n_m_yr, p.vel_sigma_u_m_yr)
        )
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


# ----------------------------------------------------------------------------- screening


def run_screening(s: ScreeningSettings, *, as_of: dt.date | None = None) -> ScreeningResult:
    """Screen the marks of the registry for ``s`` (no permission check: callers do that)."""
    as_of = as_of or dt.datetime.now(dt.UTC).date()
    plane = site_geo.site_plane(s.site)
    try:
        grid = site_geo.build_site_grid(s.site, plane, s.grid_spacing_m)
    except site_geo.SiteError as exc:
        raise ValidationError({"grid_spacing_m": ValidationError(exc.message, code=exc.code)}) from None
    radius = site_geo.site_radius_m(s.site, plane) + SEARCH_FACTOR * s.max_baseline_m
    cands = _gather(s, plane, radius, as_of)
    warnings: list[str] = []
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
        )
    k = len(cands)
    lat = np.array([c.lat_deg for c in cands], dtype=float)
    lon = np.array([c.lon_deg for c in cands], dtype=float)
    ce, cn = plane.to_local_m(lat, lon)
    usable = np.array([not c.reasons for c in cands])
    core = rtk.screen_candidates(
        grid.e_m,
        grid.n_m,
        grid.is_cell,
        ce,
        cn,
        base_h_mm=np.nan_to_num(np.array([c.base_h_mm for c in cands]), nan=0.0),
        base_v_mm=np.nan_to_num(np.array([c.base_v_mm for c in cands]), nan=0.0),
        drift_h_mm=np.nan_to_num(np.array([c.drift_h_mm for c in cands]), nan=0.0),
        drift_v_mm=np.nan_to_num(np.array([c.drift_v_mm for c in cands]), nan=0.0),
        usable=usable,
        model=s.model,
        tol_h_mm=s.tol_h_mm,
        tol_v_mm=s.tol_v_mm,
        max_baseline_m=s.max_baseline_m,
    )
    from pyproj import Geod

    az, _, geodesic_m = Geod(ellps="GRS80").inv(
        np.full(k, s.site.ref_lon_deg), np.full(k, s.site.ref_lat_deg), lon, lat
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
        if core.beyond_baseline[i]:
            c.reasons.append(rtk.REASON_BEYOND_MAX_BASELINE)
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
            )
    ordered = [cands[i] for i in core.order]
    for rank, c in enumerate(ordered, start=1):
        c.rank = rank
    pair = None if core.pair is None else (cands[core.pair[0]], cands[core.pair[1]])
    if pair is not None and pair[1].rank < pair[0].rank:
        pair = (pair[1], pair[0])
    usable_ranked = [c for c in ordered if not c.excluded]
    # The chosen bases: the best single base when it covers the whole site; otherwise the best
    # pair (better-ranked first); otherwise the best single. Check marks avoid them.
    chosen: list[Candidate] = []
    if usable_ranked and (usable_ranked[0].covers_site or pair is None):
        chosen = [usable_ranked[0]]
    elif pair is not None:
        chosen = list(pair)
    checks = _check_marks(s, ordered, chosen)
    for c in chosen:
        for w in c.warnings:
            if w not in warnings:
                warnings.append(w)
    statement = _statement(s, core, usable_ranked, pair)
    return ScreeningResult(s, as_of, plane, grid, ordered, core, pair, chosen, checks, statement, warnings)


def _check_marks(s: ScreeningSettings, ordered: list[Candidate], chosen: list[Candidate]) -> list[CheckMark]:
    if not chosen:
        return []
    rule_ok = [
        c
        for c in ordered
        if c.position is not None
        and c not in chosen
        and all(r == rtk.REASON_BEYOND_MAX_BASELINE for r in c.reasons)
        and c.distance_m <= CHECK_NEAR_M
        and any(math.hypot(c.e_m - b.e_m, c.n_m - b.n_m) <= s.max_baseline_m for b in chosen)
    ]
    if not rule_ok:
        return []
    # Prefer marks on or close to the site when there are enough of them ("spread over the site").
    close_m = max(CHECK_CLOSE_MIN_M, CHECK_CLOSE_FRACTION * s.site_radius_m)
    close = [c for c in rule_ok if c.distance_m <= close_m]
    if len(close) >= CHECK_MARK_COUNT:
        rule_ok = close
    e = np.array([c.e_m for c in rule_ok])
    n = np.array([c.n_m for c in rule_ok])
    first = int(np.argmin([c.distance_m for c in rule_ok]))
    picks = rtk.farthest_point_selection(
        e, n, first=first, count=CHECK_MARK_COUNT, avoid_e_m=[b.e_m for b in chosen], avoid_n_m=[b.n_m for b in chosen]
    )
    out = []
    for i in picks:
        c = rule_ok[i]
        allowances = []
        for b in chosen:
            d = math.hypot(c.e_m - b.e_m, c.n_m - b.n_m)
            if d > s.max_baseline_m:
                continue
            h, v = rtk.check_shot_allowance_mm(
                d,
                model=s.model,
                base_h_mm=b.base_h_mm,
                base_v_mm=b.base_v_mm,
                base_drift_h_mm=b.drift_h_mm,
                base_drift_v_mm=b.drift_v_mm,
                check_h_mm=c.base_h_mm,
                check_v_mm=c.base_v_mm,
                check_drift_h_mm=c.drift_h_mm,
                check_drift_v_mm=c.drift_v_mm,
            )
            allowances.append(
                {
                    "base": b.mark.code,
                    "baseline_m": _m(d),
                    "horizontal_95_mm": _mm(float(h)),
                    "vertical_95_mm": _mm(float(v)),
                }
            )
        out.append(CheckMark(c, allowances))
    return out


def _statement(s: ScreeningSettings, core: rtk.ScreeningCore, usable: list[Candidate], pair) -> str:
    tol = f"{s.tol_h_mm:.1f} mm horizontal and {s.tol_v_mm:.1f} mm vertical at 95 %"
    if not usable:
        return (
            f"No mark within {s.max_baseline_m / 1000:.1f} km of every part of the site passes the screening rules, "
            f"so no base can be proposed. See the reasons listed for each mark."
        )
    best = usable[0]
    if best.covers_site:
        return (
            f"{best.mark.code} covers the whole site within {tol}: worst figures {best.h95_mm:.1f} mm horizontal, "
            f"{best.v95_mm:.1f} mm vertical (margin {best.margin_mm:.1f} mm)."
        )
    if pair is not None and core.pair_worst_margin_mm >= 0:
        return (
            f"No single base covers the whole site within {tol}. The pair {pair[0].mark.code} + {pair[1].mark.code} "
            f"does when each part of the site is surveyed from the better of the two (worst "
            f"{core.pair_worst_h95_mm:.1f} mm horizontal, {core.pair_worst_v95_mm:.1f} mm vertical)."
        )
    pair_text = (
        f" The best pair, {pair[0].mark.code} + {pair[1].mark.code}, covers {core.pair_coverage * 100:.0f} %."
        if pair is not None
        else ""
    )
    return (
        f"The site cannot be covered within {tol} from the marks available. The best single base, "
        f"{best.mark.code}, covers {best.coverage * 100:.0f} % of the site (worst {best.h95_mm:.1f} mm horizontal, "
        f"{best.v95_mm:.1f} mm vertical).{pair_text} Using the best base at every point, the tightest "
        f"tolerances reachable are {core.achievable_h95_mm:.1f} mm horizontal and {core.achievable_v95_mm:.1f} mm "
        f"vertical. Consider new control on or near the site (static GNSS), a network RTK service, or a review of the "
        f"tolerances with the client."
    )


def job_screen(*, actor, code: str, as_of: dt.date | None = None) -> ScreeningResult:
    """Screen the stored job ``code`` (any role that may view the registry)."""
    job = access_job_by_code(actor, code, ability=Ability.VIEW)
    return run_screening(settings_from_job(job), as_of=as_of)


def site_screen(*, actor, data: dict, as_of: dt.date | None = None) -> ScreeningResult:
    """Screen an ad-hoc site given as job fields (``site_geojson``, ``frame_epsg``, ``epoch_yr``,
    ``tol_h_mm``, ``tol_v_mm`` and optionally any screening setting of a job)."""
    require_ability(actor, Ability.VIEW)
    return run_screening(settings_from_data(data), as_of=as_of)
