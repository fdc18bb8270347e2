"""The mark list (search, filters, counts, pagination) and the mark page (what it shows, in which order)."""

from __future__ import annotations

import re

import pytest
from django.urls import reverse

LIST = reverse("web:mark-list")


def codes_on(response) -> list[str]:
    return re.findall(r'class="code">([A-Z0-9_.-]+)</a>', response.content.decode())


def text_of(response) -> str:
    html = response.content.decode()
    html = re.sub(r"<head>.*?</head>", "", html, flags=re.S)
    return re.sub(r"\s+", " ", re.sub(r"<[^>]+>", " ", html))


# ---------------------------------------------------------------- list: search and filters


@pytest.mark.django_db
@pytest.mark.parametrize(
    "params,expected",
    [
        ({}, ["HW-07", "KV-001", "KV-002"]),
        ({"q": "kv-00"}, ["KV-001", "KV-002"]),  # code prefix, any case
        ({"q": "mill"}, ["KV-002"]),  # name prefix
        ({"q": "creek"}, []),  # not a prefix of code or name
        ({"q": "creek", "match": "contains"}, ["KV-002"]),
        ({"q": "01", "match": "contains"}, ["KV-001"]),
        ({"text": "alder"}, ["KV-002"]),  # keeper
        ({"text": "ridge 2009"}, ["KV-001"]),  # every word, marking and name
        ({"text": "ridge"}, ["KV-001", "KV-002"]),  # "Kestrel Ridge", "Mill Creek Bridge"
        ({"text": "kestrel alder"}, []),
        ({"text": "township"}, ["HW-07"]),
        ({"status": "retired"}, ["HW-07"]),
        ({"status": "active"}, ["KV-001", "KV-002"]),
        ({"status": "destroyed"}, []),
        ({"q": "KV", "status": "retired"}, []),
    ],
)
def test_search_and_filters(kestrel, signed_in, viewer, params, expected):
    response = signed_in(viewer).get(LIST, params)
    assert response.status_code == 200
    assert codes_on(response) == expected


@pytest.mark.django_db
def test_invalid_filters_are_ignored_not_errors(kestrel, signed_in, viewer):
    response = signed_in(viewer).get(LIST, {"status": "bogus", "match": "regex", "page": "zz"})
    assert response.status_code == 200
    assert b"Status" in response.content


@pytest.mark.django_db
def test_list_shows_search_location_with_its_frame_and_epoch(kestrel, signed_in, viewer):
    response = signed_in(viewer).get(LIST, {"q": "KV-001"})
    text = text_of(response)
    # The 2020.5 position superseded the 2010 one: the search location is the newer one.
    assert "45.200000123" in text and "-110.600000456" in text
    assert "ITRF2014 (EPSG:7912) epoch 2020.500 (2020-07-02)" in text
    html = response.content.decode()
    assert '<td class="num">45.200000123</td>' in html  # right-aligned, tabular digits
    assert '<span class="state state-active">active</span>' in html  # word first, colour class second
    assert "2024-04-18" in text and "intact" in text  # last visit


@pytest.mark.django_db
def test_list_says_when_a_mark_has_no_published_position(kestrel, signed_in, viewer):
    text = text_of(signed_in(viewer).get(LIST, {"q": "HW"}))
    assert "no published position" in text
    assert "—" in text


@pytest.mark.django_db
def test_counts_by_status_and_total(kestrel, signed_in, viewer):
    response = signed_in(viewer).get(LIST, {"q": "kv"})
    text = text_of(response)
    assert "Showing 1 – 2 of 2 matching marks" in text
    assert "3 in the registry" in text
    html = response.content.decode()
    # counts per status over the search (status filter not applied), each a link keeping the search
    assert re.search(r'href="\?q=kv&amp;status=active"[^>]*>.*?active.*?<span class="num">2</span>', html)
    assert re.search(r'href="\?q=kv&amp;status=retired"[^>]*>.*?retired.*?<span class="num">0</span>', html)


# ---------------------------------------------------------------- list: pagination


@pytest.mark.django_db
def test_pagination_50_per_page_keeps_the_filters(many_marks, signed_in, viewer):
    many_marks(120, "PG")  # odd numbers have keeper "Alder County Roads": 60 of them
    client = signed_in(viewer)
    first = client.get(LIST, {"q": "pg", "text": "alder"})
    assert len(codes_on(first)) == 50
    assert codes_on(first)[0] == "PG-0001"
    text = text_of(first)
    assert "Showing 1 – 50 of 60 matching marks" in text
    assert "Page 1 of 2" in text
    html = first.content.decode()
    assert 'href="?q=pg&amp;text=alder&amp;page=2" rel="next"' in html
    second = client.get(LIST, {"q": "pg", "text": "alder", "page": 2})
    assert codes_on(second) == [f"PG-{i:04d}" for i in range(101, 121, 2)]
    assert "Showing 51 – 60 of 60 matching marks" in text_of(second)
    assert 'href="?q=pg&amp;text=alder&amp;page=1" rel="prev"' in second.content.decode()
    # a page past the end shows the last page
    assert codes_on(client.get(LIST, {"q": "pg", "text": "alder", "page": 99})) == codes_on(second)


@pytest.mark.django_db
def test_list_query_count_does_not_grow_with_rows(many_marks, signed_in, viewer, django_assert_num_queries):
    client = signed_in(viewer)
    many_marks(3, "QA")
    from django.db import connection
    from django.test.utils import CaptureQueriesContext

    with CaptureQueriesContext(connection) as few:
        client.get(LIST)
    many_marks(60, "QB")
    with CaptureQueriesContext(connection) as many:
        response = client.get(LIST)
    assert len(codes_on(response)) == 50
    assert len(many) == len(few)
    assert len(few) <= 10


