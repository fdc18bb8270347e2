"""Positions are history (migration 0005 + Position.save/delete): no delete, states only move forward.

Each forbidden change is tried twice: with raw SQL (only the database trigger stands in the way) and
through the ORM (the model refuses first, with a clear message). Runs on SQLite and on PostgreSQL.
The field-list checks (review S-10) make sure a new Position column cannot slip past the triggers.
"""

from __future__ import annotations

import importlib
import itertools

import pytest
from django.db import DatabaseError, connection, transaction

from registry.models import (
    POSITION_FROZEN_FIELDS,
    POSITION_HISTORY_STATES,
    POSITION_MUTABLE_FIELDS,
    POSITION_TRANSITIONS,
    FrozenPositionError,
    Mark,
    Position,
    PositionHistoryError,
    PositionState,
    PositionStateError,
)
from registry.models.marks import position_history_delete_allowed

M0003 = importlib.import_module("registry.migrations.0003_integrity_triggers")
M0005 = importlib.import_module("registry.migrations.0005_position_history_triggers")

pytestmark = pytest.mark.django_db

GOOD_POSITION = {
    "frame_epsg": 7912,
    "epoch_yr": 2020.0,
    "lat_deg": 45.2,
    "lon_deg": -110.6,
    "h_m": 1500.0,
    "cov_ee_m2": 1e-5,
    "cov_nn_m2": 1e-5,
    "cov_uu_m2": 4e-5,
    "source": "invented",
}
STATES = [s.value for s in PositionState]
ALLOWED = {(old, new) for old, news in POSITION_TRANSITIONS.items() for new in news}
FORBIDDEN = [(old, new) for old, new in itertools.permutations(STATES, 2) if (old, new) not in ALLOWED]


@pytest.fixture
def mark():
    return Mark.objects.create(code="QR-101")


def make(mark, state: str) -> Position:
    return Position.objects.create(mark=mark, state=state, **GOOD_POSITION)


def raw(sql: str, *params) -> None:
    with transaction.atomic(), connection.cursor() as cur:
        cur.execute(sql, params)


def stored_state(position: Position) -> str:
    return Position.objects.values_list("state", flat=True).get(pk=position.pk)


# --- the rules themselves ---------------------------------------------------------------------


def test_the_transition_table_is_the_one_decided():
    # Decided with the review (M-3): proposed → published | rejected; published → superseded | withdrawn.
    assert ALLOWED == {
        ("proposed", "published"),
        ("proposed", "rejected"),
        ("published", "superseded"),
        ("published", "withdrawn"),
    }
    assert len(FORBIDDEN) == 5 * 4 - 4


@pytest.mark.parametrize(("old", "new"), sorted(ALLOWED))
def test_allowed_transitions_pass_raw_and_orm(mark, old, new):
    p = make(mark, old)
    raw("UPDATE registry_position SET state = %s WHERE id = %s", new, p.pk)
    assert stored_state(p) == new
    q = make(Mark.objects.create(code="QR-102"), old)
    q.state = new
    q.save(update_fields=["state"])
    assert stored_state(q) == new


@pytest.mark.parametrize(("old", "new"), FORBIDDEN)
def test_forbidden_transition_refused_by_the_database(mark, old, new):
    p = make(mark, old)
    with pytest.raises(DatabaseError):
        raw("UPDATE registry_position SET state = %s WHERE id = %s", new, p.pk)
    assert stored_state(p) == old


@pytest.mark.parametrize(("old", "new"), FORBIDDEN)
def test_forbidden_transition_refused_by_the_orm_with_a_clear_message(mark, old, new):
    p = make(mark, old)
    p.state = new
    with pytest.raises(PositionStateError, match=f"is {old}; it cannot become {new}"):
        p.save()
    assert stored_state(p) == old


def test_queryset_update_of_state_is_caught_by_the_trigger(mark):
    p = make(mark, PositionState.SUPERSEDED)
    with pytest.raises(DatabaseError), transaction.atomic():
        Position.objects.filter(pk=p.pk).update(state=PositionState.PUBLISHED)
    assert stored_state(p) == "superseded"


def test_same_state_update_is_not_a_transition(mark):
    p = make(mark, PositionState.SUPERSEDED)
    raw("UPDATE registry_position SET state = state, note = 'checked 2026' WHERE id = %s", p.pk)
    p.refresh_from_db()
    assert p.note == "checked 2026"


