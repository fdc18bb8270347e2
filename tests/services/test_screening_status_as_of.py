"""Screening as of a past date uses each mark's status as it stood then (selectors.screening.status_as_of):
a mark recorded destroyed today was a usable base yesterday, and a mark put back into use today was not.

The rule is the registry's own (the first audited status change after the date holds the earlier status);
the dates are relative to the day the test runs, the marks and job invented (tests/services/test_screening.py).
"""

from __future__ import annotations

import datetime as dt

import pytest

from registry.models import AuditEvent, Mark, MarkStatus
from registry.selectors.screening import status_as_of
from registry.services.marks import mark_set_status
from registry.services.screening import job_screen
from tests.services.test_screening import make_job, make_mark

pytestmark = pytest.mark.django_db


def today():
    return dt.datetime.now(dt.UTC).date()


def reasons(result, code):
    return next(c for c in result.candidates if c.mark.code == code).reasons


def test_destroyed_today_was_usable_yesterday(viewer, manager):
    mark = make_mark("SA-1", 800.0, 10.0)
    make_job()
    mark_set_status(
        actor=manager,
        code="SA-1",
        status=MarkStatus.DESTROYED,
        expected_version=mark.version,
        note="Found broken out by road works.",
    )
    assert "not_active" in reasons(job_screen(actor=viewer, code="J-SCR", as_of=today()), "SA-1")
    assert reasons(job_screen(actor=viewer, code="J-SCR", as_of=today() - dt.timedelta(days=1)), "SA-1") == []


def test_put_back_into_use_today_was_retired_yesterday(viewer, manager):
    mark = make_mark("SA-2", 800.0, 10.0, status=MarkStatus.RETIRED)
    make_job()
    mark_set_status(actor=manager, code="SA-2", status=MarkStatus.ACTIVE, expected_version=mark.version)
    assert reasons(job_screen(actor=viewer, code="J-SCR", as_of=today()), "SA-2") == []
    assert "not_active" in reasons(job_screen(actor=viewer, code="J-SCR", as_of=today() - dt.timedelta(days=1)), "SA-2")


def test_the_first_change_after_the_date_decides_and_refused_attempts_do_not_count():
    mark = Mark.objects.create(
        code="SA-3", name="Invented SA-3", status=MarkStatus.ACTIVE, search_lat_deg=45.0, search_lon_deg=-110.0
    )
    t = dt.datetime(2025, 3, 1, 12, tzinfo=dt.UTC)

    def event(days, action, before, after):
        AuditEvent.objects.create(
            at=t + dt.timedelta(days=days),
            action=action,
            object_type="mark",
            object_id=str(mark.pk),
            mark=mark,
            before={"status": before},
            after={"status": after},
        )

    event(0, "mark_set_status", "active", "retired")  # 1 March: retired
    event(5, "mark_set_status_refused", "retired", "destroyed")  # refused: nothing changed
    event(10, "mark_set_status", "retired", "active")  # 11 March: back into use
    event(20, "mark_make_suspect", "active", "suspect")  # 21 March: suspect, and still is
    Mark.objects.filter(pk=mark.pk).update(status=MarkStatus.SUSPECT)
    mark.refresh_from_db()
    want = {
        dt.date(2025, 2, 28): "active",
        dt.date(2025, 3, 1): "retired",  # the end of the day of the change
        dt.date(2025, 3, 6): "retired",  # the refused attempt changed nothing
        dt.date(2025, 3, 11): "active",
        dt.date(2025, 3, 20): "active",
        dt.date(2025, 3, 21): "suspect",
        today(): "suspect",
    }
    assert {day: status_as_of([mark], day)[mark.pk] for day in want} == want


def _mark(code, status):
    return Mark.objects.create(
        code=code, name=f"Invented {code}", status=status, search_lat_deg=45.0, search_lon_deg=-110.0
    )


def _on(month, day):
    """9:00 UTC on that day of 2025: when an audit row was recorded."""
    return dt.datetime(2025, month, day, 9, tzinfo=dt.UTC)


def _event(mark, at, action, before, after, *, object_type="mark", object_id=None):
    AuditEvent.objects.create(
        at=at,
        action=action,
        object_type=object_type,
        object_id=str(mark.pk if object_id is None else object_id),
        mark=mark,
        before=before,
        after=after,
    )


def _change(mark, at, action, old, new):
    _event(mark, at, action, {"status": old}, {"status": new})


def _made_suspect(mark, at, since):
    _event(mark, at, "mark_make_suspect", {"status": "active"}, {"status": "suspect", "suspect_since": since})


def _status_on(mark, *days):
    return [status_as_of([mark], day)[mark.pk] for day in days]


def test_a_suspicion_takes_effect_on_the_day_of_the_visit_that_raised_it():
    """A disturbed visit of 3 March recorded in the office on 30 March: as of 10 March the mark was suspect."""
    mark = _mark("SA-4", MarkStatus.SUSPECT)
    _made_suspect(mark, _on(3, 30), "2025-03-03")
    assert _status_on(mark, dt.date(2025, 3, 2), dt.date(2025, 3, 10)) == ["active", "suspect"]


def test_a_suspicion_lifted_by_publishing_a_position_ends_on_that_day():
    """Publishing a new position lifts a suspicion; the change is recorded on the position's row."""
    mark = _mark("SA-5", MarkStatus.ACTIVE)
    _made_suspect(mark, _on(3, 1), "2025-03-01")
    _event(
        mark,
        _on(3, 10),
        "position_publish",
        {"state": "proposed", "mark_status": "suspect"},
        {"state": "published", "mark_status": "active"},
        object_type="position",
        object_id=987654,
    )
    assert _status_on(mark, dt.date(2025, 3, 5), dt.date(2025, 3, 20)) == ["suspect", "active"]


def test_a_backdated_suspicion_does_not_overtake_a_clearance_recorded_before_it():
    """Suspect from 1 Feb, cleared on 10 Mar; on 30 Mar a disturbed visit of 5 Mar is entered. The mark has been
    suspect again since the clearance at the latest: the backdated change takes effect no earlier than 10 Mar."""
    mark = _mark("SA-6", MarkStatus.SUSPECT)
    _made_suspect(mark, _on(2, 1), "2025-02-01")
    _change(mark, _on(3, 10), "mark_clear_suspect", "suspect", "active")
    _made_suspect(mark, _on(3, 30), "2025-03-05")
    _change(mark, _on(4, 2), "mark_note", None, "retired")  # no status before: skipped
    days = (dt.date(2025, 1, 31), dt.date(2025, 3, 9), dt.date(2025, 3, 20), dt.date(2025, 4, 5))
    assert _status_on(mark, *days) == ["active", "suspect", "suspect", "suspect"]


def test_a_backdated_suspicion_does_not_reach_back_past_an_earlier_recorded_change():
    """Retired on 1 Feb, back into use on 10 Mar, then made suspect (recorded 30 Mar) from a visit dated 5 Feb:
    on 20 Feb the mark was still retired, whatever the visit's date."""
    mark = _mark("SA-7", MarkStatus.SUSPECT)
    _change(mark, _on(2, 1), "mark_set_status", "active", "retired")
    _change(mark, _on(3, 10), "mark_set_status", "retired", "active")
    _made_suspect(mark, _on(3, 30), "2025-02-05")
    days = (dt.date(2025, 1, 31), dt.date(2025, 2, 20), dt.date(2025, 3, 12))
    assert _status_on(mark, *days) == ["active", "retired", "suspect"]
