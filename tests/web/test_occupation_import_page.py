"""The batch occupation results page: preview (nothing recorded), then record the held file; errors listed."""

from __future__ import annotations

from pathlib import Path

import pytest
from django.core.files.uploadedfile import SimpleUploadedFile
from django.urls import reverse

from registry.models import AuditEvent, Occupation, Position
from tests.services._data import make_mark
from tests.services.test_occupation_batch import HEADER, SAMPLE

pytestmark = pytest.mark.django_db


@pytest.fixture
def marks(manager, media_root):
    for code in ("CRV-031", "ASH-012", "CRV-104"):
        make_mark(manager, code)


def counts():
    return (Occupation.objects.count(), Position.objects.count(), AuditEvent.objects.count())


def test_preview_then_record(technician, marks, signed_in):
    client = signed_in(technician)
    assert client.get(reverse("web:occupation-import")).status_code == 200
    before = counts()
    response = client.post(reverse("web:occupation-import"), {"file": SimpleUploadedFile("s.csv", SAMPLE.read_bytes())})
    assert response.status_code == 200
    page = response.content.decode()
    assert "Preview — nothing recorded yet" in page and "1.949" in page and "Record these 3 occupations" in page
    assert counts() == before
    token = response.context["token"]
    response = client.post(reverse("web:occupation-import"), {"token": token})
    assert response.status_code == 200 and "3 occupations recorded" in response.content.decode()
    assert Occupation.objects.count() == 3
    # the held file is gone: a second "Record" cannot double the rows
    response = client.post(reverse("web:occupation-import"), {"token": token})
    assert response.status_code == 400 and Occupation.objects.count() == 3


def test_bad_rows_listed_nothing_held(technician, marks, signed_in, media_root):
    text = HEADER + "NOPE-1,rtk,2025-06-09T14:00:00Z,2025-06-09T14:05:00Z,,,,,,,,,\n"
    response = signed_in(technician).post(
        reverse("web:occupation-import"), {"file": SimpleUploadedFile("bad.csv", text.encode())}
    )
    assert response.status_code == 400
    page = response.content.decode()
    assert "Refused — nothing was changed" in page and "line 2" in page and "No mark with code" in page
    assert not [p for p in Path(media_root).rglob("*") if p.is_file()] if Path(media_root).exists() else True


def test_viewer_cannot_use_it(viewer, marks, signed_in):
    assert signed_in(viewer).get(reverse("web:occupation-import")).status_code == 403


def test_forged_token_is_refused(technician, marks, signed_in):
    response = signed_in(technician).post(reverse("web:occupation-import"), {"token": "abc:def"})
    assert response.status_code == 400 and "upload it again" in response.content.decode()
    assert Occupation.objects.count() == 0


def test_preview_shows_each_result_against_the_published_position(manager, technician, marks, signed_in):
    from tests.services._data import make_published

    make_published(
        manager,
        technician,
        "ASH-012",
        frame_epsg=6319,
        epoch_yr=2025.439,
        lat_deg=45.193411030 - 9e-7,
        lon_deg=-110.612248290,
        h_m=1388.1556,
    )
    client = signed_in(technician)
    before = counts()
    response = client.post(reverse("web:occupation-import"), {"file": SimpleUploadedFile("s.csv", SAMPLE.read_bytes())})
    page = response.content.decode()
    assert "against the published position" in page
    assert "<strong>possible movement: d E +0.0 mm, N +100.0 mm, U +0.0 mm</strong>" in page
    assert "nothing to compare with" in page  # CRV-031 has no published position
    assert counts() == before


@pytest.mark.parametrize("page", ["web:occupation-import", "web:import"])
def test_a_file_over_the_size_limit_is_refused_in_words_and_changes_nothing(
    page, manager, marks, signed_in, monkeypatch
):
    """Both import pages take their limit from one place (registry.web.uploads) and say it in MB."""
    import registry.web.import_views as mark_import_views
    import registry.web.occupation_import_views as occupation_views

    limit = 2 * 2**20
    monkeypatch.setattr(mark_import_views, "IMPORT_MAX_BYTES", limit)
    monkeypatch.setattr(occupation_views, "IMPORT_MAX_BYTES", limit)
    before = counts()
    body = SAMPLE.read_bytes()
    big = body + b"\n" * (limit + 1 - len(body))
    response = signed_in(manager).post(reverse(page), {"file": SimpleUploadedFile("s.csv", big)})
    assert response.status_code in (200, 400)
    assert "The file is larger than 2 MB." in response.content.decode()
    assert counts() == before
