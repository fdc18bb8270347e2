"""Signatures: PAdES with the office's authority, validated by pyHanko; tampering, another authority,
revocation before and after signing; verification's standing (superseded, out of date); the
``verify_document`` command's exit codes and JSON keys.
"""

from __future__ import annotations

import datetime as dt
import io
import json

import pytest
from asn1crypto import cms
from cryptography import x509
from cryptography.hazmat.primitives.asymmetric import ec
from django.core.management import call_command
from pypdf import PdfReader

from registry.errors import Conflict, PermissionDeniedError
from registry.models import Document, DocumentState
from registry.reports import ca as ca_lib
from registry.reports.signing import check_signature
from registry.services.certificates import certificate_revoke
from registry.services.documents import document_build_sheet, document_check, document_sign
from registry.services.marks import mark_update
from registry.services.verification import EXIT_CURRENT, EXIT_NOT_AUTHENTIC, EXIT_NOT_CURRENT, verify_pdf
from tests.documents.conftest import SIGNATORY_PASSWORD

pytestmark = pytest.mark.django_db


def _verify_command(tmp_path, data: bytes) -> tuple[int, dict]:
    path = tmp_path / "doc.pdf"
    path.write_bytes(data)
    out = io.StringIO()
    with pytest.raises(SystemExit) as exit_info:
        call_command("verify_document", str(path), "--json", stdout=out)
    return exit_info.value.code, json.loads(out.getvalue())


def _byte_range(data: bytes) -> list[int]:
    sig = PdfReader(io.BytesIO(data)).trailer["/Root"]["/AcroForm"]["/Fields"][0].get_object()["/V"]
    return [int(v) for v in sig["/ByteRange"]]


def _der_prefix(padded: bytes) -> bytes:
    """The DER value at the start of ``padded`` (tag, definite length, content), without what follows it."""
    first = padded[1]
    if first < 0x80:
        return padded[: 2 + first]
    n = first & 0x7F
    length = int.from_bytes(padded[2 : 2 + n], "big")
    return padded[: 2 + n + length]


def test_signature_validates_against_the_office_authority(signed_sheet, office):
    data = bytes(signed_sheet.content)
    check = check_signature(data, trust_root_pems=[office["ca"].certificate_pem])
    assert check.found and check.count == 1
    assert check.intact and check.valid and check.trusted and check.covers_whole_file
    assert signed_sheet.state == DocumentState.SIGNED
    assert signed_sheet.sha256 != signed_sheet.checked_sha256  # signed bytes = checked bytes + signature
    assert data.startswith(bytes(signed_sheet.content)[:100])


def test_pades_baseline_ecdsa_p256_sha256_chain_embedded_visible(signed_sheet, office):
    data = bytes(signed_sheet.content)
    reader = PdfReader(io.BytesIO(data))
    field = reader.trailer["/Root"]["/AcroForm"]["/Fields"][0].get_object()
    sig = field["/V"]
    assert sig["/SubFilter"] == "/ETSI.CAdES.detached"  # PAdES (ETSI EN 319 142-1)
    # /Contents is the DER signature padded with zero bytes to its reserved size; the DER length says where
    # it ends (stripping trailing zeros would also cut a signature whose own last byte is 0x00, 1 in 256)
    signed_data = cms.ContentInfo.load(_der_prefix(bytes(sig["/Contents"])))["content"]
    signer = signed_data["signer_infos"][0]
    assert signer["digest_algorithm"]["algorithm"].native == "sha256"
    assert (
        signer["signature_algorithm"]["algorithm"].native.startswith("sha256_ecdsa")
        or signer["signature_algorithm"]["algorithm"].native == "ecdsa"
    )
    certs = [c.chosen for c in signed_data["certificates"]]
    subjects = {c.subject.native.get("common_name") for c in certs}
    assert office["ca"].name in subjects  # the chain: the authority's certificate is embedded
    signer_cert = x509.load_pem_x509_certificate(office["cert"].certificate_pem.encode())
    assert isinstance(signer_cert.public_key().curve, ec.SECP256R1)
    # signing-certificate-v2 attribute present (CAdES / PAdES baseline)
    attrs = {a["type"].native for a in signer["signed_attrs"]}
    assert "signing_certificate_v2" in attrs
    # visible: the widget sits on the signature page, in the box the layout reserved, with an appearance
    assert "/AP" in field
    page = reader.pages[signed_sheet.signature_page]
    annots = [a.get_object() for a in page.get("/Annots", [])]
    widget = next(a for a in annots if a.get("/FT") == "/Sig" or a.get("/Parent") is not None or "/AP" in a)
    x1, y1, x2, y2 = (float(v) for v in widget["/Rect"])
    bx1, by1, bx2, by2 = signed_sheet.signature_box
    assert abs(x1 - (bx1 - 1)) < 0.01 and abs(y2 - (by2 + 1)) < 0.01


