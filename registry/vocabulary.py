"""Earlier names of the mark description fields and visit findings, still accepted on input (deprecated).

The mark description and the visit findings were renamed into our own words (README, "Earlier names").
Files and API requests written with the earlier names keep working for one more release: the importers,
the mark services and the visit service translate them here. Output (pages, API responses, exports)
uses the new names only.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from django.core.exceptions import ValidationError

#: Mark fields and file columns: old name → new name.
OLD_MARK_FIELDS: dict[str, str] = {
    "to_reach": "access_directions",
    "monument_type": "monument",
    "setting": "monument_detail",
    "stamping": "marking",
    "custodian": "keeper",
}
#: Visit fields: old name → new name.
OLD_VISIT_FIELDS: dict[str, str] = {"condition": "finding"}
#: Visit findings: old value → new value (``disturbed`` and ``destroyed`` are unchanged).
OLD_FINDING_VALUES: dict[str, str] = {"good": "intact", "poor": "damaged", "not_found": "searched_not_found"}


def old_name_clashes(keys, mapping: Mapping[str, str]) -> list[tuple[str, str]]:
    """Pairs (old, new) where both names are given.

    >>> old_name_clashes(["code", "custodian", "keeper"], OLD_MARK_FIELDS)
    [('custodian', 'keeper')]
    """
    present = set(keys)
    return [(old, new) for old, new in mapping.items() if old in present and new in present]


def rename_old_keys(data: Mapping[str, Any], mapping: Mapping[str, str]) -> dict[str, Any]:
    """``data`` with old keys renamed; both the old and the new name of one field is an error.

    >>> rename_old_keys({"code": "A-1", "stamping": "A-1 2020"}, OLD_MARK_FIELDS)
    {'code': 'A-1', 'marking': 'A-1 2020'}
    """
    clashes = old_name_clashes(data.keys(), mapping)
    if clashes:
        raise ValidationError(
            {
                old: ValidationError(
                    "'%(old)s' is the earlier name of '%(new)s'; give one of them.",
                    code="old_and_new_name",
                    params={"old": old, "new": new, "field": old},
                )
                for old, new in clashes
            }
        )
    return {mapping.get(key, key): value for key, value in data.items()}


def new_finding(value: Any) -> Any:
    """A finding value with the earlier words translated (anything else is returned as it is).

    >>> new_finding("good"), new_finding("disturbed"), new_finding(3)
    ('intact', 'disturbed', 3)
    """
    if isinstance(value, str) and value.strip() in OLD_FINDING_VALUES:
        return OLD_FINDING_VALUES[value.strip()]
    return value
