"""Documents through HTTP: pages per role, downloads, the public verification page (rate-limited), the API."""

from __future__ import annotations

import io

import pytest
from django.urls import reverse
from pypdf import PdfReader

from registry.models import Document, DocumentState
from tests.documents.conftest import SIGNATORY_PASSWORD

pytestmark = pytest.mark.django_db


def _login(client, user):
    client.force_login(user)
    return client


def test_mark_page_offers_prepare_to_preparers_only(client, mark, technician, viewer):
    url = reverse("web:mark-detail", args=[mark.code])
    assert "Prepare sheet" in _login(client, technician).get(url).content.decode()
    client.logout()
    assert "Prepare sheet" not in _login(client, viewer).get(url).content.decode()


def test_prepare_check_sign_through_the_pages(client, mark, office, technician, manager):
    _login(client, technician)
    response = client.post(reverse("web:sheet-build", args=[mark.code]))
    doc = Document.objects.get(mark=mark)
    assert response.status_code == 302 and response["Location"] == reverse("web:document-detail", args=[doc.code])
    page = client.get(response["Location"]).content.decode()
    assert "You prepared this document; another manager or signatory checks it." in page
    # the draft download carries the DRAFT band; the stored bytes do not
    pdf = client.get(reverse("web:document-pdf", args=[doc.code]))
    text = " ".join(p.extract_text() for p in PdfReader(io.BytesIO(pdf.content)).pages)
    assert "DRAFT — NOT SIGNED" in text
    assert "DRAFT — NOT SIGNED" not in " ".join(
        p.extract_text() for p in PdfReader(io.BytesIO(bytes(doc.content))).pages
    )
    client.logout()

    _login(client, manager)
    assert "Record the check" in client.get(reverse("web:document-detail", args=[doc.code])).content.decode()
    client.post(reverse("web:document-check", args=[doc.code]), {"note": "read against the mark page"})
    assert Document.objects.get(pk=doc.pk).state == DocumentState.CHECKED
    # a manager cannot sign: the sign page is refused
    assert client.post(reverse("web:document-sign", args=[doc.code]), {"password": "x"}).status_code == 403
    client.logout()

    _login(client, office["signatory"])
    page = client.get(reverse("web:document-detail", args=[doc.code])).content.decode()
    assert "Your password, again" in page
    response = client.post(reverse("web:document-sign", args=[doc.code]), {"password": "wrong"}, follow=True)
    assert "The password is not correct" in response.content.decode()
    assert Document.objects.get(pk=doc.pk).state == DocumentState.CHECKED
    client.post(reverse("web:document-sign", args=[doc.code]), {"password": SIGNATORY_PASSWORD})
    doc.refresh_from_db()
    assert doc.state == DocumentState.SIGNED
    signed = client.get(reverse("web:document-pdf", args=[doc.code]))
    assert signed.content == bytes(doc.content)  # the signed file exactly as issued


def test_document_list_shows_out_of_date_sheets_to_reissue(client, signed_sheet, manager, signatory):
    from registry.services.marks import mark_update

    mark = signed_sheet.mark
    mark_update(actor=manager, code=mark.code, expected_version=mark.version, changes={"marking": "CR-100 RESET"})
    page = _login(client, signatory).get(reverse("web:document-list")).content.decode()
    assert "Out of date: to reissue" in page and signed_sheet.code in page and "Prepare revision 2" in page


def test_public_verification_page_needs_no_sign_in(client, signed_sheet):
    response = client.get(reverse("web:verify", args=[signed_sheet.code]))
    assert response.status_code == 200
    page = response.content.decode()
    assert "issued and current" in page
    assert "Sina Okonkwo-Test, licence LS-9042 (Invented Board)" in page
    assert "station description sheet of mark cr-100" in page.lower()
    # reveals nothing the document does not show: no preparer or checker, no internal ids
    assert "theo" not in page and "mona" not in page and signed_sheet.sha256 not in page


def test_public_page_upload(client, signed_sheet):
    upload = io.BytesIO(bytes(signed_sheet.content))
    upload.name = "sheet.pdf"
    response = client.post(reverse("web:verify", args=[signed_sheet.code]), {"file": upload})
    page = response.content.decode()
    assert response.status_code == 200 and "The file: authentic and current" in page
    tampered = bytearray(bytes(signed_sheet.content))
    tampered[2000] ^= 1
    upload = io.BytesIO(bytes(tampered))
    upload.name = "sheet.pdf"
    page = client.post(reverse("web:verify-upload"), {"file": upload}).content.decode()
    assert "The file: not authentic" in page and "changed after it was signed" in page


