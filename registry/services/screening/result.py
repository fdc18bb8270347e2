"""What a screening produces: each candidate mark with its figures, the check marks, the whole result.

Plain dataclasses (they pickle, for :mod:`registry.services.screening.cache`). Presenting them, to
JSON, pages, the command and the field export, is :mod:`registry.services.screening.present`'s job.
"""

from __future__ import annotations

import datetime as dt
import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from registry.geodesy import rtk
from registry.geodesy import site as site_geo
from registry.geodesy.frames import frame_info
from registry.models import Mark, Position
from registry.services.screening.params import ScreeningSettings
from registry.services.screening.statement import CAUTIONS


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
    #: When orthometric heights are delivered and the mark has an orthometric height on record: its source and σ,
    #: which replace the ellipsoidal σ in the vertical base term.
    height_note: str = ""
    #: Largest |Δh| (m) from the base to the site's given heights (NaN when the site has none).
    max_dh_m: float = math.nan
    steps: list[dict] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)
    #: Years its position was held unmodelled in a dynamic frame (see frames.FrameTransformResult).
    unmodelled_hold_yr: float = 0.0
    #: The position's published velocity (east, north, up; mm/yr, in the position's frame) and its σ; None: none.
    velocity_mm_yr: tuple[float, float, float] | None = None
    velocity_sigma_mm_yr: tuple[float, float, float] | None = None
    #: Motion relative to the site from the deliverable epoch to the field date: the 1σ-sized terms
    #: (horizontal, vertical; mm), the predicted offset (east, north, up; mm) and how it was made (words).
    motion_h_mm: float = 0.0
    motion_v_mm: float = 0.0
    motion_offset_mm: tuple[float, float, float] | None = None
    motion_note: str = ""
    #: Every site point is within the maximum baseline of this base.
    reaches_site: bool = True
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
        return not self.excluded and self.reaches_site and self.margin_mm >= 0

    @property
    def coverage_words(self) -> str:
        """How much of the site it covers: "covers site", "covers N %" or "covers none".

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
        if self.height_note:
            text += "; vertical: " + self.height_note
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
    #: Per site point (grid order), which chosen base serves it (index into ``chosen``; −1: none).
    assignment: np.ndarray | None = None
    #: The field date the motion term runs to (the job's, else the screening's date).
    field_date: dt.date | None = None
    #: The deliverable grid at the site, for people ("" when it cannot be computed there).
    grid_label: str = ""

    @property
    def frame_label(self) -> str:
        return frame_info(self.settings.frame_epsg).label

    @property
    def usable_candidates(self) -> list[Candidate]:
        return [c for c in self.candidates if not c.excluded]

    def as_dict(self) -> dict[str, Any]:
        """The screening as plain JSON values (:func:`registry.services.screening.present.screening_document`)."""
        from registry.services.screening.present import screening_document

        return screening_document(self)
