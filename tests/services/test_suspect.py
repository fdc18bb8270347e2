"""Suspect marks (registry.services.suspect): how a mark becomes suspect, what does not change it, and the
only ways back to active. Marks and people are invented."""

from __future__ import annotations

import datetime as dt

import pytest
from django.core.exceptions import ValidationError
from django.utils import timezone

from registry.errors import Conflict, NotFound, PermissionDeniedError
from registry.models import AuditEvent, Mark, MarkStatus
from registry.services.fieldwork import visit_record
from registry.services.marks import mark_create, mark_set_status, mark_update
from registry.services.positions import position_propose, position_publish
from registry.services.suspect import mark_clear_suspect, mark_make_suspect
from tests.services._data import make_mark, make_published, position_data

pytestmark = pytest.mark.django_db

TODAY = timezone.now().date()


def codes_of(exc: ValidationError) -> dict[str, list[str]]:
    return {k: [e.code for e in v] for k, v in exc.error_dict.items()}


def visit(actor, finding: str, day: dt.date = TODAY, code: str = "QR-101", **extra):
    return visit_record(actor=actor, mark_code=code, data={"visited_on": day.isoformat(), "finding": finding, **extra})


@pytest.fixture
def published_mark(manager, technician):
    """QR-101, active, with a position published today (version 1: publishing leaves the version alone)."""
    make_mark(manager)
    make_published(manager, technician)
    return Mark.objects.get(code="QR-101")


def make_suspect(technician, finding="disturbed") -> Mark:
    visit(technician, finding)
    return Mark.objects.get(code="QR-101")


# ---- becoming suspect ------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("finding", "words"),
    [("disturbed", "found it disturbed"), ("searched_not_found", "searched for it and did not find it")],
)
def test_a_disturbed_or_not_found_visit_makes_the_mark_suspect_and_is_audited(
    published_mark, technician, finding, words
):
    visit(technician, finding)
    mark = Mark.objects.get(code="QR-101")
    assert mark.status == MarkStatus.SUSPECT and mark.suspect_since == TODAY
    assert mark.suspect_reason == f"the visit of {TODAY.isoformat()} {words}"
    assert mark.version == published_mark.version + 1  # a form or file made before this is stale
    event = AuditEvent.objects.get(action="mark_make_suspect")
    assert event.actor == technician and event.mark_id == mark.pk
    assert event.before == {"status": "active", "version": 1}
    assert event.after["status"] == "suspect" and event.after["suspect_since"] == TODAY.isoformat()


@pytest.mark.parametrize("finding", ["intact", "damaged", "destroyed"])
def test_other_findings_leave_the_status_alone(published_mark, technician, finding):
    visit(technician, finding)
    mark = Mark.objects.get(code="QR-101")
    assert (mark.status, mark.suspect_since, mark.version) == ("active", None, 1)
    assert not AuditEvent.objects.filter(action="mark_make_suspect").exists()


def test_a_later_intact_visit_does_not_clear_it(published_mark, technician):
    visit(technician, "disturbed", TODAY)
    visit(technician, "intact", TODAY, notes="Looks fine now")
    mark = Mark.objects.get(code="QR-101")
    assert mark.status == "suspect" and mark.suspect_since == TODAY


def test_a_visit_older_than_the_newest_publication_changes_nothing(published_mark, technician):
    """The position published today already answers a report from last month."""
    visit(technician, "disturbed", TODAY - dt.timedelta(days=30))
    assert Mark.objects.get(code="QR-101").status == "active"


def test_a_mark_without_a_published_position_becomes_suspect(manager, technician):
    make_mark(manager)
    visit(technician, "searched_not_found", TODAY - dt.timedelta(days=400))
    assert Mark.objects.get(code="QR-101").status == "suspect"


@pytest.mark.parametrize("status", ["retired", "destroyed"])
def test_retired_and_destroyed_marks_are_not_changed_by_visits(manager, technician, status):
    make_mark(manager, status=status)
    visit(technician, "disturbed")
    assert Mark.objects.get(code="QR-101").status == status


def test_a_second_report_keeps_the_first_reason_and_date(published_mark, technician):
    make_suspect(technician)
    visit(technician, "searched_not_found")
    mark = Mark.objects.get(code="QR-101")
    assert "found it disturbed" in mark.suspect_reason and mark.version == 2
    assert AuditEvent.objects.filter(action="mark_make_suspect").count() == 1


def test_the_helper_for_other_rules_changes_only_active_marks(published_mark, manager):
    """mark_make_suspect: the call a failed movement check will make inside its own transaction."""
    mark = Mark.objects.get(code="QR-101")
    assert mark_make_suspect(mark=mark, reason="the check of 2026-01-05 found it moved", since=TODAY, actor=manager)
    assert (mark.status, mark.version) == ("suspect", 2)  # refreshed in place
    assert not mark_make_suspect(mark=mark, reason="again", since=TODAY, actor=manager)
    assert Mark.objects.get(code="QR-101").suspect_reason == "the check of 2026-01-05 found it moved"


def test_old_visit_names_and_values_are_still_accepted(published_mark, technician):
    """Deprecated for one release: condition=good/poor/not_found (README, earlier names)."""
    for old, new in (("good", "intact"), ("poor", "damaged"), ("not_found", "searched_not_found")):
        recorded = visit_record(
            actor=technician, mark_code="QR-101", data={"visited_on": TODAY.isoformat(), "condition": old}
        )
        assert recorded.finding == new
    assert Mark.objects.get(code="QR-101").status == "suspect"  # the not_found one
    with pytest.raises(ValidationError) as info:
        visit_record(
            actor=technician,
            mark_code="QR-101",
            data={"visited_on": TODAY.isoformat(), "condition": "good", "finding": "intact"},
        )
    assert codes_of(info.value) == {"condition": ["old_and_new_name"]}