# ---------------------------------------------------------------- mark page


@pytest.mark.django_db
def test_mark_page_description_and_caution(kestrel, signed_in, viewer):
    response = signed_in(viewer).get(reverse("web:mark-detail", kwargs={"code": "KV-001"}))
    text = text_of(response)
    for expected in (
        "KV-001 · Kestrel Ridge",
        "disk set in rock outcrop",
        "Bronze disk cemented in a drill hole in granite outcrop",
        "high (bedrock, deep rod, pillar)",
        "KESTREL RIDGE 2009",
        "From the Mill Creek road bridge",
        "Sky view clear",
        "Kestrel Valley Survey Office, Room 4",
        f"version {kestrel['ridge'].version}",  # (suspect and cleared twice by movement checks, then edited)
    ):
        assert expected in text, expected
    assert "Caution." in text and "licensed professional practice govern" in text
    assert b"Edit description" not in response.content  # viewers do not see the edit link


@pytest.mark.django_db
def test_mark_page_positions_in_state_order_with_full_display(kestrel, signed_in, viewer):
    response = signed_in(viewer).get(reverse("web:mark-detail", kwargs={"code": "KV-001"}))
    html = response.content.decode()
    states = re.findall(r'<tr id="position-\d+" class="row-(\w+) main">', html)
    assert states == ["published", "proposed", "superseded", "rejected"]
    text = text_of(response)
    # current published position (values invented; formatting checked in test_format.py)
    assert "ITRF2014 (EPSG:7912) epoch 2020.500 (2020-07-02)" in text
    assert "45°12′00.00044″ N" in text  # 0.000000123° × 3600 = 0.0004428″
    assert "110°36′00.00164″ W" in text  # 0.000000456° × 3600 = 0.0016416″
    assert "45.200000123°" in text and "-110.600000456°" in text
    assert "1523.451" in text  # 1523.4512 m to 3 decimals
    assert "4.0 / 3.0 / 9.0" in text  # σ from variances 0.004², 0.003², 0.009² m²
    assert "-12.1 / -4.3 / 0.8" in text  # velocity mm/yr
    assert "ITRF2020 (EPSG:9989) epoch 2024.250 (2024-04-01)" in text  # 0.25 × 366 d = 91.5 d → 1 April
    assert "ITRF2014 (EPSG:7912) epoch 2010.000 (2010-01-01)" in text
    assert "2020 re-observation, 3 × 6 h static" in text
    assert "Proposed by theo" in text and "published by mona" in text and "rejected by mona" in text
    # a position is named by its frame, epoch and source, never by its database id (issue 10, item 9)
    assert (
        f'by <a href="#position-{kestrel["second"].pk}">ITRF2014 (EPSG:7912), epoch 2020.500, '
        "from “2020 re-observation, 3 × 6 h static”</a>" in html
    )


@pytest.mark.django_db
def test_mark_page_heights_fieldwork_files_history(kestrel, signed_in, viewer):
    response = signed_in(viewer).get(reverse("web:mark-detail", kwargs={"code": "KV-001"}))
    html = response.content.decode()
    text = text_of(response)
    assert "NAVD88 height (EPSG:5703)" in text and "1538.912" in text and "levelled" in text
    assert "12.0" in text  # σ 0.012 m in mm
    assert "static GNSS" in text and "2020-07-01 15:00 UTC" in text and "1.500" in text
    assert f'href="#position-{kestrel["second"].pk}"' in html  # occupation result → its position
    assert "T. Field (invented)" in text and "Disk clean, marking legible." in text
    photo = kestrel["photo"]
    assert f'<img src="{photo.file.url}"' in html
    assert photo.sha256 in html and kestrel["rinex"].sha256 in html
    assert "kv0011830.24o" in text and "RINEX observation file" in text
    # history: newest first, with before → after, in words (issue 10, item 9)
    assert "Description edited" in text
    assert "Kestrel Valley Survey Office → Kestrel Valley Survey Office, Room 4" in text
    assert "Position rejected" in text and "Antenna height recorded to the wrong point." in text
    assert text.index("Description edited") < text.index("Position rejected") < text.index("Mark created")


@pytest.mark.django_db
def test_mark_page_for_managers_has_the_edit_link(kestrel, signed_in, manager):
    response = signed_in(manager).get(reverse("web:mark-detail", kwargs={"code": "KV-001"}))
    assert reverse("web:mark-edit", kwargs={"code": "KV-001"}).encode() in response.content


@pytest.mark.django_db
def test_mark_page_query_count_is_fixed(kestrel, signed_in, viewer, technician):
    from django.db import connection
    from django.test.utils import CaptureQueriesContext

    from registry.services.fieldwork import visit_record

    client = signed_in(viewer)
    url = reverse("web:mark-detail", kwargs={"code": "KV-001"})
    with CaptureQueriesContext(connection) as before:
        client.get(url)
    for day in range(1, 11):
        visit_record(
            actor=technician, mark_code="KV-001", data={"visited_on": f"2023-05-{day:02d}", "finding": "intact"}
        )
    with CaptureQueriesContext(connection) as after:
        response = client.get(url)
    assert response.content.count(b"state-intact") >= 11
    assert len(after) == len(before)
