"""Shared storage for several application servers (REGISTRY_STORAGE=s3, django-storages) against a local
S3-compatible server (moto's server mode) in the office of tests/scaleout/conftest.py: a photo uploaded
through one application server is downloaded through the other, the signed sheet's PDF lives in the
object store and is checked from there, and a changed object is caught."""

from __future__ import annotations

import hashlib
from pathlib import Path

import pytest

from tests.scaleout.conftest import api, signed_in

pytestmark = pytest.mark.scaleout

PHOTO = b"\xff\xd8\xff\xe0 invented photo of a survey disk for the shared-storage test \xff\xd9"


def _s3(office):
    import boto3

    return boto3.client(
        "s3",
        endpoint_url=f"http://127.0.0.1:{office.s3_port}",
        region_name="us-east-1",
        aws_access_key_id="test-only-key",
        aws_secret_access_key="test-only-secret",
    )


def test_an_upload_on_one_server_is_served_by_the_other(office):
    technician, viewer = api(office, "technician", 0), signed_in(office, "viewer", 1)
    r = technician.post(
        technician.base + "/api/marks/ASH-024/attachments/",
        files={"file": ("disk.jpg", PHOTO, "image/jpeg")},
        data={"kind": "photo", "caption": "disk, looking north"},
        timeout=60,
    )
    assert r.status_code == 201, r.text[:500]
    body = r.json()
    assert body["sha256"] == hashlib.sha256(PHOTO).hexdigest()
    path = "/" + body["download_url"].split("/", 3)[3]
    assert path.startswith("/media/marks/ASH-024/")  # the registry's own address, not the store's

    # The object is in the bucket; nothing was written to the servers' local media folder.
    key = path.removeprefix("/media/")
    assert _s3(office).get_object(Bucket=office.bucket, Key=key)["Body"].read() == PHOTO
    assert not (Path(office.env["REGISTRY_DATA_DIR"]) / "media").exists()

    # Through the other application server, signed in: the same bytes, private, shown inline as a photo.
    got = viewer.get(viewer.base + path, timeout=30)
    assert got.status_code == 200 and got.content == PHOTO
    assert got.headers["Content-Type"] == "image/jpeg"
    assert got.headers["Cache-Control"] == "private"
    assert got.headers["X-Content-Type-Options"] == "nosniff"
    # Not signed in: no file.
    import requests

    anon = requests.get(viewer.base + path, timeout=30, allow_redirects=False)
    assert anon.status_code in (302, 401, 403) and anon.content != PHOTO
    # A name that is not there, and one that tries to climb out: 404.
    assert viewer.get(viewer.base + "/media/marks/ASH-024/none.jpg", timeout=30).status_code == 404
    assert viewer.get(viewer.base + "/media/marks/../../etc/passwd", timeout=30).status_code == 404


def test_signed_documents_in_the_object_store_are_checked_from_there(office):
    ok = office.manage("verify_signed_documents", "--files", check=False)
    assert ok.returncode == 0, ok.stderr
    assert "the database and file storage" in ok.stdout

    name = office.primary.psql("SELECT pdf FROM registry_document WHERE state IN ('signed', 'superseded') LIMIT 1")
    s3 = _s3(office)
    original = s3.get_object(Bucket=office.bucket, Key=name)["Body"].read()
    assert original[:5] == b"%PDF-"
    s3.put_object(Bucket=office.bucket, Key=name, Body=original.replace(b"%PDF-", b"%PDF-  ", 1))
    try:
        bad = office.manage("verify_signed_documents", "--files", check=False)
        assert bad.returncode == 1
        assert "copy in file storage does not match" in bad.stderr
    finally:
        s3.put_object(Bucket=office.bucket, Key=name, Body=original)
    assert office.manage("verify_signed_documents", "--files", check=False).returncode == 0
