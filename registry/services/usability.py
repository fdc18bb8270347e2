"""Whether a mark's coordinates may be used, in words, and which field actions it still takes.

One rule for every place that shows a mark (the mark page, the list, marks near a point, the API)
and for the services that record work on it: a **destroyed** mark takes no occupation and no new
position (``services.fieldwork.occupation_record`` and ``services.positions.position_propose`` ask
:func:`allows_occupation` / :func:`allows_new_position`); a **suspect** mark, a mark whose latest visit
found it disturbed or did not find it, a retired or a destroyed mark are **not for use**: pages grey
its coordinates and say why, with a caution that fits its state.

:func:`assess` is pure (status and latest finding in, words out) so that pages, API and imports
agree; the words are for people, the ``state`` codes for the API.
"""

from __future__ import annotations

from dataclasses import dataclass
from types import EllipsisType

from registry.models import Finding, MarkStatus

#: General caution for a usable mark (common practice: check the mark, tie to a second mark).
USABLE_CAUTION = (
    "Check that the mark is undisturbed and occupy a second trusted mark before relying on these "
    "coordinates; use them only in the frame and at the epoch stated. Local codes, the office's "
    "procedures and licensed professional practice govern their use."
)

#: Every ``state`` code :func:`assess` gives, with its meaning (the API schema documents these; stable codes).
STATES: dict[str, str] = {
    "usable": "usable: no recorded state or visit finding stands against it",
    "destroyed": "not for use: the mark is recorded as destroyed",
    "retired": "not for use: retired from the registry's active network",
    "suspect": "not for use: suspect, awaiting re-observation or a control manager's clearance",
    "last_visit_disturbed": "not for use: the latest visit found the mark disturbed",
    "last_visit_not_found": "not for use: the latest visit searched for the mark and did not find it",
    "last_visit_destroyed": "not for use: the latest visit found the mark destroyed (status not yet changed)",
}
#: The codes alone (the API schema's enum, settings.SPECTACULAR_SETTINGS["ENUM_NAME_OVERRIDES"]).
STATE_CODES = tuple(STATES)

_CLOSING = " Local codes, the office's procedures and licensed professional practice govern any use of this mark."


@dataclass(frozen=True)
class Usability:
    """A mark's usability: ``state`` (code for the API), ``usable``, and words for pages.

    ``label`` is the short word for rows ("usable", "not for use"); ``headline`` and ``caution``
    are the banner's title and text (the caution is shown for usable marks too).
    """

    state: str
    usable: bool
    label: str
    headline: str
    reason: str
    caution: str
    occupation_allowed: bool
    new_position_allowed: bool

    def as_dict(self) -> dict:
        return {"state": self.state, "usable": self.usable, "reason": self.reason}


def _not_for_use(state: str, headline: str, reason: str, caution: str, *, records_allowed: bool = True) -> Usability:
    """A mark that is not for use: its words, the closing caution, and whether field records are taken."""
    return Usability(
        state=state,
        usable=False,
        label="not for use",
        headline=headline,
        reason=reason,
        caution=caution + _CLOSING,
        occupation_allowed=records_allowed,
        new_position_allowed=records_allowed,
    )


#: Latest-visit findings that make a mark not for use: state, headline, reason, caution.
_FINDING_WORDS: dict[str, tuple[str, str, str, str]] = {
    Finding.DISTURBED: (
        "last_visit_disturbed",
        "Last visit found it disturbed — not for use",
        "the latest visit found the mark disturbed",
        "The latest visit found the monument disturbed: it may no longer be where its coordinates "
        "put it. Re-observe it before any use.",
    ),
    Finding.SEARCHED_NOT_FOUND: (
        "last_visit_not_found",
        "Not found at the last visit — not for use",
        "the latest visit searched for the mark and did not find it",
        "The latest visit searched for the mark and did not find it. Until it is found and checked, use another mark.",
    ),
    Finding.DESTROYED: (
        "last_visit_destroyed",
        "Last visit found it destroyed — not for use",
        "the latest visit found the mark destroyed",
        "The latest visit found the mark destroyed; a control manager has not yet recorded it so. "
        "Do not use its coordinates.",
    ),
}


def assess(status: str, last_finding: str | None = None, *, suspect_reason: str = "") -> Usability:
    """The usability of a mark with ``status`` whose latest visit found ``last_finding`` (or none).

    >>> assess("active", "intact").usable
    True
    >>> assess("destroyed").label
    'not for use'
    >>> assess("active", "disturbed").state
    'last_visit_disturbed'
    """
    if status == MarkStatus.DESTROYED:
        return _not_for_use(
            "destroyed",
            "Destroyed — not for use",
            "the mark is recorded as destroyed",
            "The mark is recorded as destroyed. Its coordinates describe a point that no longer exists "
            "on the ground: do not stake, set up on or check to anything at this place. If a monument "
            "is found here, treat it as unknown until it is identified and re-observed as a new mark.",
            records_allowed=False,
        )
    if status == MarkStatus.RETIRED:
        return _not_for_use(
            "retired",
            "Retired — not for use",
            "the mark is retired from the registry's active network",
            "The office no longer maintains this mark. Its coordinates are kept as history; they may "
            "be out of date. Use an active mark, or re-observe this one and have it made active again.",
        )
    if status == MarkStatus.SUSPECT:
        why = suspect_reason or "awaiting re-observation"
        return _not_for_use(
            "suspect",
            "Suspect — not for use until re-observed",
            f"suspect: {why}",
            "The mark may have moved. Do not use its coordinates until it is re-observed and a new "
            "position is published, or a control manager clears it.",
        )
    if last_finding in _FINDING_WORDS:
        return _not_for_use(*_FINDING_WORDS[last_finding])
    return Usability(
        state="usable",
        usable=True,
        label="usable",
        headline="",
        reason="",
        caution=USABLE_CAUTION,
        occupation_allowed=True,
        new_position_allowed=True,
    )


def mark_usability(mark, last_finding: str | None | EllipsisType = ...) -> Usability:
    """:func:`assess` for a mark instance; reads its latest visit when ``last_finding`` is not given."""
    finding: str | None
    if isinstance(last_finding, EllipsisType):
        from registry.models import Visit

        finding = (
            Visit.objects.filter(mark=mark)
            .order_by("-visited_on", "-created_at", "-pk")
            .values_list("finding", flat=True)
            .first()
        )
    else:
        finding = last_finding
    return assess(mark.status, finding, suspect_reason=mark.suspect_reason)
