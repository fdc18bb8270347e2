"""``POST /api/marks/<code>/occupations/rinex/`` (registry.api.rinex)."""

from __future__ import annotations

from pathlib import Path

import pytest
from django.core.files.uploadedfile import SimpleUploadedFile

from registry.models import Attachment, Occupation
from tests.services.test_rinex import DEMO, demo_mark, media  # noqa: F401  (fixtures)

pytestmark = pytest.mark.django_db
URL = "/api/marks/CRV-031/occupations/rinex/"


def upload(name: str) -> SimpleUploadedFile:
    return SimpleUploadedFile(name, (DEMO / name).read_bytes())


def test_records_an_occupation_with_its_file(media, technician, demo_mark, api_client_for):  # noqa: F811
    demo_mark("CRV-031")
    response = api_client_for(technician).post(
        URL, {"file": upload("crv031_2025.rnx.gz"), "observer": "R. Ishikawa-Dunn"}, format="multipart"
    )
    assert response.status_code == 201, response.content
    body = response.json()
    assert body["header"]["rinex_version"] == "3.05"
    assert body["recorded"]["observer"] == "R. Ishikawa-Dunn"
    assert body["recorded"]["start_utc"].startswith("2025-06-09T13:59:42")
    assert body["recorded"]["attachments"] == [Attachment.objects.get().pk]
    assert Attachment.objects.get().sha256 == body["sha256"]


def test_dry_run_records_nothing(media, technician, demo_mark, api_client_for):  # noqa: F811
    demo_mark("CRV-031")
    response = api_client_for(technician).post(
        URL, {"file": upload("crv031_2025.rnx.gz"), "dry_run": "true"}, format="multipart"
    )
    assert response.status_code == 200 and response.json()["recorded"] is None
    assert Occupation.objects.count() == 0 and Attachment.objects.count() == 0


@pytest.mark.parametrize(
    ("name", "code"), [("crv031_2025.crx", "rinex_hatanaka"), ("ash012_2024.24o", "rinex_far_from_mark")]
)
def test_refused_files_are_400_with_the_reason(media, technician, demo_mark, api_client_for, name, code):  # noqa: F811
    demo_mark("CRV-031")
    response = api_client_for(technician).post(URL, {"file": upload(name)}, format="multipart")
    assert response.status_code == 400, response.content
    assert code in response.content.decode()
    assert Occupation.objects.count() == 0 and not [p for p in Path(media).rglob("*") if p.is_file()]


def test_missing_file_and_roles(media, technician, viewer, demo_mark, api_client_for):  # noqa: F811
    demo_mark("CRV-031")
    assert api_client_for(technician).post(URL, {}, format="multipart").status_code == 400
    assert (
        api_client_for(viewer).post(URL, {"file": upload("crv031_2025.rnx.gz")}, format="multipart").status_code == 403
    )
    assert api_client_for(None).post(URL, {"file": upload("crv031_2025.rnx.gz")}, format="multipart").status_code in (
        401,
        403,
    )
