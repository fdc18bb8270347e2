"""Files held between a preview and its confirmation (registry.services.held_uploads)."""

from __future__ import annotations

import pytest
from django.core.exceptions import ValidationError

from registry.services.held_uploads import hold_upload, release_held_upload, take_held_upload

pytestmark = pytest.mark.django_db


@pytest.fixture(autouse=True)
def media(settings, tmp_path):
    settings.MEDIA_ROOT = tmp_path
    return tmp_path


def test_round_trip_and_release(technician, media):
    token = hold_upload(actor=technician, content=b"abc", filename="a.csv", purpose="p")
    assert take_held_upload(actor=technician, token=token, purpose="p") == (b"abc", "a.csv")
    release_held_upload(token)
    assert not list((media / "held").iterdir())
    with pytest.raises(ValidationError) as info:
        take_held_upload(actor=technician, token=token, purpose="p")
    assert info.value.code == "held_upload_expired"


def test_other_user_other_purpose_forged_or_expired(technician, manager, settings):
    token = hold_upload(actor=technician, content=b"abc", filename="a.csv", purpose="p")
    for actor, purpose, tok in ((manager, "p", token), (technician, "q", token), (technician, "p", token + "x")):
        with pytest.raises(ValidationError):
            take_held_upload(actor=actor, token=tok, purpose=purpose)
    settings.REGISTRY = {**settings.REGISTRY, "HELD_UPLOAD_MINUTES": 0}
    with pytest.raises(ValidationError):
        take_held_upload(actor=technician, token=token, purpose="p")


def test_changed_bytes_are_refused(technician, media):
    token = hold_upload(actor=technician, content=b"abc", filename="a.csv", purpose="p")
    (stored,) = (media / "held").iterdir()
    stored.write_bytes(b"abd")
    with pytest.raises(ValidationError):
        take_held_upload(actor=technician, token=token, purpose="p")


def test_old_held_files_are_swept(technician, media, settings):
    hold_upload(actor=technician, content=b"old", filename="a.csv", purpose="p")
    settings.REGISTRY = {**settings.REGISTRY, "HELD_UPLOAD_MINUTES": 0}
    hold_upload(actor=technician, content=b"new", filename="b.csv", purpose="p")
    assert [p.read_bytes() for p in (media / "held").iterdir()] == [b"new"]
