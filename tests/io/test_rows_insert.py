"""The batch import's row insert: ids in order, defaults, and the database's refusals as Django's errors."""

from __future__ import annotations

import pytest
from django.db import IntegrityError, transaction

from registry.models import Mark, Position
from registry.services.rows_insert import insert_rows


def position_row(mark_id: int, frame: int, lat: float) -> dict:
    return {
        "mark_id": mark_id,
        "frame_epsg": frame,
        "epoch_yr": 2021.5,
        "lat_deg": lat,
        "lon_deg": -110.6,
        "h_m": 1500.0,
        "cov_ee_m2": 1.6e-05,
        "cov_nn_m2": 2.5e-05,
        "cov_uu_m2": 8.1e-05,
        "source": "invented",
        "state": "proposed",
    }


@pytest.mark.django_db
def test_rows_come_back_with_their_ids_in_order_and_defaults_filled():
    ids = insert_rows(Mark, [{"code": f"INS-{i:03d}", "name": f"n{i}"} for i in range(1200)], batch=500)
    assert len(ids) == 1200 and ids == sorted(ids)
    got = dict(Mark.objects.filter(pk__in=ids).values_list("pk", "code"))
    assert [got[pk] for pk in ids] == [f"INS-{i:03d}" for i in range(1200)]
    mark = Mark.objects.get(code="INS-007")
    assert mark.version == 1 and mark.status == "active" and mark.created_at is not None
    # the sequence moved: an ordinary insert afterwards gets a new id
    assert Mark.objects.create(code="INS-AFTER").pk > max(ids)


@pytest.mark.django_db
def test_a_refused_row_raises_django_integrity_error_and_writes_nothing():
    (mark_id,) = insert_rows(Mark, [{"code": "INS-1"}])
    with pytest.raises(IntegrityError):  # latitude 95° breaks the table's CHECK constraint
        with transaction.atomic():
            insert_rows(Position, [position_row(mark_id, 7912, 45.2), position_row(mark_id, 9989, 95.0)])
    assert Position.objects.count() == 0


def test_the_batch_validation_memo_reports_what_full_clean_reports():
    from django.core.exceptions import ValidationError

    from registry.services.import_bulk import _CleanMemo

    memo = _CleanMemo()
    memo.full_clean(Mark(code="MEMO-1", name="Willow gate", monument="disk_concrete"))
    memo.full_clean(Mark(code="MEMO-2", name="Willow gate", monument="disk_concrete"))  # remembered values
    assert ("monument", str, "disk_concrete") in memo.passed
    bad = [
        Mark(code="MEMO-3", name="x" * 121, monument="disk_concrete"),
        Mark(code="MEMO-4", name="Willow gate", monument="granite_block"),
        Mark(code="bad code!", name="Willow gate", monument="disk_concrete"),
    ]
    for mark in bad:
        with pytest.raises(ValidationError) as with_memo:
            memo.full_clean(mark)
        with pytest.raises(ValidationError) as plain:
            mark.full_clean(validate_unique=False, validate_constraints=False)
        assert with_memo.value.message_dict == plain.value.message_dict