def _appearance_text(data: bytes) -> str:
    """Text of the signature widget's appearance (a form XObject), read with pypdf."""
    from pypdf import PageObject
    from pypdf.generic import NameObject

    reader = PdfReader(io.BytesIO(data))
    field = reader.trailer["/Root"]["/AcroForm"]["/Fields"][0].get_object()
    out = []

    def walk(xobj):
        page = PageObject(pdf=reader)
        page[NameObject("/Resources")] = xobj.get("/Resources", {})
        page[NameObject("/Contents")] = xobj.indirect_reference or xobj
        out.append(page.extract_text())
        for child in (xobj.get("/Resources", {}) or {}).get("/XObject", {}).values():
            walk(child.get_object())

    walk(field["/AP"]["/N"].get_object())
    return " ".join(out)


def test_visible_signature_names_signatory_licence_and_date(signed_sheet, office):
    text = _appearance_text(bytes(signed_sheet.content))
    assert "Signed by Sina Okonkwo-Test" in text
    assert "licence LS-9042" in text and "Invented Board" in text
    assert f"Signed {signed_sheet.signed_at:%Y-%m-%d}" in text


def test_one_byte_changed_inside_the_signed_range_fails(signed_sheet, office, tmp_path):
    data = bytearray(bytes(signed_sheet.content))
    start, length, second, _ = _byte_range(bytes(data))
    pos = start + length // 2  # inside the first signed range, well away from the signature's /Contents
    assert pos < second
    data[pos] = data[pos] ^ 0x01
    check = check_signature(bytes(data), trust_root_pems=[office["ca"].certificate_pem])
    assert not check.intact
    result = verify_pdf(bytes(data))
    assert not result.authentic and result.reasons == ["altered"]
    code, out = _verify_command(tmp_path, bytes(data))
    assert code == EXIT_NOT_AUTHENTIC == 1
    assert out["authentic"] is False and out["intact"] is False


def test_fails_against_another_authority(signed_sheet):
    other = ca_lib.new_authority("Another office", "", demo=False, now=dt.datetime.now(dt.UTC))
    check = check_signature(bytes(signed_sheet.content), trust_root_pems=[ca_lib.certificate_pem(other.certificate)])
    assert check.intact and check.valid  # the bytes are fine ...
    assert not check.trusted  # ... but the chain does not end at this authority


def test_verify_command_current_and_json_keys(signed_sheet, tmp_path):
    code, out = _verify_command(tmp_path, bytes(signed_sheet.content))
    assert code == EXIT_CURRENT == 0
    assert set(out) == {
        "authentic",
        "intact",
        "document_code",
        "revision",
        "signed_by",
        "signed_at",
        "current",
        "superseded_by",
        "reasons",
    }
    assert out["authentic"] and out["intact"] and out["current"]
    assert out["document_code"] == signed_sheet.code and out["revision"] == 1
    assert out["signed_by"] == "Sina Okonkwo-Test, licence LS-9042 (Invented Board)"
    assert out["superseded_by"] is None and out["reasons"] == []