def test_drafts_and_unknown_codes_are_not_public(client, mark, technician):
    from registry.services.documents import document_build_sheet

    doc = document_build_sheet(actor=technician, mark_code=mark.code)
    for code in (doc.code, "S-0000-0000", "nonsense"):
        response = client.get(reverse("web:verify", args=[code]))
        assert response.status_code == 404 and "No issued document has the code" in response.content.decode()


def test_verification_is_rate_limited(client, signed_sheet, settings):
    settings.REGISTRY = {**settings.REGISTRY, "VERIFY_RATE_PER_MIN": 3}
    codes = [client.get(reverse("web:verify", args=[signed_sheet.code])).status_code for _ in range(5)]
    assert codes == [200, 200, 200, 429, 429]


def test_verification_page_and_api_share_one_limit(client, api_client_for, signed_sheet, settings):
    settings.REGISTRY = {**settings.REGISTRY, "VERIFY_RATE_PER_MIN": 3}
    pdf = bytes(signed_sheet.content)
    assert client.get(reverse("web:verify", args=[signed_sheet.code])).status_code == 200
    api = api_client_for(None)
    codes = [api.post("/api/verify/", {"file": io.BytesIO(pdf)}, format="multipart").status_code for _ in range(3)]
    assert codes == [200, 200, 429]  # the page's request counted too
    assert client.get(reverse("web:verify", args=[signed_sheet.code])).status_code == 429


def test_revocation_list_is_rate_limited_by_its_own_setting(client, office, settings):
    settings.REGISTRY = {**settings.REGISTRY, "CRL_RATE_PER_MIN": 2, "VERIFY_RATE_PER_MIN": 5}
    codes = [client.get(reverse("web:ca-crl")).status_code for _ in range(3)]
    assert codes == [200, 200, 429]
    # the verification page counts apart from the revocation list
    assert client.get(reverse("web:verify-upload")).status_code == 200


def test_authority_certificate_and_revocation_list_are_public(client, office):
    from cryptography import x509

    from registry.services.certificates import certificate_revoke

    certificate_revoke(actor=office["admin"], serial=office["cert"].serial_hex, reason="test")
    pem = client.get(reverse("web:ca-certificate"))
    assert pem.status_code == 200 and x509.load_pem_x509_certificate(pem.content).subject.rfc4514_string()
    crl = x509.load_der_x509_crl(client.get(reverse("web:ca-crl")).content)
    ca = x509.load_pem_x509_certificate(pem.content)
    assert crl.is_signature_valid(ca.public_key())
    assert crl.get_revoked_certificate_by_serial_number(int(office["cert"].serial_hex, 16)) is not None


# --------------------------------------------------------------------------------------------- API


def test_api_prepare_check_sign_verify(api_client_for, mark, office, technician, manager):
    created = api_client_for(technician).post(f"/api/marks/{mark.code}/sheet/", {}, format="json")
    assert created.status_code == 201
    code = created.json()["document_code"]
    assert created.json()["state"] == "draft" and created.json()["verify_url"].endswith(f"/verify/{code}/")
    assert api_client_for(technician).post(f"/api/documents/{code}/check/", {}, format="json").status_code == 403
    assert api_client_for(manager).post(f"/api/documents/{code}/check/", {}, format="json").status_code == 200
    denied = api_client_for(manager).post(f"/api/documents/{code}/sign/", {"password": "x"}, format="json")
    assert denied.status_code == 403
    wrong = api_client_for(office["signatory"]).post(f"/api/documents/{code}/sign/", {"password": "x"}, format="json")
    assert wrong.status_code == 403 and wrong.json()["error"]["code"] == "wrong_password"
    signed = api_client_for(office["signatory"]).post(
        f"/api/documents/{code}/sign/", {"password": SIGNATORY_PASSWORD}, format="json"
    )
    assert signed.status_code == 200 and signed.json()["state"] == "signed"
    pdf = api_client_for(technician).get(f"/api/documents/{code}/pdf").content
    verified = api_client_for(None).post("/api/verify/", {"file": io.BytesIO(pdf)}, format="multipart")
    assert verified.status_code == 200
    body = verified.json()
    assert body["authentic"] and body["current"] and body["document_code"] == code


def test_api_list_filters(api_client_for, signed_sheet, viewer):
    rows = api_client_for(viewer).get("/api/documents/?state=signed").json()["results"]
    assert [r["document_code"] for r in rows] == [signed_sheet.code]
    bad = api_client_for(viewer).get("/api/documents/?state=bogus")
    assert bad.status_code == 400 and bad.json()["error"]["code"]
    assert api_client_for(None).get("/api/documents/").status_code == 401
