"""A signed document never changes (migration 0011 triggers + Document.save/delete), on SQLite and PostgreSQL.

(Here rather than in tests/models/ for the signed-document fixtures of tests/documents/conftest.py.)

Each forbidden change is tried with raw SQL (only the database trigger stands in the way) and through the
ORM (the model refuses first). The column lists of the migration must equal the model's, and together
with the standing columns they must name every column, so a new column cannot slip past the triggers.
"""

from __future__ import annotations

import importlib

import pytest
from django.db import DatabaseError, connection, transaction

from registry.models import (
    DOCUMENT_FROZEN_FIELDS,
    DOCUMENT_ISSUED_STATES,
    DOCUMENT_STANDING_FIELDS,
    Document,
    DocumentFrozenError,
    DocumentState,
)

M0011 = importlib.import_module("registry.migrations.0011_signed_document_triggers")

pytestmark = pytest.mark.django_db


def test_column_lists_match_the_model():
    assert list(M0011.FROZEN) == list(DOCUMENT_FROZEN_FIELDS)
    assert tuple(M0011.ISSUED) == DOCUMENT_ISSUED_STATES
    columns = {f.attname for f in Document._meta.concrete_fields}
    assert set(DOCUMENT_FROZEN_FIELDS) | set(DOCUMENT_STANDING_FIELDS) | {"id"} == columns


def _raw(sql: str, params: list) -> None:
    with transaction.atomic(), connection.cursor() as cur:
        cur.execute(sql, params)


@pytest.mark.parametrize(
    "column,value",
    [
        ("content", b"%PDF-1.7 something else"),
        ("sha256", "0" * 64),
        ("pdf", "documents/2026/other.pdf"),
        ("revision", 9),
        ("signed_at", "2030-01-01 00:00:00"),
        ("code", "S-AAAA-BBBB"),
    ],
)
def test_database_refuses_changing_a_signed_document(signed_sheet, column, value):
    with pytest.raises(DatabaseError):
        _raw(f"UPDATE registry_document SET {column} = %s WHERE id = %s", [value, signed_sheet.pk])
    fresh = Document.objects.get(pk=signed_sheet.pk)
    assert bytes(fresh.content) == bytes(signed_sheet.content) and fresh.sha256 == signed_sheet.sha256


def test_database_refuses_deleting_a_signed_document(signed_sheet):
    with pytest.raises(DatabaseError):
        _raw("DELETE FROM registry_document WHERE id = %s", [signed_sheet.pk])
    assert Document.objects.filter(pk=signed_sheet.pk).exists()


@pytest.mark.parametrize("state", ["draft", "checked"])
def test_database_refuses_moving_a_signed_document_back(signed_sheet, state):
    with pytest.raises(DatabaseError):
        _raw("UPDATE registry_document SET state = %s WHERE id = %s", [state, signed_sheet.pk])


def test_database_refuses_clearing_out_of_date(signed_sheet):
    _raw("UPDATE registry_document SET out_of_date = %s WHERE id = %s", [True, signed_sheet.pk])
    with pytest.raises(DatabaseError):
        _raw("UPDATE registry_document SET out_of_date = %s WHERE id = %s", [False, signed_sheet.pk])


def test_standing_moves_forward_in_the_database(signed_sheet):
    _raw(
        "UPDATE registry_document SET state = %s, superseded_at = %s WHERE id = %s",
        ["superseded", "2030-01-01 00:00:00", signed_sheet.pk],
    )
    assert Document.objects.get(pk=signed_sheet.pk).state == DocumentState.SUPERSEDED
    with pytest.raises(DatabaseError):
        _raw("UPDATE registry_document SET state = %s WHERE id = %s", ["signed", signed_sheet.pk])


def test_orm_refuses_with_a_clear_message(signed_sheet):
    doc = Document.objects.get(pk=signed_sheet.pk)
    doc.content = b"changed"
    doc.sha256 = "1" * 64
    with pytest.raises(DocumentFrozenError, match="sha256"):
        doc.save()
    with pytest.raises(DocumentFrozenError):
        Document.objects.get(pk=signed_sheet.pk).delete()


def test_a_draft_may_change_and_be_deleted(mark, technician):
    from registry.services.documents import document_build_sheet

    doc = document_build_sheet(actor=technician, mark_code=mark.code)
    _raw("UPDATE registry_document SET check_note = %s WHERE id = %s", ["fine", doc.pk])
    _raw("DELETE FROM registry_documentmark WHERE document_id = %s", [doc.pk])
    _raw("DELETE FROM registry_document WHERE id = %s", [doc.pk])
    assert not Document.objects.filter(pk=doc.pk).exists()
