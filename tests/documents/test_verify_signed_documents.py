"""``manage.py verify_signed_documents``: the checksums recorded at signing against the PDF kept in the
database and (``--files``) the copy in file storage; run by the restore drill after a restore."""

from __future__ import annotations

import io

import pytest
from django.core.management import call_command


@pytest.fixture
def media(settings, tmp_path):
    settings.MEDIA_ROOT = tmp_path / "media"
    return settings.MEDIA_ROOT


def _run(*args):
    out, err = io.StringIO(), io.StringIO()
    try:
        call_command("verify_signed_documents", *args, stdout=out, stderr=err)
        code = 0
    except SystemExit as exc:
        code = exc.code
    return code, out.getvalue(), err.getvalue()


def test_an_intact_signed_sheet_passes_in_the_database_and_in_storage(media, signed_sheet):
    assert _run() == (0, "All 1 issued documents match their recorded checksums (the database).\n", "")
    code, out, _ = _run("--files")
    assert code == 0 and "the database and file storage" in out


def test_a_changed_or_missing_copy_in_storage_is_named(media, signed_sheet):
    path = media / signed_sheet.pdf.name
    original = path.read_bytes()
    path.write_bytes(original.replace(b"%PDF-", b"%PDF- ", 1))
    code, _, err = _run("--files")
    assert code == 1
    assert f"Document {signed_sheet.code} (revision 1, signed): the copy in file storage does not match" in err
    assert _run()[0] == 0  # the database's own copy is still intact
    path.unlink()
    code, _, err = _run("--files")
    assert code == 1 and "cannot be read" in err
