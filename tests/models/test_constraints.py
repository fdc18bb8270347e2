"""Invariants held by the database itself (CHECK constraints, partial unique index, triggers).

Rows are written with the ORM's plain ``create``/``update`` (bypassing the services'
validation), so each refusal here comes from the database. Runs on SQLite and on
PostgreSQL + PostGIS.
"""

from __future__ import annotations

import datetime as dt

import pytest
from django.db import DatabaseError, IntegrityError, transaction

from registry.models import AuditEvent, HeightRecord, Mark, Occupation, Position, PositionState

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


@pytest.fixture
def mark():
    return Mark.objects.create(code="QR-101")


def refused(fn) -> bool:
    try:
        with transaction.atomic():
            fn()
    except IntegrityError:
        return True
    return False


def test_a_good_position_is_accepted(mark):
    """Control: the fixture data passes every constraint, so the refusals below are specific."""
    assert not refused(lambda: Position.objects.create(mark=mark, **GOOD_POSITION))


@pytest.mark.parametrize(
    "overrides",
    [
        {"lat_deg": 90.5},
        {"lat_deg": -90.5},
        {"lon_deg": 180.5},
        {"lon_deg": -181.0},
        {"h_m": -2000.0},
        {"epoch_yr": 1899.9},
        {"epoch_yr": 2100.1},
        {"cov_ee_m2": -1e-9},
        {"cov_nn_m2": -1e-9},
        {"cov_uu_m2": -1e-9},
        {"vel_sigma_e_m_yr": -0.001},
        {"vel_sigma_n_m_yr": -0.001},
        {"vel_sigma_u_m_yr": -0.001},
    ],
    ids=lambda o: ",".join(f"{k}={v}" for k, v in o.items()),
)
def test_position_ranges_and_signs(mark, overrides):
    assert refused(lambda: Position.objects.create(mark=mark, **{**GOOD_POSITION, **overrides}))
    assert not Position.objects.exists()


def test_one_published_position_per_mark_and_frame(mark):
    Position.objects.create(mark=mark, state=PositionState.PUBLISHED, **GOOD_POSITION)
    assert refused(lambda: Position.objects.create(mark=mark, state=PositionState.PUBLISHED, **GOOD_POSITION))
    # Other states, and another frame, are not limited.
    Position.objects.create(mark=mark, state=PositionState.SUPERSEDED, **GOOD_POSITION)
    Position.objects.create(mark=mark, state=PositionState.PROPOSED, **GOOD_POSITION)
    Position.objects.create(mark=mark, state=PositionState.PUBLISHED, **{**GOOD_POSITION, "frame_epsg": 6319})
    assert Position.objects.filter(state=PositionState.PUBLISHED).count() == 2


@pytest.mark.parametrize(
    "values",
    [
        {"search_lat_deg": 91.0, "search_lon_deg": 0.0},
        {"search_lat_deg": 0.0, "search_lon_deg": 181.0},
        {"search_lat_deg": 45.0, "search_lon_deg": None},
        {"search_lat_deg": None, "search_lon_deg": -110.0},
    ],
)
def test_mark_search_location(mark, values):
    assert refused(lambda: Mark.objects.filter(pk=mark.pk).update(**values))
    assert Mark.objects.values_list("search_lat_deg", "search_lon_deg").get() == (None, None)


def test_mark_code_is_unique(mark):
    assert refused(lambda: Mark.objects.create(code="QR-101"))


def test_occupation_ends_after_it_starts(mark):
    start = dt.datetime(2024, 5, 1, 15, tzinfo=dt.UTC)
    assert refused(
        lambda: Occupation.objects.create(
            mark=mark, method="rtk", start_utc=start, end_utc=start - dt.timedelta(minutes=1)
        )
    )
    assert refused(
        lambda: Occupation.objects.create(
            mark=mark, method="rtk", start_utc=start, end_utc=start, antenna_height_measured_m=-0.01
        )
    )


def test_height_sigma_is_not_negative(mark):
    assert refused(
        lambda: HeightRecord.objects.create(
            mark=mark, datum_epsg=5703, height_m=1480.0, sigma_m=-0.001, method="levelled"
        )
    )


def test_audit_trail_is_append_only_in_the_database(mark):
    event = AuditEvent.objects.create(action="mark_create", object_type="mark", object_id=str(mark.pk), mark=mark)
    for statement in (
        lambda: AuditEvent.objects.filter(pk=event.pk).update(note="rewritten"),
        lambda: AuditEvent.objects.filter(pk=event.pk)._raw_delete(AuditEvent.objects.db),
    ):
        with pytest.raises(DatabaseError):
            with transaction.atomic():
                statement()
    assert AuditEvent.objects.get(pk=event.pk).note == ""
