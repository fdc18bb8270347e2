"""The mark list's free-text filter and counts: one indexed text on PostgreSQL, the same answers everywhere.

The reference answer is the filter's definition, computed here in Python over the rows: every word
occurs (any case) in the code, name, marking, keeper or "how it is set", or names the monument's kind.
"""

from __future__ import annotations

import importlib

import pytest
from django.db import connection

from registry.models import Mark, MarkStatus, MonumentKind
from registry.selectors import marks as marks_selectors
from registry.selectors.marks import FREE_TEXT_SQL, mark_filter, mark_list_counts

pytestmark = pytest.mark.django_db

ROWS = [
    # code, name, marking, keeper, how it is set, monument, status
    ("FT-001", "Alder Hill 1", "ALDR 0001 1951", "County roads office", "", "other", "active"),
    ("FT-002", "Basin Tank 2", "BASI 0002 1952", "Valley irrigation district", "in granite", "disk_rock", "active"),
    ("FT-003", "Granite Tower 3", "GRAN 0003 1953", "Town public works", "", "pillar", "retired"),
    ("FT-004", "Cedar Dam 4", "CEDA 0004 1954", "State parks unit", "bolt 50% corroded", "bolt_structure", "active"),
    ("FT-005", "Eastfork Road 5", "EAST 0005 1955", "Valley irrigation district", "set_in_2001", "other", "destroyed"),
    ("FT-006", "Émile Bridge 6", "ÉMIL 0006 1956", "Town public works", "", "iron_pipe", "suspect"),
]


@pytest.fixture
def marks():
    Mark.objects.bulk_create(
        [
            Mark(code=c, name=n, marking=mk, keeper=k, monument_detail=d, monument=mon, status=st)
            for c, n, mk, k, d, mon, st in ROWS
        ]
    )


def expected(text: str) -> list[str]:
    labels = dict(MonumentKind.choices)
    out = []
    for code, name, marking, keeper, detail, monument, _ in ROWS:
        ok = True
        for word in text.split():
            w = word.upper()
            in_columns = any(w in col.upper() for col in (code, name, marking, keeper, detail))
            if not in_columns and word.lower() not in str(labels[monument]).lower():
                ok = False
        if ok:
            out.append(code)
    return out


@pytest.mark.parametrize(
    "text",
    [
        "granite",  # a name on one mark, how it is set on another
        "GRANITE tower",
        "irrigation 0005",  # keeper and marking
        "valley rock",  # keeper, and the word of a monument kind
        "50%",  # a percent sign is a character, not a wildcard
        "5_%",  # neither is an underscore
        "set_in",
        pytest.param(
            "émile",  # any case beyond ASCII
            marks=pytest.mark.skipif(
                connection.vendor != "postgresql", reason="SQLite's LIKE folds the case of ASCII letters only"
            ),
        ),
        "ÉMIL",
        "zzzz",
        "1 ft-00",
        "hill\u00a0alder",  # words split at any space
    ],
)
def test_free_text_gives_the_filter_s_definition(marks, text):
    assert sorted(mark_filter(text=text).values_list("code", flat=True)) == expected(text)


@pytest.mark.parametrize("text", ["", "granite", "valley", "zzzz", "o"])
def test_counts_of_a_search_are_exact_by_status(marks, text):
    counts = mark_list_counts(text=text)
    codes = set(expected(text)) if text else {r[0] for r in ROWS}
    assert counts.matching_any_status.n == len(codes) and counts.matching_any_status.exact
    for status in MarkStatus.values:
        n = sum(1 for r in ROWS if r[0] in codes and r[6] == status)
        assert counts.by_status[status].n == n and counts.by_status[status].exact, status
    assert mark_list_counts(text=text, status="active").matching.n == sum(
        1 for r in ROWS if r[0] in codes and r[6] == "active"
    )


def test_counts_past_the_cap_are_exact_on_sqlite_and_said_to_be_estimates_on_postgresql(marks, monkeypatch):
    monkeypatch.setattr(marks_selectors, "COUNT_CAP", 2)
    counts = mark_list_counts(text="o")  # all six marks
    if connection.vendor == "postgresql":
        assert not counts.matching_any_status.exact and counts.matching_any_status.n > 2
        assert not any(c.exact for c in counts.by_status.values())
    else:
        assert counts.matching_any_status.n == len(expected("o")) == 6 and counts.matching_any_status.exact
        assert counts.by_status["active"].n == 3 and counts.by_status["destroyed"].n == 1


def test_the_index_of_the_migration_is_on_the_selector_s_expression():
    migration = importlib.import_module("registry.migrations.0017_mark_free_text_index")
    assert migration.FREE_TEXT_SQL == FREE_TEXT_SQL


@pytest.mark.skipif(connection.vendor != "postgresql", reason="the trigram index exists on PostgreSQL only")
def test_postgresql_answers_free_text_from_the_trigram_index(marks):
    qs = mark_filter(text="granite tower")
    sql, params = qs.order_by().values("pk").query.sql_with_params()
    with connection.cursor() as cur:
        # a handful of rows would be read in full: show that the index can serve the filter
        cur.execute("SET LOCAL enable_seqscan = off")
        cur.execute("SET LOCAL enable_indexscan = off")
        cur.execute("EXPLAIN " + sql, params)
        plan = "\n".join(r[0] for r in cur.fetchall())
    assert "mark_free_text_trgm" in plan