@pytest.mark.parametrize("state", POSITION_HISTORY_STATES)
def test_history_positions_cannot_be_deleted_raw(mark, state):
    p = make(mark, state)
    with pytest.raises(DatabaseError):
        raw("DELETE FROM registry_position WHERE id = %s", p.pk)
    assert Position.objects.filter(pk=p.pk).exists()


@pytest.mark.parametrize("state", POSITION_HISTORY_STATES)
def test_history_positions_cannot_be_deleted_orm(mark, state):
    p = make(mark, state)
    with pytest.raises(PositionHistoryError, match=f"is {state}"):
        p.delete()
    with pytest.raises(PositionHistoryError):
        Position.objects.filter(mark=mark).delete()
    assert Position.objects.filter(pk=p.pk).exists()


def test_even_when_the_orm_guard_is_lifted_the_database_refuses(mark):
    p = make(mark, PositionState.PUBLISHED)
    with pytest.raises(DatabaseError), transaction.atomic(), position_history_delete_allowed():
        Position.objects.filter(pk=p.pk).delete()
    assert Position.objects.filter(pk=p.pk).exists()


@pytest.mark.parametrize("state", [PositionState.PROPOSED, PositionState.REJECTED])
def test_proposed_and_rejected_positions_may_be_deleted(mark, state):
    p = make(mark, state)
    raw("DELETE FROM registry_position WHERE id = %s", p.pk)
    q = make(mark, state)
    q.delete()
    assert not Position.objects.filter(pk__in=[p.pk, q.pk]).exists()


def test_a_withdrawn_position_is_frozen_too(mark):
    p = make(mark, PositionState.WITHDRAWN)
    with pytest.raises(DatabaseError):
        raw("UPDATE registry_position SET lat_deg = 45.3 WHERE id = %s", p.pk)
    p.lat_deg = 45.3
    with pytest.raises(FrozenPositionError, match="lat_deg cannot change"):
        p.save()
    assert Position.objects.get(pk=p.pk).lat_deg == 45.2


def test_api_error_codes_name_the_rule():
    assert (FrozenPositionError.code, PositionStateError.code, PositionHistoryError.code) == (
        "position_frozen",
        "position_state",
        "position_history",
    )


# --- one source for the field and state lists (review S-10) ------------------------------------


def test_migration_frozen_lists_equal_the_model_list():
    assert list(M0003.FROZEN) == list(POSITION_FROZEN_FIELDS)
    assert list(M0005.FROZEN) == list(POSITION_FROZEN_FIELDS)


def test_migration_state_rules_equal_the_model_rules():
    assert tuple(M0005.HISTORY_STATES) == POSITION_HISTORY_STATES
    assert {k: tuple(v) for k, v in M0005.TRANSITIONS.items()} == POSITION_TRANSITIONS


def test_every_position_column_is_either_frozen_or_declared_mutable():
    """A new column must be put in POSITION_FROZEN_FIELDS (and a new trigger migration) or be declared mutable."""
    columns = {f.attname for f in Position._meta.concrete_fields} - {"id"}
    assert set(POSITION_FROZEN_FIELDS).isdisjoint(POSITION_MUTABLE_FIELDS)
    assert columns == set(POSITION_FROZEN_FIELDS) | set(POSITION_MUTABLE_FIELDS)


def test_installed_trigger_names_every_frozen_column():
    """Read the trigger back from the database: every frozen column appears in its condition."""
    with connection.cursor() as cur:
        if connection.vendor == "sqlite":
            cur.execute("SELECT sql FROM sqlite_master WHERE type = 'trigger' AND name = 'position_frozen'")
        else:
            cur.execute("SELECT pg_get_functiondef('registry_position_frozen'::regproc)")
        (body,) = cur.fetchone()
    missing = [c for c in POSITION_FROZEN_FIELDS if f"NEW.{c} " not in body]
    assert missing == []
    assert "'withdrawn'" in body


def test_reverse_migration_sql_restores_0003_without_recreating_its_triggers():
    """Regression: migrating back to 0004 on PostgreSQL once re-ran CREATE TRIGGER position_frozen."""
    assert [sql for sql in M0005.PG_BACKWARD if "CREATE TRIGGER" in sql] == []
    assert sum("CREATE OR REPLACE FUNCTION registry_position_frozen()" in sql for sql in M0005.PG_BACKWARD) == 1
    assert sum(sql.startswith("CREATE TRIGGER position_frozen ") for sql in M0005.SQLITE_BACKWARD) == 1
