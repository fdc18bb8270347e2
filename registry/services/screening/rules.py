"""The rules that exclude a mark from serving as an RTK base, with the words shown for each.

Registry policy, not geodesy: which states, visits and records make a mark unfit to hold as a base.
Each rule has a reason code (our own words, shown to the user beside the code's words) and is
decided here from plain facts gathered by :mod:`registry.services.screening.placing`; the baseline
rule depends on the site geometry and is applied after the core has run
(:func:`registry.services.screening.run.run_screening`).
"""

from __future__ import annotations

from dataclasses import dataclass

REASON_NOT_ACTIVE = "not_active"
REASON_SUSPECT = "suspect"
REASON_LAST_VISIT_DISTURBED = "last_visit_disturbed"
REASON_LAST_VISIT_DESTROYED = "last_visit_destroyed"
REASON_LAST_VISIT_NOT_FOUND = "last_visit_not_found"
REASON_NO_RECENT_GOOD_VISIT = "no_recent_good_visit"
REASON_NO_PUBLISHED_POSITION = "no_published_position"
REASON_FRAME_NOT_TRANSFORMABLE = "frame_not_transformable"
REASON_BEYOND_MAX_BASELINE = "beyond_max_baseline"
REASON_SKY_OBSTRUCTED = "sky_obstructed"
REASON_EPOCH_GAP_DYNAMIC = "epoch_gap_dynamic_frame"
#: Longest epoch gap (years) over which a position may be held unmodelled in a dynamic frame before
#: it is excluded: 0.1 yr of typical plate motion (1–7 cm/yr) is 1–7 mm, still inside the assumed
#: unmodelled rate's reach; a year is not.
DYNAMIC_HOLD_LIMIT_YR = 0.1

REASON_WORDS: dict[str, str] = {
    REASON_NOT_ACTIVE: "the mark is retired or recorded destroyed",
    REASON_SUSPECT: (
        "the mark is suspect: a disturbed or not-found report is newer than its newest published position; "
        "it stays out until a new position is published or a manager clears it"
    ),
    REASON_LAST_VISIT_DISTURBED: "the last visit found the mark disturbed",
    REASON_LAST_VISIT_DESTROYED: "the last visit found the mark destroyed",
    REASON_LAST_VISIT_NOT_FOUND: "the last visit did not find the mark",
    REASON_NO_RECENT_GOOD_VISIT: "no visit found it intact within the recovery period",
    REASON_NO_PUBLISHED_POSITION: "the mark has no published position",
    REASON_FRAME_NOT_TRANSFORMABLE: "its published frame cannot be transformed to the job's frame",
    REASON_BEYOND_MAX_BASELINE: "part of the site lies beyond the maximum baseline",
    REASON_SKY_OBSTRUCTED: "its sky view is recorded as obstructed",
    REASON_EPOCH_GAP_DYNAMIC: (
        "its position is in a dynamic frame at another epoch, with no velocity and no plate model to move it"
    ),
}
_LAST_VISIT_REASON = {
    "disturbed": REASON_LAST_VISIT_DISTURBED,
    "destroyed": REASON_LAST_VISIT_DESTROYED,
    "searched_not_found": REASON_LAST_VISIT_NOT_FOUND,
}


@dataclass(frozen=True)
class MarkFacts:
    """What the exclusion rules need to know about one candidate mark.

    ``years_since_good_visit`` is None when no visit ever found it intact;
    ``transformable`` is None when there is no published position to transform.
    """

    status: str
    sky_view: str
    last_visit_condition: str | None
    years_since_good_visit: float | None
    has_published_position: bool
    transformable: bool | None


def rule_reasons(facts: MarkFacts, *, recovery_years: float) -> list[str]:
    """Reason codes excluding a mark, from everything except the baseline rule.

    The baseline rule depends on the site geometry and is applied after the core
    (:func:`registry.geodesy.rtk.screen_candidates`). A suspect mark (``registry.services.suspect``:
    its latest disturbed or not-found visit is not older than its newest published position) has its
    own reason; a later intact visit does not bring it back, only a new published position or a
    manager's audited clearance does. A last visit that found it ``damaged`` (but usable) does not exclude a
    mark by itself; an ``intact`` visit within ``recovery_years`` is still required.

    Examples
    --------
    >>> f = MarkFacts("active", "clear", "intact", 1.5, True, True)
    >>> rule_reasons(f, recovery_years=10)
    []
    >>> rule_reasons(MarkFacts("retired", "obstructed", "searched_not_found", None, False, None), recovery_years=10)
    ['not_active', 'last_visit_not_found', 'no_recent_good_visit', 'no_published_position', 'sky_obstructed']
    >>> rule_reasons(MarkFacts("suspect", "clear", "intact", 0.1, True, True), recovery_years=10)
    ['suspect']
    """
    reasons = []
    if facts.status == "suspect":
        reasons.append(REASON_SUSPECT)
    elif facts.status != "active":
        reasons.append(REASON_NOT_ACTIVE)
    if facts.last_visit_condition in _LAST_VISIT_REASON:
        reasons.append(_LAST_VISIT_REASON[facts.last_visit_condition])
    if facts.years_since_good_visit is None or facts.years_since_good_visit > recovery_years:
        reasons.append(REASON_NO_RECENT_GOOD_VISIT)
    if not facts.has_published_position:
        reasons.append(REASON_NO_PUBLISHED_POSITION)
    elif facts.transformable is False:
        reasons.append(REASON_FRAME_NOT_TRANSFORMABLE)
    if facts.sky_view == "obstructed":
        reasons.append(REASON_SKY_OBSTRUCTED)
    return reasons
