"""Single-base RTK screening: the error budget of a base mark over a job site.

Sources and conventions
-----------------------
- RTK error grows with the baseline: σ(d) = a + b·d with a in mm and b in ppm
  (1 ppm = 1 mm per km), "as receiver specifications quote it" (common practice;
  e.g. 8 mm + 1 ppm horizontal, 15 mm + 1 ppm vertical). Root-sum-square
  √(a² + (b·d)²) is offered as an option. The horizontal figure is read as a 1σ value
  per horizontal axis by default; read as 2D RMS (drms) the per-axis σ is drms/√2
  (drms² = σ_E² + σ_N² with σ_E = σ_N).
- Base position uncertainty: from the position's east/north/up covariance, the
  horizontal per-axis σ is the square root of the largest eigenvalue of the 2×2 E/N
  block (the semi-major axis of the standard error ellipse: a conservative circular
  stand-in for an elongated ellipse), the vertical σ is √cov_uu.
- Frame change (source frame ≠ job frame): the operation's stated accuracy (PROJ/EPSG
  "accuracy in metres", for which neither states a confidence level) is read as a 1σ per
  axis, horizontal and vertical alike, and added in quadrature to the base term. That is
  the conservative reading: read as a 95 % figure it would shrink by 2.45 (H) / 1.96 (V).
  A stated 0 m (a frame defined by the transformation, exact by definition) adds nothing;
  an unstated accuracy adds nothing and is warned about by :mod:`registry.geodesy.frames`.
- Drift between the base's coordinate epoch and the job's epoch: with a velocity the
  position is propagated (by the caller) and the velocity's σ × |Δt| is the drift
  term (per axis: the larger of the east and north velocity σ); without one an assumed
  unmodelled rate (default 2 mm/yr per axis, common practice) × |Δt|.
- Setup error of the base (centring and antenna height): 2 mm per horizontal axis,
  3 mm vertical, 1σ (common practice). The rover pole's centring and rod height (per job;
  default 2 mm per axis and 3 mm, 1σ, common practice for a pole with a checked bubble)
  enter every rover point, site points and check shots alike.
- Motion of the base relative to the site up to the field date (see
  :func:`relative_motion_mm`): a rover point computed from a base held at its
  deliverable-epoch coordinates is off by (v_site − v_base)·(t_field − t_deliverable); the
  predicted offset is carried as a 1σ-sized term together with the uncertainty of the
  relative velocity × |Δt| (a known offset taken as a σ: conservative, since 2.4477·b > b).
- Height difference base → site points (ellipsoidal, job frame): reported per candidate
  (largest |Δh| over the site heights given), not part of the budget; above
  ``HEIGHT_DIFFERENCE_WARN_M`` (300 m, common practice) unmodelled troposphere degrades RTK,
  mostly in height, beyond what the a + b·d model says.
- Combination: σ_axis = √(σ_rtk² + σ_base² + σ_drift² + σ_motion² + σ_setup² + σ_rover²). Horizontal 95 % =
  2.4477·σ_axis, the radius of the 95 % circle of a circular bivariate normal
  (√(−2 ln 0.05) = √χ²₀.₉₅(2); FGDC-STD-007.3-1998 §3.2.1, Greenwalt & Shultz 1968);
  vertical 95 % = 1.9600·σ_v (normal 97.5 % quantile).

Performance: distances from every candidate to every site point are planar on the
site's local transverse Mercator plane (see :mod:`registry.geodesy.site`), computed
in blocks of candidates to stay in cache. 1,000 candidates × 10,000 points take a
fraction of a second (``benchmarks/bench_screening.py``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

#: Radius of the 95 % circle per unit per-axis σ: √(−2 ln 0.05) = √χ²₀.₉₅(2).
K_H95 = math.sqrt(-2.0 * math.log(0.05))
#: Normal 97.5 % quantile: the 95 % two-sided factor for one dimension.
K_V95 = 1.959963984540054

ADDITIVE = "additive"
RSS = "rss"
PER_AXIS = "per_axis"
DRMS = "drms"

#: Base → site ellipsoidal height difference above which a warning is shown (m, common practice).
HEIGHT_DIFFERENCE_WARN_M = 300.0

#: Default assumed unmodelled motion for marks without a velocity (mm/yr per axis, common practice).
DEFAULT_ASSUMED_RATE_MM_YR = 2.0
#: Candidates kept for the best-pair search (best-ranked first).
PAIR_POOL_SIZE = 128
#: Pairs whose worst-case margin is evaluated exactly, after ranking all pairs by coverage.
PAIR_EXACT_EVALUATIONS = 256

# ----------------------------------------------------------------------------- the error terms


@dataclass(frozen=True)
class RtkErrorModel:
    """The job's RTK error model and setup error (all 1σ).

    Attributes
    ----------
    h_fixed_mm, h_ppm : float
        Horizontal a + b·d (common practice 8 mm + 1 ppm).
    v_fixed_mm, v_ppm : float
        Vertical a + b·d (common practice 15 mm + 1 ppm).
    combination : str
        ``"additive"`` (a + b·d, as specifications quote it) or ``"rss"`` (√(a² + (b·d)²)).
    h_meaning : str
        ``"per_axis"`` (the horizontal figure is σ per axis) or ``"drms"`` (2D RMS).
    setup_h_mm, setup_v_mm : float
        Base centring per horizontal axis and antenna height error (common practice 2 mm, 3 mm).
    rover_h_mm, rover_v_mm : float
        Rover pole centring per horizontal axis and rod height error (common practice 2 mm, 3 mm).
    """

    h_fixed_mm: float = 8.0
    h_ppm: float = 1.0
    v_fixed_mm: float = 15.0
    v_ppm: float = 1.0
    combination: str = ADDITIVE
    h_meaning: str = PER_AXIS
    setup_h_mm: float = 2.0
    setup_v_mm: float = 3.0
    rover_h_mm: float = 2.0
    rover_v_mm: float = 3.0

    def __post_init__(self):
        if self.combination not in (ADDITIVE, RSS):
            raise ValueError(f"combination must be 'additive' or 'rss', not {self.combination!r}")
        if self.h_meaning not in (PER_AXIS, DRMS):
            raise ValueError(f"h_meaning must be 'per_axis' or 'drms', not {self.h_meaning!r}")
        for name in (
            "h_fixed_mm",
            "h_ppm",
            "v_fixed_mm",
            "v_ppm",
            "setup_h_mm",
            "setup_v_mm",
            "rover_h_mm",
            "rover_v_mm",
        ):
            value = getattr(self, name)
            if not (math.isfinite(value) and value >= 0):
                raise ValueError(f"{name} must be a non-negative number, not {value!r}")

    def rtk_h_axis_mm(self, distance_m):
        """Horizontal RTK σ per axis (mm) at ``distance_m`` from the base."""
        sigma = rtk_sigma_mm(distance_m, self.h_fixed_mm, self.h_ppm, self.combination)
        return sigma / math.sqrt(2.0) if self.h_meaning == DRMS else sigma

    def rtk_v_mm(self, distance_m):
        """Vertical RTK σ (mm) at ``distance_m`` from the base."""
        return rtk_sigma_mm(distance_m, self.v_fixed_mm, self.v_ppm, self.combination)


def rtk_sigma_mm(distance_m, fixed_mm: float, ppm: float, combination: str = ADDITIVE):
    """RTK error σ(d) in mm for a baseline of ``distance_m`` metres.

    Parameters
    ----------
    distance_m : float or array
        Baseline length, m.
    fixed_mm, ppm : float
        The fixed part a (mm) and the distance part b (ppm = mm per km).
    combination : {"additive", "rss"}

    Examples
    --------
    >>> float(rtk_sigma_mm(5000.0, 8.0, 1.0))
    13.0
    >>> round(float(rtk_sigma_mm(10000.0, 8.0, 1.0, "rss")), 2)
    12.81
    """
    d_km = np.asarray(distance_m, dtype=float) * 1e-3
    if combination == ADDITIVE:
        return fixed_mm + ppm * d_km
    if combination == RSS:
        return np.sqrt(fixed_mm**2 + (ppm * d_km) ** 2)
    raise ValueError(f"combination must be 'additive' or 'rss', not {combination!r}")


def base_sigma_from_covariance_mm(cov_ee_m2, cov_en_m2, cov_nn_m2, cov_uu_m2):
    """Per-axis horizontal σ and vertical σ (mm) of a base from its E/N/U covariance (m²).

    Horizontal: √λmax of [[ee, en], [en, nn]] (semi-major axis of the standard ellipse).

    Examples
    --------
    >>> h, v = base_sigma_from_covariance_mm(9e-6, 0.0, 4e-6, 2.5e-5)
    >>> round(float(h), 6), round(float(v), 6)
    (3.0, 5.0)
    """
    ee = np.asarray(cov_ee_m2, dtype=float)
    en = np.asarray(cov_en_m2, dtype=float)
    nn = np.asarray(cov_nn_m2, dtype=float)
    uu = np.asarray(cov_uu_m2, dtype=float)
    half_trace = 0.5 * (ee + nn)
    root = np.sqrt((0.5 * (ee - nn)) ** 2 + en**2)
    lam_max = half_trace + root
    return np.sqrt(np.maximum(lam_max, 0.0)) * 1e3, np.sqrt(np.maximum(uu, 0.0)) * 1e3


def frame_change_sigma_mm(accuracy_m) -> float:
    """1σ per axis (mm) added to the base term by a frame change of stated ``accuracy_m``.

    The stated accuracy is read as a 1σ per axis (conservative; PROJ/EPSG give no
    confidence level). None (not stated) and 0 (exact by definition) add nothing.

    >>> frame_change_sigma_mm(0.001), frame_change_sigma_mm(0.0), frame_change_sigma_mm(None)
    (1.0, 0.0, 0.0)
    """
    if accuracy_m is None or not math.isfinite(accuracy_m) or accuracy_m <= 0:
        return 0.0
    return float(accuracy_m) * 1e3


def max_abs_height_difference_m(base_h_m, site_h_m):
    """Largest |h_site − h_base| (m) per base over the given site heights (ellipsoidal, one frame).

    Parameters
    ----------
    base_h_m : (k,) array
        Base ellipsoidal heights (NaN where unknown).
    site_h_m : (q,) array
        Site ellipsoidal heights given (may be empty: the result is then all NaN).

    >>> max_abs_height_difference_m(np.array([100.0, 450.0]), np.array([120.0, 90.0])).tolist()
    [20.0, 360.0]
    """
    base = np.atleast_1d(np.asarray(base_h_m, dtype=float))
    site = np.atleast_1d(np.asarray(site_h_m, dtype=float))
    if site.size == 0:
        return np.full(base.shape, np.nan)
    return np.abs(site[None, :] - base[:, None]).max(axis=1)


def drift_sigma_mm(epoch_gap_yr, vel_sigma_mm_yr=None, assumed_rate_mm_yr: float = DEFAULT_ASSUMED_RATE_MM_YR):
    """Drift σ (mm) over ``epoch_gap_yr``: velocity σ × |Δt|, or the assumed rate × |Δt|.

    ``vel_sigma_mm_yr`` may be None or contain NaN where no velocity is known.

    >>> drift_sigma_mm(-7.5).item()
    15.0
    >>> drift_sigma_mm(np.array([10.0, 10.0]), np.array([0.5, np.nan])).tolist()
    [5.0, 20.0]
    """
    gap = np.abs(np.asarray(epoch_gap_yr, dtype=float))
    if vel_sigma_mm_yr is None:
        return gap * assumed_rate_mm_yr
    rate = np.asarray(vel_sigma_mm_yr, dtype=float)
    return gap * np.where(np.isnan(rate), assumed_rate_mm_yr, rate)


def error_budget_mm(
    distance_m,
    *,
    model: RtkErrorModel,
    base_h_mm,
    base_v_mm,
    drift_h_mm,
    drift_v_mm,
    motion_h_mm=0.0,
    motion_v_mm=0.0,
    geoid_v_mm: float = 0.0,
) -> dict:
    """Every term of the rover's error budget at ``distance_m`` from the base, in mm.

    Returns a dict with 1σ terms ``rtk``, ``base``, ``drift``, ``motion`` (base relative to the
    site up to the field date), ``setup`` (base), ``rover`` (pole), ``geoid`` (vertical only, when
    the deliverable is orthometric), each a pair ``h`` per axis / ``v``, the combined σ and the
    95 % figures.

    Examples
    --------
    >>> m = RtkErrorModel(setup_h_mm=0, setup_v_mm=0, rover_h_mm=0, rover_v_mm=0)
    >>> b = error_budget_mm(10000.0, model=m, base_h_mm=0, base_v_mm=0, drift_h_mm=0, drift_v_mm=0)
    >>> b["rtk"]["h"], b["rtk"]["v"], round(b["h95"], 2), round(b["v95"], 2)
    (18.0, 25.0, 44.06, 49.0)
    """
    terms = {
        "rtk": (float(model.rtk_h_axis_mm(distance_m)), float(model.rtk_v_mm(distance_m))),
        "base": (float(base_h_mm), float(base_v_mm)),
        "drift": (float(drift_h_mm), float(drift_v_mm)),
        "motion": (float(motion_h_mm), float(motion_v_mm)),
        "setup": (float(model.setup_h_mm), float(model.setup_v_mm)),
        "rover": (float(model.rover_h_mm), float(model.rover_v_mm)),
        "geoid": (0.0, float(geoid_v_mm)),
    }
    sigma_h = math.sqrt(sum(h * h for h, _ in terms.values()))
    sigma_v = math.sqrt(sum(v * v for _, v in terms.values()))
    out: dict = {name: {"h": h, "v": v} for name, (h, v) in terms.items()}
    out.update(sigma_h=sigma_h, sigma_v=sigma_v, h95=K_H95 * sigma_h, v95=K_V95 * sigma_v)
    return out


# ----------------------------------------------------------------------------- screening


@dataclass
class ScreeningCore:
    """Arrays produced by :func:`screen_candidates` (k candidates, p site points).

    Per candidate: ``min_distance_m``, ``max_distance_m``, ``worst_h95_mm``,
    ``worst_v95_mm`` (at the farthest site point), ``coverage`` (fraction of the site's
    cells inside both tolerances *and* within the maximum baseline), ``margin_mm`` (min of
    tol − worst, H and V), ``reaches_site`` (every site point within the maximum baseline),
    ``beyond_baseline`` (no site point within it), ``eligible`` (usable and within the
    baseline of some site point), ``order`` (candidate indices, ranked). Per site point:
    ``best_h95_mm``, ``best_v95_mm`` over eligible candidates within the baseline of that
    point (inf where none) and which candidate gives each (``best_h_index``,
    ``best_v_index``, −1 where none). Site-wide: ``achievable_h95_mm`` /
    ``achievable_v95_mm`` (the worst over the site of the best per point: the tightest
    tolerance switching bases could meet), ``achievable_split`` (at some point the best
    horizontal and the best vertical figure come from different bases), ``any_coverage``,
    the best pair, and the greedy cover (``cover``: up to ``max_bases`` candidates).
    """

    min_distance_m: np.ndarray
    max_distance_m: np.ndarray
    worst_h95_mm: np.ndarray
    worst_v95_mm: np.ndarray
    coverage: np.ndarray
    margin_mm: np.ndarray
    beyond_baseline: np.ndarray
    eligible: np.ndarray
    order: np.ndarray
    best_h95_mm: np.ndarray
    best_v95_mm: np.ndarray
    achievable_h95_mm: float
    achievable_v95_mm: float
    any_coverage: float
    reaches_site: np.ndarray
    best_h_index: np.ndarray | None = None
    best_v_index: np.ndarray | None = None
    achievable_split: bool = False
    const_h2: np.ndarray | None = None
    const_v2: np.ndarray | None = None
    pair: tuple[int, int] | None = None
    pair_coverage: float = 0.0
    pair_worst_margin_mm: float = -math.inf
    pair_worst_h95_mm: float = math.inf
    pair_worst_v95_mm: float = math.inf
    cover: list[int] = field(default_factory=list)
    cover_coverage: float = 0.0
    info: dict = field(default_factory=dict)


def _rtk_sq_mm2(d_m: np.ndarray, fixed_mm: float, ppm: float, combination: str, scale: float, out: np.ndarray):
    """(scale·σ_rtk(d))² in mm², written into ``out`` (same as ``rtk_sigma_mm`` squared, without temporaries)."""
    np.multiply(d_m, ppm * 1e-3 * scale, out=out)
    if combination == ADDITIVE:
        out += fixed_mm * scale
        np.multiply(out, out, out=out)
    else:
        np.multiply(out, out, out=out)
        out += (fixed_mm * scale) ** 2
    return out


def _sigma2_const(*terms_mm) -> np.ndarray:
    """Σ term² (mm²) of the distance-independent 1σ terms (arrays or scalars)."""
    return sum(np.square(np.asarray(t, dtype=float)) for t in terms_mm)


#: Most bases the greedy cover proposes for one site (beyond that, new control is the better plan).
MAX_COVER_BASES = 6
#: A base joins the greedy cover only when it adds at least this fraction of the site's cells: moving the
#: base for a sliver of the site costs a set-up and a check shot for almost nothing.
COVER_MIN_GAIN_FRACTION = 0.02


def screen_candidates(
    site_e_m,
    site_n_m,
    site_is_cell,
    cand_e_m,
    cand_n_m,
    *,
    base_h_mm,
    base_v_mm,
    drift_h_mm,
    drift_v_mm,
    usable,
    model: RtkErrorModel,
    tol_h_mm: float,
    tol_v_mm: float,
    max_baseline_m: float,
    motion_h_mm=0.0,
    motion_v_mm=0.0,
    geoid_v_mm: float = 0.0,
    max_bases: int = MAX_COVER_BASES,
    block_elements: int = 400_000,
) -> ScreeningCore:
    """Screen k candidate bases over p site points on one local plane.

    Parameters
    ----------
    site_e_m, site_n_m : (p,) arrays
        Site points on the local plane (m). ``site_is_cell`` (p,) bool marks the points
        that carry area (the others are boundary samples, used for worst cases only).
    cand_e_m, cand_n_m : (k,) arrays
        Candidate marks on the same plane (m).
    base_h_mm, base_v_mm, drift_h_mm, drift_v_mm, motion_h_mm, motion_v_mm : (k,) arrays
        1σ terms per candidate (per horizontal axis / vertical).
    usable : (k,) bool
        False for candidates already excluded by the registry's screening rules
        (:mod:`registry.services.screening.rules`).
    model : RtkErrorModel
    tol_h_mm, tol_v_mm : float
        The job's tolerances, 95 % (horizontal circle, vertical).
    max_baseline_m : float
        Per site point: a base serves only the points within this distance (at equality
        included). A candidate with no site point within it is excluded.
    geoid_v_mm : float
        Vertical 1σ of the geoid model (orthometric deliverables; 0 otherwise).
    max_bases : int
        Most bases of the greedy cover.

    Ranking: eligible first; among them those covering the whole site (every cell and
    boundary sample inside both tolerances and the baseline) first, then larger coverage,
    then larger margin, then shorter distance; then the ineligible ones in the same order.
    """
    pe = np.asarray(site_e_m, dtype=float)
    pn = np.asarray(site_n_m, dtype=float)
    cells = np.asarray(site_is_cell, dtype=bool)
    ce = np.asarray(cand_e_m, dtype=float)
    cn = np.asarray(cand_n_m, dtype=float)
    usable = np.asarray(usable, dtype=bool)
    k, p = ce.size, pe.size
    n_cells = max(int(cells.sum()), 1)
    ones = np.ones(k)
    const_h2 = _sigma2_const(base_h_mm, drift_h_mm, motion_h_mm, model.setup_h_mm, model.rover_h_mm) * ones
    const_v2 = _sigma2_const(base_v_mm, drift_v_mm, motion_v_mm, model.setup_v_mm, model.rover_v_mm, geoid_v_mm) * ones
    lim_h2 = (tol_h_mm / K_H95) ** 2
    lim_v2 = (tol_v_mm / K_V95) ** 2

    min_d = np.empty(k)
    max_d = np.empty(k)
    covered = np.zeros(k)
    best_h2 = np.full(p, np.inf)
    best_v2 = np.full(p, np.inf)
    best_hi = np.full(p, -1, dtype=np.int64)
    best_vi = np.full(p, -1, dtype=np.int64)
    any_cov = np.zeros(p, dtype=bool)
    rows = max(1, block_elements // max(p, 1))
    buf_d = np.empty((rows, p))
    buf_t = np.empty((rows, p))
    buf_h = np.empty((rows, p))
    buf_v = np.empty((rows, p))
    scale_h = 1.0 / math.sqrt(2.0) if model.h_meaning == DRMS else 1.0
    for start in range(0, k, rows):
        stop = min(k, start + rows)
        sl = slice(start, stop)
        n = stop - start
        d, t, h2, v2 = buf_d[:n], buf_t[:n], buf_h[:n], buf_v[:n]
        np.subtract(ce[sl, None], pe[None, :], out=d)
        np.multiply(d, d, out=d)
        np.subtract(cn[sl, None], pn[None, :], out=t)
        np.multiply(t, t, out=t)
        np.add(d, t, out=d)
        np.sqrt(d, out=d)  # distances, m
        min_d[sl] = d.min(axis=1) if p else np.inf
        max_d[sl] = d.max(axis=1) if p else 0.0
        # Only blocks with a site point beyond the baseline need the per-point mask (most do not).
        within = None if max_d[sl].max(initial=0.0) <= max_baseline_m else d <= max_baseline_m
        _rtk_sq_mm2(d, model.h_fixed_mm, model.h_ppm, model.combination, scale_h, out=h2)
        h2 += const_h2[sl, None]
        _rtk_sq_mm2(d, model.v_fixed_mm, model.v_ppm, model.combination, 1.0, out=v2)
        v2 += const_v2[sl, None]
        ok = (h2 <= lim_h2) & (v2 <= lim_v2)
        if within is not None:
            ok &= within
        covered[sl] = np.count_nonzero(ok & cells[None, :], axis=1)
        elig = usable[sl] & (min_d[sl] <= max_baseline_m)
        if elig.any():
            rows_idx = np.flatnonzero(elig) + start
            for sq, best, best_i in ((h2, best_h2, best_hi), (v2, best_v2, best_vi)):
                vals = sq[elig] if within is None else np.where(within[elig], sq[elig], np.inf)
                arg = vals.argmin(axis=0)
                low = vals[arg, np.arange(p)]
                better = low < best
                best[better] = low[better]
                best_i[better] = rows_idx[arg[better]]
            any_cov |= ok[elig].any(axis=0)

    beyond = min_d > max_baseline_m
    reaches = max_d <= max_baseline_m
    eligible = usable & ~beyond
    worst_h95 = K_H95 * np.sqrt(model.rtk_h_axis_mm(max_d) ** 2 + const_h2)
    worst_v95 = K_V95 * np.sqrt(model.rtk_v_mm(max_d) ** 2 + const_v2)
    coverage = covered / n_cells
    margin = np.minimum(tol_h_mm - worst_h95, tol_v_mm - worst_v95)
    # Covers the whole site: inside both tolerances and the baseline at every point, boundary included.
    full = (margin >= 0.0) & reaches
    # np.lexsort: the last key is the primary one.
    order = np.lexsort((min_d, -margin, -coverage, ~full, ~eligible))
    best_h95 = K_H95 * np.sqrt(best_h2)
    best_v95 = K_V95 * np.sqrt(best_v2)
    both = (best_hi >= 0) & (best_vi >= 0)
    core = ScreeningCore(
        min_distance_m=min_d,
        max_distance_m=max_d,
        worst_h95_mm=worst_h95,
        worst_v95_mm=worst_v95,
        coverage=coverage,
        margin_mm=margin,
        beyond_baseline=beyond,
        eligible=eligible,
        order=order,
        best_h95_mm=best_h95,
        best_v95_mm=best_v95,
        achievable_h95_mm=float(best_h95.max()) if p else math.inf,
        achievable_v95_mm=float(best_v95.max()) if p else math.inf,
        any_coverage=float((any_cov & cells).sum() / n_cells),
        reaches_site=reaches,
        best_h_index=best_hi,
        best_v_index=best_vi,
        achievable_split=bool(np.any(both & (best_hi != best_vi))),
        const_h2=const_h2,
        const_v2=const_v2,
    )
    _best_pair(core, pe, pn, cells, ce, cn, const_h2, const_v2, model, tol_h_mm, tol_v_mm, max_baseline_m, max_bases)
    return core


def point_margins_mm(
    idx, site_e_m, site_n_m, cand_e_m, cand_n_m, const_h2, const_v2, *, model, tol_h_mm, tol_v_mm, max_baseline_m
) -> np.ndarray:
    """Per-point margin (mm) of candidates ``idx``: min(tol_h − h95, tol_v − v95); −inf beyond the baseline.

    Returns an array of shape (len(idx), p).
    """
    idx = np.asarray(idx, dtype=np.int64)
    ce, cn = np.asarray(cand_e_m, float), np.asarray(cand_n_m, float)
    de = ce[idx, None] - np.asarray(site_e_m, float)[None, :]
    dn = cn[idx, None] - np.asarray(site_n_m, float)[None, :]
    d = np.sqrt(de * de + dn * dn)
    h95 = K_H95 * np.sqrt(model.rtk_h_axis_mm(d) ** 2 + np.asarray(const_h2)[idx, None])
    v95 = K_V95 * np.sqrt(model.rtk_v_mm(d) ** 2 + np.asarray(const_v2)[idx, None])
    return np.where(d <= max_baseline_m, np.minimum(tol_h_mm - h95, tol_v_mm - v95), -np.inf)


def assign_service_areas(margins_mm: np.ndarray) -> np.ndarray:
    """Per site point, which of the given bases serves it: the one with the largest margin.

    ``margins_mm`` (b, p) from :func:`point_margins_mm`. Returns (p,) row indices, −1 where no
    base is within tolerance (margin < 0 for all).

    >>> assign_service_areas(np.array([[1.0, -2.0, -1.0], [0.5, 3.0, -0.5]])).tolist()
    [0, 1, -1]
    """
    m = np.asarray(margins_mm, dtype=float)
    if m.size == 0:
        return np.full(m.shape[1] if m.ndim == 2 else 0, -1, dtype=np.int64)
    best = m.argmax(axis=0)
    return np.where(m.max(axis=0) >= 0.0, best, -1).astype(np.int64)


def greedy_cover(bits: np.ndarray, *, max_sets: int, min_gain: int = 1) -> list[int]:
    """Greedy set cover over bit-packed coverage rows: each step takes the row adding most new cells.

    Ties go to the lower row (the better-ranked candidate). Stops when a step would add fewer than
    ``min_gain`` cells, or after ``max_sets`` rows. The classic greedy approximation (Chvátal 1979): within a factor
    H(n) ≤ 1 + ln n of the fewest sets, and in practice near it on corridor-like sites.

    >>> rows = np.packbits(np.array([[1, 1, 0, 0], [0, 1, 1, 0], [0, 0, 1, 1]], dtype=bool), axis=1)
    >>> greedy_cover(rows, max_sets=6)
    [0, 2]
    """
    bits = np.asarray(bits, dtype=np.uint8)
    if bits.size == 0:
        return []
    covered = np.zeros(bits.shape[1], dtype=np.uint8)
    chosen: list[int] = []
    while len(chosen) < max_sets:
        gain = np.bitwise_count(bits & ~covered).sum(axis=1, dtype=np.int64)
        i = int(np.argmax(gain))
        if gain[i] < max(min_gain, 1):
            break
        chosen.append(i)
        covered |= bits[i]
    return chosen


def _best_pair(
    core, pe, pn, cells, ce, cn, const_h2, const_v2, model, tol_h_mm, tol_v_mm, max_baseline_m, max_bases
) -> None:
    """Best pair of bases (per site point the better of the two; maximise coverage, then worst
    margin) and the greedy cover of up to ``max_bases`` bases.

    Method: the ``PAIR_POOL_SIZE`` best-ranked eligible candidates form the pool. Pair
    coverage for *all* pool pairs is counted exactly from bit-packed cell-coverage rows
    (popcount of A | B). The ``PAIR_EXACT_EVALUATIONS`` pairs with the most coverage (ties:
    larger sum of the two single worst margins) then get their exact worst-case margin:
    min over points of max(margin_i, margin_j). A point beyond the maximum baseline of a base
    has margin −inf for it.
    """
    pool = core.order[core.eligible[core.order]][:PAIR_POOL_SIZE]
    core.info["pair_pool"] = int(pool.size)
    if pool.size < 2:
        return
    # float32: margins are in mm, so its resolution (~1e-6 mm here) is far below anything shown.
    m = point_margins_mm(
        pool,
        pe,
        pn,
        ce,
        cn,
        const_h2,
        const_v2,
        model=model,
        tol_h_mm=tol_h_mm,
        tol_v_mm=tol_v_mm,
        max_baseline_m=max_baseline_m,
    ).astype(np.float32)
    bits = np.packbits((m >= 0) & cells[None, :], axis=1)
    n_cells = max(int(cells.sum()), 1)
    cover = greedy_cover(bits, max_sets=max_bases, min_gain=math.ceil(COVER_MIN_GAIN_FRACTION * n_cells))
    if cover:
        union = np.zeros(bits.shape[1], dtype=np.uint8)
        for i in cover:
            union |= bits[i]
        core.cover = [int(pool[i]) for i in cover]
        core.cover_coverage = int(np.bitwise_count(union).sum()) / n_cells
    iu, ju = np.triu_indices(pool.size, k=1)
    pair_cov = np.empty(iu.size, dtype=np.int64)
    pos = 0
    for i in range(pool.size - 1):
        cnt = np.bitwise_count(bits[i] | bits[i + 1 :]).sum(axis=1, dtype=np.int64)
        pair_cov[pos : pos + cnt.size] = cnt
        pos += cnt.size
    single_worst = m.min(axis=1)
    proxy = single_worst[iu] + single_worst[ju]
    proxy = np.where(np.isfinite(proxy), proxy, -np.inf)
    pick = np.lexsort((-proxy, -pair_cov))[:PAIR_EXACT_EVALUATIONS]
    best = None
    for start in range(0, pick.size, 64):
        sel = pick[start : start + 64]
        both = np.maximum(m[iu[sel]], m[ju[sel]])
        cov = ((both >= 0) & cells[None, :]).sum(axis=1)
        worst = both.min(axis=1)
        for s, c, w in zip(sel, cov, worst, strict=True):
            key = (int(c), float(w))
            if best is None or key > best[0]:
                best = (key, int(s))
    assert best is not None  # the pool holds two or more candidates, so at least one pair was evaluated
    (cov_count, worst_margin), s = best
    # A pair is only worth proposing when it covers more of the site than the best single base
    # does on its own; otherwise the second base adds nothing in the field.
    single_cov = np.bitwise_count(bits).sum(axis=1, dtype=np.int64)
    if cov_count <= int(single_cov.max()):
        core.info["pair_note"] = "no second base adds coverage to the best single base"
        return
    i, j = int(pool[iu[s]]), int(pool[ju[s]])
    core.pair = (i, j)
    core.pair_coverage = cov_count / n_cells
    core.pair_worst_margin_mm = float(worst_margin)
    # The pair's worst 95 % figures: per point the better base (by margin), then the worst point.
    mi, mj = m[iu[s]], m[ju[s]]
    use_i = mi >= mj
    h = np.empty(pe.size)
    v = np.empty(pe.size)
    for idx, mask in ((i, use_i), (j, ~use_i)):
        d = np.hypot(ce[idx] - pe[mask], cn[idx] - pn[mask])
        h[mask] = K_H95 * np.sqrt(model.rtk_h_axis_mm(d) ** 2 + const_h2[idx])
        v[mask] = K_V95 * np.sqrt(model.rtk_v_mm(d) ** 2 + const_v2[idx])
    core.pair_worst_h95_mm = float(h.max())
    core.pair_worst_v95_mm = float(v.max())


# ----------------------------------------------------------------------------- check marks


def farthest_point_selection(e_m, n_m, *, first: int, count: int, avoid_e_m=(), avoid_n_m=()) -> list[int]:
    """Pick ``count`` points spread out: start at ``first``, then each time the point
    farthest from everything chosen so far (and from the ``avoid`` points, e.g. the bases).

    >>> farthest_point_selection(np.array([0., 1., 10., 5.]), np.zeros(4), first=0, count=3)
    [0, 2, 3]
    """
    e = np.asarray(e_m, dtype=float)
    n = np.asarray(n_m, dtype=float)
    if e.size == 0 or count <= 0:
        return []
    chosen = [int(first)]
    dist = np.hypot(e - e[first], n - n[first])
    for ae, an in zip(avoid_e_m, avoid_n_m, strict=True):
        dist = np.minimum(dist, np.hypot(e - ae, n - an))
    dist[first] = -1.0
    while len(chosen) < min(count, e.size):
        nxt = int(np.argmax(dist))
        if dist[nxt] < 0:
            break
        chosen.append(nxt)
        dist = np.minimum(dist, np.hypot(e - e[nxt], n - n[nxt]))
        dist[chosen] = -1.0
    return chosen


def check_shot_terms_mm(
    distance_m,
    *,
    model: RtkErrorModel,
    base_h_mm,
    base_v_mm,
    base_drift_h_mm,
    base_drift_v_mm,
    check_h_mm,
    check_v_mm,
    check_drift_h_mm,
    check_drift_v_mm,
    base_motion_h_mm=0.0,
    base_motion_v_mm=0.0,
    check_motion_h_mm=0.0,
    check_motion_v_mm=0.0,
) -> dict[str, tuple[float, float]]:
    """The 1σ terms (per horizontal axis, vertical; mm) of a check shot's discrepancy.

    RTK at the baseline; the base position, its drift and its motion relative to the site;
    the base setup (centring, antenna height); the rover pole on the check mark (centring, rod
    height: ``model.rover_h_mm`` / ``rover_v_mm``); the check mark's position, its drift and its
    motion relative to the site.
    """
    return {
        "rtk": (float(model.rtk_h_axis_mm(distance_m)), float(model.rtk_v_mm(distance_m))),
        "base": (float(base_h_mm), float(base_v_mm)),
        "base drift": (float(base_drift_h_mm), float(base_drift_v_mm)),
        "base motion": (float(base_motion_h_mm), float(base_motion_v_mm)),
        "base setup": (float(model.setup_h_mm), float(model.setup_v_mm)),
        "rover pole": (float(model.rover_h_mm), float(model.rover_v_mm)),
        "check mark": (float(check_h_mm), float(check_v_mm)),
        "check drift": (float(check_drift_h_mm), float(check_drift_v_mm)),
        "check motion": (float(check_motion_h_mm), float(check_motion_v_mm)),
    }


def check_shot_allowance_mm(distance_m, *, model: RtkErrorModel, **terms):
    """Largest check-shot discrepancy still consistent at 95 % (horizontal circle, vertical), mm.

    Terms (1σ, per horizontal axis / vertical; :func:`check_shot_terms_mm`), added in
    quadrature: H = 2.4477·√(Σσ_axis²), V = 1.96·√(Σσ_v²).

    Independence: base and check positions are treated as uncorrelated (σ_base² + σ_check²),
    because the registry stores no cross-covariance between marks. When both come from one
    adjustment their errors are usually positively correlated, and the variance of their
    difference is σ_base² + σ_check² − 2·cov, smaller than what is used here. So this
    allowance errs on the large side: it is lenient, and a check shot is *less* likely to be
    flagged than with the true difference covariance (FGDC Part 2's local accuracy,
    Σ_Δ = Σ1 + Σ2 − Σ12 − Σ21), which would tighten it.

    >>> m = RtkErrorModel(h_fixed_mm=0, v_fixed_mm=0, setup_h_mm=0, setup_v_mm=0, rover_h_mm=0, rover_v_mm=0)
    >>> h, v = check_shot_allowance_mm(0.0, model=m, base_h_mm=0, base_v_mm=0, base_drift_h_mm=0,
    ...     base_drift_v_mm=0, check_h_mm=10, check_v_mm=25, check_drift_h_mm=0, check_drift_v_mm=0)
    >>> round(float(h), 3), round(float(v), 3)
    (24.477, 48.999)
    """
    t = check_shot_terms_mm(distance_m, model=model, **terms)
    sh2 = sum(h * h for h, _ in t.values())
    sv2 = sum(v * v for _, v in t.values())
    return K_H95 * math.sqrt(sh2), K_V95 * math.sqrt(sv2)


# ----------------------------------------------------------------------------- motion to the field date


def median_velocity_mm_yr(vel_enu_mm_yr):
    """Per-axis median of a set of velocities (n, 3), their scatter and the median's standard error (mm/yr).

    Scatter: the normal-consistent median absolute deviation 1.4826 · MAD, a robust σ of one
    mark's velocity about the median. Standard error of the median: 1.2533 · scatter / √n (the
    median's asymptotic efficiency factor √(π/2) = 1.2533; e.g. Huber & Ronchetti, *Robust
    Statistics*, 2009). Returns (median (3,), scatter (3,), standard error (3,)).

    >>> med, sc, se = median_velocity_mm_yr(np.array([[0., 0., -1.], [1., 0., -2.], [2., 0., -9.]]))
    >>> med.tolist(), [round(float(x), 4) for x in sc], [round(float(x), 4) for x in se]
    ([1.0, 0.0, -2.0], [1.4826, 0.0, 1.4826], [1.0728, 0.0, 1.0728])
    """
    v = np.atleast_2d(np.asarray(vel_enu_mm_yr, dtype=float))
    med = np.median(v, axis=0)
    scatter = 1.4826 * np.median(np.abs(v - med), axis=0)
    return med, scatter, 1.2533 * scatter / math.sqrt(v.shape[0])


def relative_motion_mm(site_vel_mm_yr, base_vel_mm_yr, rel_sigma_mm_yr, years):
    """Motion of a base relative to the site over ``years`` (field date − deliverable epoch).

    Offset per axis (v_site − v_base)·Δt (mm); the term per axis is √(offset² + (σ_rel·|Δt|)²),
    horizontal from the length of the east/north offset and the larger horizontal σ. Returns
    (term_h_mm, term_v_mm, offset_enu_mm).

    >>> h, v, off = relative_motion_mm((0, 0, 0), (-0.8, 0.5, -4.5), (0, 0, 0), 16.93)
    >>> [round(float(x), 1) for x in off], round(h, 1), round(v, 1)
    ([13.5, -8.5, 76.2], 16.0, 76.2)
    """
    site = np.asarray(site_vel_mm_yr, dtype=float)
    base = np.asarray(base_vel_mm_yr, dtype=float)
    sig = np.asarray(rel_sigma_mm_yr, dtype=float)
    off = (site - base) * years
    spread = sig * abs(years)
    h = math.hypot(math.hypot(off[0], off[1]), max(spread[0], spread[1]))
    v = math.hypot(off[2], spread[2])
    return h, v, off
