"""The screening in words: its one-paragraph statement, the cautions, and where each budget term comes from."""

from __future__ import annotations

from typing import TYPE_CHECKING

from registry.geodesy import rtk

if TYPE_CHECKING:
    from registry.services.screening.params import ScreeningSettings
    from registry.services.screening.result import Candidate

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


#: Where each error-budget term comes from (the base term's text is per candidate: ``Candidate.base_description``,
#: the motion term's too: ``Candidate.motion_note``).
BUDGET_TERM_DESCRIPTIONS = (
    ("rtk", "receiver a + b·d at the farthest site point (job's error model)"),
    (
        "base",
        "published position's σ from its covariance, plus any frame change's stated accuracy; vertically, when "
        "orthometric heights are delivered, the σ of the base's orthometric height on record, if it has one",
    ),
    ("drift", "coordinate epoch to the deliverable epoch (velocity σ × |Δt|, or the assumed rate × |Δt|)"),
    (
        "motion",
        "the base's motion relative to the site from the deliverable epoch to the field date "
        "((v_site − v_base) × Δt with its uncertainty)",
    ),
    ("setup", "base centring (per axis) and antenna height"),
    ("rover", "rover pole centring (per axis) and rod height"),
    ("geoid", "the geoid model's stated σ (vertical; orthometric deliverables only)"),
)

#: Why the horizontal RTK figure is read as σ per axis unless the job says otherwise.
H_MEANING_WORDS = {
    "per_axis": (
        "read as 1σ per horizontal axis (the conservative reading: read as 2D RMS it would be √2 smaller per axis; "
        "use that only when the receiver's specification says so)"
    ),
    "drms": "read as 2D RMS (σ_E² + σ_N²)^½, so σ per axis is the figure ÷ √2 (as the job states)",
}


def error_model_words(s: ScreeningSettings) -> str:
    """The job's RTK error model and how its horizontal figure is read, in words."""
    m = s.model
    comb = "root-sum-square" if m.combination == "rss" else "additive"
    return (
        f"{m.h_fixed_mm:g} mm + {m.h_ppm:g} ppm horizontal, {H_MEANING_WORDS[m.h_meaning]}; "
        f"{m.v_fixed_mm:g} mm + {m.v_ppm:g} ppm vertical; {comb}"
    )


def _achievable_words(core: rtk.ScreeningCore) -> str:
    import math

    if not (math.isfinite(core.achievable_h95_mm) and math.isfinite(core.achievable_v95_mm)):
        return (
            " Part of the site lies beyond the maximum baseline from every usable mark, so no tolerance is "
            "reachable there."
        )
    split = (
        " (the horizontal and the vertical figure come from different bases at some points)"
        if core.achievable_split
        else ""
    )
    return (
        f" Using the best base at every point, the tightest tolerances reachable are "
        f"{core.achievable_h95_mm:.1f} mm horizontal and {core.achievable_v95_mm:.1f} mm vertical{split}."
    )


def screening_statement(
    s: ScreeningSettings, core: rtk.ScreeningCore, usable: list[Candidate], pair, chosen: list[Candidate]
) -> str:
    """The screening's outcome in one paragraph of plain English (``usable``: usable candidates, ranked)."""
    tol = f"{s.tol_h_mm:.1f} mm horizontal and {s.tol_v_mm:.1f} mm vertical at 95 %"
    if not usable:
        return (
            f"No mark passes the screening rules within {s.max_baseline_m / 1000:.1f} km of any part of the site, "
            f"so no base can be proposed. See the reasons listed for each mark."
        )
    best = usable[0]
    if best.covers_site:
        return (
            f"{best.mark.code} covers the whole site within {tol}: worst figures {best.h95_mm:.1f} mm horizontal, "
            f"{best.v95_mm:.1f} mm vertical (margin {best.margin_mm:.1f} mm)."
        )
    if pair is not None and core.pair_worst_margin_mm >= 0 and len(chosen) == 2:
        return (
            f"No single base covers the whole site within {tol}. The pair {pair[0].mark.code} + {pair[1].mark.code} "
            f"does when each part of the site is surveyed from the better of the two (worst "
            f"{core.pair_worst_h95_mm:.1f} mm horizontal, {core.pair_worst_v95_mm:.1f} mm vertical); the map "
            f"outlines the part each base serves."
        )
    if len(chosen) > 2:
        codes = " + ".join(c.mark.code for c in chosen)
        full = core.cover_coverage >= 1.0
        return (
            f"No single base or pair covers the whole site within {tol}. The bases {codes}, chosen one at a time "
            f"each adding the most uncovered site (greedy cover), "
            + ("cover all of it" if full else f"cover {core.cover_coverage * 100:.0f} % of it")
            + " when each part is surveyed from the base the map outlines for it."
            + ("" if full else _achievable_words(core))
        )
    pair_text = (
        f" The best pair, {pair[0].mark.code} + {pair[1].mark.code}, covers {core.pair_coverage * 100:.0f} %."
        if pair is not None
        else ""
    )
    return (
        f"The site cannot be covered within {tol} from the marks available. The best single base, "
        f"{best.mark.code}, covers {best.coverage * 100:.0f} % of the site (worst {best.h95_mm:.1f} mm horizontal, "
        f"{best.v95_mm:.1f} mm vertical).{pair_text}{_achievable_words(core)} Consider new control on or near the "
        f"site (static GNSS), a network RTK service, or a review of the tolerances with the client."
    )