def test_unsigned_draft_is_not_authentic(mark, technician, tmp_path):
    doc = document_build_sheet(actor=technician, mark_code=mark.code)
    code, out = _verify_command(tmp_path, bytes(doc.content))
    assert code == 1 and out["reasons"][0]["code"] == "no_signature"
    assert out["document_code"] == doc.code  # what the file claims to be


def test_certificate_revoked_before_signing_is_refused(mark, office, technician, manager):
    doc = document_build_sheet(actor=technician, mark_code=mark.code)
    document_check(actor=manager, code=doc.code)
    certificate_revoke(actor=office["admin"], serial=office["cert"].serial_hex, reason="key lost")
    with pytest.raises(Conflict) as exc:
        document_sign(actor=office["signatory"], code=doc.code, password=SIGNATORY_PASSWORD)
    assert exc.value.code == "no_certificate"
    doc.refresh_from_db()
    assert doc.state == DocumentState.CHECKED and not doc.signed_at


def test_certificate_revoked_after_signing_shows_as_such(signed_sheet, office, tmp_path):
    certificate_revoke(actor=office["admin"], serial=office["cert"].serial_hex, reason="left the office")
    result = verify_pdf(bytes(signed_sheet.content))
    assert result.authentic and not result.current
    assert result.reasons == ["certificate_revoked"]
    code, out = _verify_command(tmp_path, bytes(signed_sheet.content))
    assert code == EXIT_NOT_CURRENT == 3
    assert "revoked on" in out["reasons"][0]["message"]


def test_superseded_revision(signed_sheet, office, technician, manager, tmp_path):
    rev2 = document_build_sheet(actor=technician, mark_code=signed_sheet.mark.code)
    assert rev2.revision == 2 and rev2.supersedes_id == signed_sheet.pk
    document_check(actor=manager, code=rev2.code)
    document_sign(actor=office["signatory"], code=rev2.code, password=SIGNATORY_PASSWORD)
    old = Document.objects.get(pk=signed_sheet.pk)
    assert old.state == DocumentState.SUPERSEDED and old.superseded_at is not None
    assert bytes(old.content) == bytes(signed_sheet.content)  # superseded, never changed
    code, out = _verify_command(tmp_path, bytes(old.content))
    assert code == 3 and out["superseded_by"] == rev2.code
    assert [r["code"] for r in out["reasons"]] == ["superseded"]


def test_out_of_date_after_the_mark_changes(signed_sheet, manager, tmp_path):
    mark = signed_sheet.mark
    mark_update(actor=manager, code=mark.code, expected_version=mark.version, changes={"name": "Renamed corner"})
    doc = Document.objects.get(pk=signed_sheet.pk)
    assert doc.out_of_date and doc.state == DocumentState.SIGNED
    assert "name" in doc.out_of_date_reason
    assert bytes(doc.content) == bytes(signed_sheet.content)
    code, out = _verify_command(tmp_path, bytes(doc.content))
    assert code == 3 and [r["code"] for r in out["reasons"]] == ["out_of_date"]


def test_notes_only_edit_does_not_make_the_sheet_out_of_date(signed_sheet, manager):
    mark = signed_sheet.mark
    mark_update(actor=manager, code=mark.code, expected_version=mark.version, changes={"notes": "office note"})
    assert not Document.objects.get(pk=signed_sheet.pk).out_of_date


def test_wrong_password_signs_nothing(mark, office, technician, manager):
    doc = document_build_sheet(actor=technician, mark_code=mark.code)
    document_check(actor=manager, code=doc.code)
    with pytest.raises(PermissionDeniedError) as exc:
        document_sign(actor=office["signatory"], code=doc.code, password="not-the-password")
    assert exc.value.code == "wrong_password"
    doc.refresh_from_db()
    assert doc.state == DocumentState.CHECKED