# ---- back to active: a new position -------------------------------------------------------------


def test_publishing_a_new_position_clears_it_in_the_same_audit_row(published_mark, manager, technician):
    make_suspect(technician)
    proposed = position_propose(
        actor=technician, mark_code="QR-101", data=position_data(epoch_yr=2026.0, source="re-observed (invented)")
    )
    position_publish(actor=manager, position_id=proposed.pk, note="re-observed after the report")
    mark = Mark.objects.get(code="QR-101")
    assert (mark.status, mark.suspect_since, mark.suspect_reason, mark.version) == ("active", None, "", 3)
    event = AuditEvent.objects.get(action="position_publish", object_id=str(proposed.pk))
    assert event.before["mark_status"] == "suspect" and event.after["mark_status"] == "active"
    assert "found it disturbed" in event.before["mark_suspect_reason"] and event.after["mark_version"] == 3


# ---- back to active: a manager's clearance --------------------------------------------------------


def test_a_manager_clears_it_with_a_note_audited(published_mark, manager, technician):
    make_suspect(technician)
    mark = mark_clear_suspect(
        actor=manager, code="QR-101", note="Re-checked with a check shot: 4 mm", expected_version=2
    )
    assert (mark.status, mark.suspect_since, mark.suspect_reason, mark.version) == ("active", None, "", 3)
    event = AuditEvent.objects.get(action="mark_clear_suspect")
    assert event.actor == manager and event.note == "Re-checked with a check shot: 4 mm"
    assert event.before["status"] == "suspect" and event.after == {
        "status": "active",
        "suspect_since": None,
        "suspect_reason": "",
        "version": 3,
    }


@pytest.mark.parametrize("note", ["", "   ", None])
def test_clearance_needs_a_note(published_mark, manager, technician, note):
    make_suspect(technician)
    with pytest.raises(ValidationError) as info:
        mark_clear_suspect(actor=manager, code="QR-101", note=note, expected_version=2)
    assert codes_of(info.value) == {"note": ["note_required"]}
    assert Mark.objects.get(code="QR-101").status == "suspect"


def test_clearance_from_a_stale_version_is_refused_and_recorded(published_mark, manager, technician):
    make_suspect(technician)
    with pytest.raises(Conflict) as info:
        mark_clear_suspect(actor=manager, code="QR-101", note="Checked", expected_version=1)
    assert info.value.code == "stale_version"
    assert Mark.objects.get(code="QR-101").status == "suspect"
    assert AuditEvent.objects.filter(action="mark_clear_suspect_refused").count() == 1
    assert not AuditEvent.objects.filter(action="mark_clear_suspect").exists()


def test_clearing_a_mark_that_is_not_suspect_is_refused(published_mark, manager):
    with pytest.raises(Conflict) as info:
        mark_clear_suspect(actor=manager, code="QR-101", note="Checked", expected_version=1)
    assert info.value.code == "not_suspect"


def test_viewers_and_technicians_cannot_clear(published_mark, technician, viewer, make_user):
    make_suspect(technician)
    for user in (technician, viewer):
        with pytest.raises(PermissionDeniedError):
            mark_clear_suspect(actor=user, code="QR-101", note="Looks fine", expected_version=2)
    with pytest.raises(NotFound):  # no role at all: the same answer as for a mark that does not exist
        mark_clear_suspect(actor=make_user("nobody"), code="QR-101", note="x", expected_version=2)
    assert Mark.objects.get(code="QR-101").status == "suspect"


# ---- the status action is no back door ------------------------------------------------------------


def test_the_status_action_neither_sets_nor_lifts_suspect(published_mark, manager, technician):
    with pytest.raises(ValidationError) as info:
        mark_set_status(actor=manager, code="QR-101", status="suspect", expected_version=1, note="x")
    assert codes_of(info.value) == {"status": ["suspect_not_settable"]}
    make_suspect(technician)
    with pytest.raises(ValidationError) as info:
        mark_set_status(actor=manager, code="QR-101", status="active", expected_version=2, note="fine")
    assert codes_of(info.value) == {"status": ["suspect_needs_clearance"]}
    with pytest.raises(ValidationError) as info:
        mark_create(actor=manager, data={"code": "QR-200", "status": "suspect"})
    assert codes_of(info.value) == {"status": ["suspect_not_settable"]}
    assert Mark.objects.get(code="QR-101").status == "suspect"


def test_retiring_a_suspect_mark_ends_the_suspicion_and_reactivating_reapplies_the_rule(
    published_mark, manager, technician
):
    make_suspect(technician)
    mark = mark_set_status(actor=manager, code="QR-101", status="retired", expected_version=2, note="Access lost")
    assert (mark.status, mark.suspect_since, mark.suspect_reason) == ("retired", None, "")
    retire = AuditEvent.objects.get(action="mark_set_status")
    assert retire.before["status"] == "suspect" and "found it disturbed" in retire.before["suspect_reason"]
    # Back into use: its last report still stands, so it is suspect again, not active.
    mark = mark_set_status(actor=manager, code="QR-101", status="active", expected_version=mark.version)
    assert mark.status == "suspect" and mark.suspect_since == TODAY
    assert AuditEvent.objects.filter(action="mark_make_suspect").count() == 2


def test_an_edit_made_before_it_became_suspect_is_stale(published_mark, manager, technician):
    make_suspect(technician)
    with pytest.raises(Conflict):
        mark_update(actor=manager, code="QR-101", expected_version=1, changes={"keeper": "Someone else"})
