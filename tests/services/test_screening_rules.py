"""The exclusion rules of base screening, one by one (registry policy: registry.services.screening.rules)."""

from __future__ import annotations

import pytest

from registry.services.screening.rules import REASON_WORDS, MarkFacts, rule_reasons

# ---------------------------------------------------------------- exclusion rules, one by one

GOOD = MarkFacts(
    status="active",
    sky_view="clear",
    last_visit_condition="intact",
    years_since_good_visit=2.0,
    has_published_position=True,
    transformable=True,
)


@pytest.mark.parametrize(
    "change, reason",
    [
        ({"status": "retired"}, "not_active"),
        ({"status": "destroyed"}, "not_active"),
        ({"status": "suspect"}, "suspect"),
        ({"last_visit_condition": "disturbed"}, "last_visit_disturbed"),
        ({"last_visit_condition": "destroyed"}, "last_visit_destroyed"),
        ({"last_visit_condition": "searched_not_found"}, "last_visit_not_found"),
        ({"years_since_good_visit": 10.01}, "no_recent_good_visit"),
        ({"years_since_good_visit": None}, "no_recent_good_visit"),
        ({"has_published_position": False, "transformable": None}, "no_published_position"),
        ({"transformable": False}, "frame_not_transformable"),
        ({"sky_view": "obstructed"}, "sky_obstructed"),
    ],
)
def test_each_rule_alone(change, reason):
    from dataclasses import replace

    assert rule_reasons(GOOD, recovery_years=10) == []
    assert rule_reasons(replace(GOOD, **change), recovery_years=10) == [reason]
    assert reason in REASON_WORDS


def test_rule_edges():
    from dataclasses import replace

    # Exactly at the recovery limit still counts; a poor last visit alone does not exclude;
    # partial sky view does not exclude.
    assert rule_reasons(replace(GOOD, years_since_good_visit=10.0), recovery_years=10) == []
    assert rule_reasons(replace(GOOD, last_visit_condition="damaged"), recovery_years=10) == []
    assert rule_reasons(replace(GOOD, sky_view="partial"), recovery_years=10) == []
