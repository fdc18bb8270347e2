"""The occupation page's "Fill from a RINEX file": read the header, check the filled form, record with the file."""

from __future__ import annotations

import hashlib
from pathlib import Path

import pytest
from django.core.files.uploadedfile import SimpleUploadedFile
from django.urls import reverse

from registry.models import Attachment, AuditEvent, Occupation
from tests.services.test_rinex import DEMO, demo_mark  # noqa: F401  (fixture)

pytestmark = pytest.mark.django_db


def stored(media_root) -> list[Path]:
    root = Path(media_root)
    return [p for p in root.rglob("*") if p.is_file()] if root.exists() else []


def test_read_header_then_record(media_root, technician, demo_mark, signed_in):  # noqa: F811
    demo_mark("CRV-031")
    client = signed_in(technician)
    url = reverse("web:occupation-create", kwargs={"code": "CRV-031"})
    content = (DEMO / "crv031_2025.rnx.gz").read_bytes()
    response = client.post(url, {"read_rinex": "1", "rinex_file": SimpleUploadedFile("crv031.rnx.gz", content)})
    assert response.status_code == 200
    page = response.content.decode()
    assert "Filled from crv031.rnx.gz" in page
    assert 'value="2025-06-09 13:59:42"' in page and "OFFICE GNSS RX3 (s/n RX-0522, firmware 5.02)" in page
    assert "GPS, GLONASS, Galileo" in page
    assert Occupation.objects.count() == 0
    token = response.context["form"].initial["held_rinex"]
    # the person corrects the observer and records
    form = dict(response.context["form"].initial)
    form.update({"observer": "R. Ishikawa-Dunn (party chief)", "file_kind": "rinex"})
    response = client.post(url, form)
    assert response.status_code == 302, response.content.decode()[:2000]
    occupation = Occupation.objects.get()
    assert occupation.observer == "R. Ishikawa-Dunn (party chief)"
    assert occupation.antenna_height_arp_m == 1.812
    attachment = Attachment.objects.get(occupation=occupation)
    assert attachment.sha256 == hashlib.sha256(content).hexdigest() and attachment.kind == "rinex"
    assert AuditEvent.objects.filter(action="occupation_from_rinex").count() == 1
    assert not [p for p in stored(media_root) if "held" in p.parts]  # the held copy is released
    # the token cannot be used twice
    response = client.post(url, {**form, "held_rinex": token})
    assert response.status_code == 400 and Occupation.objects.count() == 1


def test_refused_file_shows_why_and_stores_nothing(media_root, technician, demo_mark, signed_in):  # noqa: F811
    demo_mark("CRV-031")
    url = reverse("web:occupation-create", kwargs={"code": "CRV-031"})
    response = signed_in(technician).post(
        url, {"read_rinex": "1", "rinex_file": SimpleUploadedFile("x.crx", (DEMO / "crv031_2025.crx").read_bytes())}
    )
    assert response.status_code == 400
    assert "Hatanaka" in response.content.decode()
    assert stored(media_root) == [] and Occupation.objects.count() == 0


def test_held_file_is_only_for_its_uploader(media_root, technician, manager, demo_mark, signed_in):  # noqa: F811
    demo_mark("CRV-031")
    url = reverse("web:occupation-create", kwargs={"code": "CRV-031"})
    content = (DEMO / "crv031_2025.rnx.gz").read_bytes()
    response = signed_in(technician).post(url, {"read_rinex": "1", "rinex_file": SimpleUploadedFile("c.gz", content)})
    form = dict(response.context["form"].initial)
    response = signed_in(manager).post(url, form)
    assert response.status_code == 400 and "upload it again" in response.content.decode()
    assert Occupation.objects.count() == 0


def test_a_form_error_keeps_the_held_file(media_root, technician, demo_mark, signed_in):  # noqa: F811
    demo_mark("CRV-031")
    client = signed_in(technician)
    url = reverse("web:occupation-create", kwargs={"code": "CRV-031"})
    content = (DEMO / "crv031_2025.rnx.gz").read_bytes()
    response = client.post(url, {"read_rinex": "1", "rinex_file": SimpleUploadedFile("c.gz", content)})
    form = {**response.context["form"].initial, "start_utc": "not a time"}
    response = client.post(url, form)
    assert response.status_code == 400 and "The RINEX file read before is held" in response.content.decode()
    form["start_utc"] = "2025-06-09 13:59:42"
    assert client.post(url, form).status_code == 302
    assert Attachment.objects.get().sha256 == hashlib.sha256(content).hexdigest()
