"""The audit trail: JSON-safe snapshots, one row per service call, append-only at every level."""

from __future__ import annotations

import datetime as dt
import decimal

import pytest
from django.contrib.auth.models import AnonymousUser
from django.db import DatabaseError, connection, transaction

from registry.models import AuditEvent, AuditTrailError
from registry.services.audit import audit_record, json_safe, snapshot
from registry.services.fieldwork import occupation_record, visit_record
from registry.services.marks import mark_set_status, mark_update
from registry.services.positions import position_propose, position_publish, position_reject, position_withdraw
from tests.services._data import make_mark, position_data

pytestmark = pytest.mark.django_db


def test_json_safe_converts_dates_decimals_and_containers():
    value = {
        "when": dt.datetime(2024, 5, 1, 15, 30, tzinfo=dt.UTC),
        "day": dt.date(2024, 5, 1),
        "sigma_m": decimal.Decimal("0.005"),
        "lat_deg": 45.2012345678,
        "codes": ("A", "B"),
        "nested": {"n": None, "ok": True},
    }
    assert json_safe(value) == {
        "when": "2024-05-01T15:30:00+00:00",
        "day": "2024-05-01",
        "sigma_m": 0.005,
        "lat_deg": 45.2012345678,
        "codes": ["A", "B"],
        "nested": {"n": None, "ok": True},
    }


def test_snapshot_and_record_round_trip_through_the_database(manager):
    mark = make_mark(manager)
    event = audit_record(
        actor=manager, action="mark_note", obj=mark, after=snapshot(mark, ["code", "version"]), note="n"
    )
    stored = AuditEvent.objects.get(pk=event.pk)
    assert stored.after == {"code": "QR-101", "version": 1}
    assert (stored.object_type, stored.object_repr, stored.mark_id, stored.note) == ("mark", "QR-101", mark.pk, "n")


def test_anonymous_actor_is_stored_as_no_actor(manager):
    mark = make_mark(manager)
    event = audit_record(actor=AnonymousUser(), action="mark_note", obj=mark)
    assert event.actor is None


def test_every_service_call_writes_exactly_one_row_per_change(manager, technician):
    counts = []

    def step(fn, **kwargs):
        before = AuditEvent.objects.count()
        result = fn(**kwargs)
        counts.append((fn.__name__, AuditEvent.objects.count() - before))
        return result

    make_mark(manager)
    step(mark_update, actor=manager, code="QR-101", expected_version=1, changes={"notes": "n"})
    step(mark_set_status, actor=manager, code="QR-101", status="retired", expected_version=2, note="r")
    p = step(position_propose, actor=technician, mark_code="QR-101", data=position_data())
    step(position_publish, actor=manager, position_id=p.pk)
    q = step(position_propose, actor=technician, mark_code="QR-101", data=position_data(epoch_yr=2024.0))
    step(position_reject, actor=manager, position_id=q.pk, note="float only")
    step(position_withdraw, actor=manager, position_id=p.pk, note="blunder")
    step(visit_record, actor=technician, mark_code="QR-101", data={"visited_on": "2024-05-01", "finding": "intact"})
    step(
        occupation_record,
        actor=technician,
        mark_code="QR-101",
        data={"method": "rtk", "start_utc": "2024-05-01T15:00:00Z", "end_utc": "2024-05-01T15:03:00Z"},
    )
    assert all(n == 1 for _, n in counts), counts


def test_orm_refuses_to_change_or_delete_an_event(manager):
    make_mark(manager)
    event = AuditEvent.objects.get()
    event.note = "rewritten"
    with pytest.raises(AuditTrailError):
        event.save()
    with pytest.raises(AuditTrailError):
        event.delete()


@pytest.mark.parametrize(
    "sql",
    [
        "UPDATE registry_auditevent SET note = 'rewritten'",
        "DELETE FROM registry_auditevent",
    ],
)
def test_database_refuses_to_change_or_delete_events(manager, sql):
    make_mark(manager)
    with pytest.raises(DatabaseError):
        with transaction.atomic(), connection.cursor() as cursor:
            cursor.execute(sql)
    assert AuditEvent.objects.get().note == ""


def test_queryset_update_and_delete_are_refused_too(manager):
    """QuerySet.update()/delete() bypass save(); the database trigger still holds."""
    make_mark(manager)
    with pytest.raises(DatabaseError):
        with transaction.atomic():
            AuditEvent.objects.update(note="rewritten")
    with pytest.raises(DatabaseError):
        with transaction.atomic():
            AuditEvent.objects.all()._raw_delete(AuditEvent.objects.db)
    assert AuditEvent.objects.count() == 1
