"""``load_demo --reset`` lifts the two delete guards (audit trail, position history) and restores them.

The demo district holds published and superseded positions, so the reset can only succeed with the
position guard of migration 0005 lifted; afterwards a raw DELETE of a published position must fail
again, on SQLite (trigger recreated) and on PostgreSQL (trigger enabled again).
"""

from __future__ import annotations

import pytest
from django.core.management import call_command
from django.db import DatabaseError, connection, transaction

from registry.models import AuditEvent, Position, PositionState

pytestmark = pytest.mark.django_db


@pytest.fixture(autouse=True)
def fast_hashing(settings):
    settings.PASSWORD_HASHERS = ["django.contrib.auth.hashers.MD5PasswordHasher"]


def test_reset_deletes_history_positions_then_the_guards_are_back(capsys):
    call_command("load_demo")
    published = Position.objects.filter(state=PositionState.PUBLISHED).count()
    superseded = Position.objects.filter(state=PositionState.SUPERSEDED).count()
    assert published > 0 and superseded > 0  # the reset really has history to delete
    total = Position.objects.count()

    call_command("load_demo", "--reset")
    out = capsys.readouterr().out
    assert f"{total} positions" in out
    assert Position.objects.count() == total  # reloaded

    p = Position.objects.filter(state=PositionState.PUBLISHED).first()
    with pytest.raises(DatabaseError), transaction.atomic(), connection.cursor() as cur:
        cur.execute("DELETE FROM registry_position WHERE id = %s", [p.pk])
    with pytest.raises(DatabaseError), transaction.atomic(), connection.cursor() as cur:
        cur.execute("DELETE FROM registry_auditevent")
    assert Position.objects.filter(pk=p.pk).exists() and AuditEvent.objects.exists()
