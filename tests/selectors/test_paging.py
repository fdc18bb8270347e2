"""Keyset pages, cursors and capped counts (registry.selectors.paging)."""

from __future__ import annotations

import pytest

from registry.models import Mark
from registry.selectors import paging
from registry.selectors.paging import count_rows, decode_cursor, encode_cursor, keyset_page


@pytest.fixture
def twelve_marks(db):
    Mark.objects.bulk_create([Mark(code=f"KS-{i:02d}", name=f"Keyset {i}") for i in range(1, 13)])


def codes(page) -> list[str]:
    return [m.code for m in page.object_list]


def test_pages_after_and_before_a_key_walk_the_whole_list_once(twelve_marks):
    qs = Mark.objects.all()
    first = keyset_page(qs, key="code", size=5)
    assert codes(first) == [f"KS-{i:02d}" for i in range(1, 6)]
    assert first.has_next and not first.has_previous and first.number == 1 and first.start_index == 1
    second = keyset_page(qs, key="code", size=5, after=first.last_key)
    third = keyset_page(qs, key="code", size=5, after=second.last_key)
    assert codes(second) == [f"KS-{i:02d}" for i in range(6, 11)] and second.start_index is None
    assert codes(third) == ["KS-11", "KS-12"] and not third.has_next and third.has_previous
    back = keyset_page(qs, key="code", size=5, before=third.first_key)
    assert codes(back) == codes(second) and back.has_previous and back.has_next
    last = keyset_page(qs, key="code", size=5, last=True)
    assert codes(last) == [f"KS-{i:02d}" for i in range(8, 13)] and not last.has_next and last.has_previous
    numbered = keyset_page(qs, key="code", size=5, number=2)
    assert codes(numbered) == codes(second) and numbered.start_index == 6 and numbered.end_index == 10


def test_cursors_round_trip_and_foreign_ones_are_refused():
    assert decode_cursor(encode_cursor("BM-0500")) == ("after", "BM-0500")
    assert decode_cursor(encode_cursor("BM-0500", before=True)) == ("before", "BM-0500")
    for bad in ("", "not-a-cursor", "eyJ4IjoxfQ", encode_cursor("x")[:-2] + "!!"):
        with pytest.raises(ValueError):
            decode_cursor(bad)


def test_counts_are_exact_up_to_the_cap(twelve_marks, monkeypatch):
    assert count_rows(Mark.objects.all()).n == 12 and count_rows(Mark.objects.all()).exact
    # Above the cap SQLite still counts exactly (a small registry); PostgreSQL would estimate.
    monkeypatch.setattr(paging, "COUNT_CAP", 5)
    counted = count_rows(Mark.objects.all(), cap=5)
    if counted.exact:
        assert counted.n == 12
    else:  # PostgreSQL: the planner's estimate, at least past the cap
        assert counted.n > 5
