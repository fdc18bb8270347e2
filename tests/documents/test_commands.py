"""build_sheet, check_document, sign_document --password-stdin, verify_document: the command-line path."""

from __future__ import annotations

import io
import json
import sys

import pytest
from django.core.management import CommandError, call_command

from registry.models import Document, DocumentState
from tests.documents.conftest import SIGNATORY_PASSWORD

pytestmark = pytest.mark.django_db


def test_build_check_sign_verify(mark, office, technician, manager, tmp_path, monkeypatch):
    out = io.StringIO()
    draft_path = tmp_path / "draft.pdf"
    call_command("build_sheet", mark.code, "--as", technician.username, "-o", str(draft_path), "--json", stdout=out)
    built = json.loads(out.getvalue())
    assert set(built) == {"document_code", "revision", "state", "sha256", "pages", "path"}
    doc = Document.objects.get(code=built["document_code"])
    assert built["state"] == "draft" and built["sha256"] == doc.sha256 and built["pages"] == doc.page_count
    assert draft_path.read_bytes() == bytes(doc.content)

    with pytest.raises(CommandError, match="does not allow you to check"):
        call_command("check_document", doc.code, "--as", technician.username, stdout=out)
    call_command("check_document", doc.code.lower(), "--as", manager.username, "--note", "ok", stdout=out)

    monkeypatch.setattr(sys, "stdin", io.StringIO("wrong\n"))
    with pytest.raises(CommandError, match="Nothing was signed"):
        call_command("sign_document", doc.code, "--as", office["signatory"].username, "--password-stdin", stdout=out)
    monkeypatch.setattr(sys, "stdin", io.StringIO(SIGNATORY_PASSWORD + "\n"))
    signed_path = tmp_path / "signed.pdf"
    call_command(
        "sign_document", doc.code, "--as", office["signatory"].username, "--password-stdin", "-o", str(signed_path),
        stdout=out,
    )  # fmt: skip
    doc.refresh_from_db()
    assert doc.state == DocumentState.SIGNED and signed_path.read_bytes() == bytes(doc.content)

    with pytest.raises(SystemExit) as exit_info:
        call_command("verify_document", str(signed_path), stdout=(words := io.StringIO()))
    assert exit_info.value.code == 0
    assert words.getvalue().startswith("Authentic and current.")


def test_refusals_change_nothing(mark, viewer, tmp_path):
    with pytest.raises(CommandError, match="Nothing was changed"):
        call_command("build_sheet", mark.code, "--as", viewer.username, stdout=io.StringIO())
    with pytest.raises(CommandError, match="no user named"):
        call_command("build_sheet", mark.code, "--as", "nobody", stdout=io.StringIO())
    assert not Document.objects.exists()


def test_verify_a_file_that_is_not_a_pdf(tmp_path, db):
    path = tmp_path / "x.pdf"
    path.write_bytes(b"hello")
    with pytest.raises(SystemExit) as exit_info:
        call_command("verify_document", str(path), "--json", stdout=(out := io.StringIO()))
    assert exit_info.value.code == 1
    assert json.loads(out.getvalue())["authentic"] is False
