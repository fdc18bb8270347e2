"""PAdES signatures with pyHanko: sign a prepared PDF, read and validate the signature of a PDF.

Signing (ETSI EN 319 142-1, PAdES baseline B-B; ISO 32000-1 §12.8 digital signatures): an incremental
update adds a signature field in the box the layout reserved on the signature page, with a visible
appearance drawn by us (the signatory's name, licence number and jurisdiction, the date and time of
signing, the document's code and revision) and a CMS signature (``/SubFilter /ETSI.CAdES.detached``)
over the whole file: SHA-256 digest, ECDSA P-256 key, the signer's certificate and its chain embedded.
Nothing is fetched over the network (no time-stamp authority, no revocation fetching).

Validation uses pyHanko's validation API with a ``ValidationContext`` whose trust roots are the
authorities the registry trusts and with fetching off; whether the certificate was revoked, and when,
is decided from the registry's own records by the caller (``registry.services.verification``).
"""

from __future__ import annotations

import binascii
import datetime as dt
import io
import logging
import unicodedata
import uuid
from dataclasses import dataclass

from asn1crypto import keys as asn1_keys
from asn1crypto import x509 as asn1_x509
from cryptography.hazmat.primitives import serialization

__all__ = ["SignatureCheck", "SigningError", "check_signature", "sign_pdf"]

FIELD_NAME = "Signature1"


class SigningError(RuntimeError):
    """The PDF could not be signed; ``code`` says why."""

    def __init__(self, message: str, *, code: str):
        super().__init__(message)
        self.code = code


def _ascii(text: str) -> str:
    return unicodedata.normalize("NFKD", text).encode("ascii", "ignore").decode("ascii")


def _appearance_pdf(width: float, height: float, lines: list[tuple[str, str]]) -> bytes:
    """A one-page PDF of the box size: the visible signature (our fonts, our look)."""
    from reportlab.pdfgen import canvas

    from registry.reports.layout import GREY, INK, register_fonts

    register_fonts()
    buf = io.BytesIO()
    c = canvas.Canvas(buf, pagesize=(width, height))
    c.setFillColorRGB(1, 1, 1)
    c.setStrokeColor(INK)
    c.setLineWidth(1.0)
    c.rect(0.5, 0.5, width - 1, height - 1, stroke=1, fill=1)
    from reportlab.lib.utils import simpleSplit

    fonts = {"head": ("Doc-Bold", 9.0, INK, 10.5), "grey": ("Doc", 6.8, GREY, 8.4), "body": ("Doc", 7.6, INK, 9.2)}
    laid: list[tuple[str, float, object, float, str]] = []
    for style, text in lines:
        font, size, ink, leading = fonts[style]
        for part in simpleSplit(text, font, size, width - 12):  # wrap what does not fit the box
            laid.append((font, size, ink, leading, part))
    # shrink evenly when the wrapped lines would overflow the box
    total = sum(item[3] for item in laid) + 6
    k = min(1.0, (height - 4) / total)
    y = height - 12 * k
    for font, size, ink, leading, part in laid:
        c.setFont(font, size * k)
        c.setFillColor(ink)
        c.drawString(6, y, part)
        y -= leading * k
    c.showPage()
    c.save()
    return buf.getvalue()


def _imported_page(data: bytes):
    from pyhanko.pdf_utils import content
    from pyhanko.pdf_utils.layout import BoxConstraints
    from pyhanko.pdf_utils.reader import PdfFileReader

    class _BytesPage(content.PdfContent):
        def render(self) -> bytes:
            w = self._ensure_writer
            xobj = w.import_page_as_xobject(PdfFileReader(io.BytesIO(data)), page_ix=0)
            name = b"/Import" + binascii.hexlify(uuid.uuid4().bytes)
            self.resources.xobject[name.decode("ascii")] = xobj
            x1, y1, x2, y2 = xobj.get_object()["/BBox"]
            self.box = BoxConstraints(width=abs(x1 - x2), height=abs(y1 - y2))
            return name + b" Do"

    return _BytesPage()


def sign_pdf(
    content: bytes,
    *,
    certificate_pem: str,
    private_key,
    chain_pems: list[str],
    page: int,
    box: list[float],
    signer_name: str,
    licence_number: str,
    jurisdiction: str,
    document_code: str,
    revision: int,
    signed_at: dt.datetime,
    office: str,
) -> bytes:
    """``content`` signed (PAdES B-B, visible, chain embedded); returns the whole signed file."""
    from pyhanko.pdf_utils.incremental_writer import IncrementalPdfFileWriter
    from pyhanko.sign import fields, signers
    from pyhanko.sign.signers.pdf_signer import PdfSignatureMetadata, PdfSigner
    from pyhanko.stamp import StaticStampStyle
    from pyhanko_certvalidator.registry import SimpleCertificateStore

    cert = asn1_x509.Certificate.load(_der(certificate_pem))
    chain = [asn1_x509.Certificate.load(_der(p)) for p in chain_pems]
    key_info = asn1_keys.PrivateKeyInfo.load(
        private_key.private_bytes(
            serialization.Encoding.DER, serialization.PrivateFormat.PKCS8, serialization.NoEncryption()
        )
    )
    signer = signers.SimpleSigner(
        signing_cert=cert, signing_key=key_info, cert_registry=SimpleCertificateStore.from_certs(chain)
    )
    # one point wider than the printed box on each side, so that the appearance covers its dashed frame
    x1, y1, x2, y2 = (float(v) for v in box)
    x1, y1, x2, y2 = x1 - 1, y1 - 1, x2 + 1, y2 + 1
    when = signed_at.astimezone(dt.UTC)
    lines = [
        ("head", f"Signed by {signer_name}"[:80]),
        ("body", f"Licensed surveyor, licence {licence_number}"[:90]),
        ("body", f"Licensing jurisdiction: {jurisdiction}"[:90]),
        ("body", f"Signed {when:%Y-%m-%d %H:%M} UTC"),
        ("grey", f"Document {document_code}, revision {revision}; electronic signature (PAdES)"),
        ("grey", "Verify: scan the QR code of this document or open its verification page."),
    ]
    appearance = _appearance_pdf(x2 - x1, y2 - y1, lines)
    from pyhanko.pdf_utils import layout as ph_layout

    style = StaticStampStyle(
        background=_imported_page(appearance),
        border_width=0,
        background_opacity=1.0,
        background_layout=ph_layout.SimpleBoxLayoutRule(
            x_align=ph_layout.AxisAlignment.ALIGN_MID,
            y_align=ph_layout.AxisAlignment.ALIGN_MID,
            margins=ph_layout.Margins.uniform(0),
            inner_content_scaling=ph_layout.InnerScaling.NO_SCALING,
        ),
    )
    meta = PdfSignatureMetadata(
        field_name=FIELD_NAME,
        md_algorithm="sha256",
        subfilter=fields.SigSeedSubFilter.PADES,
        name=_ascii(signer_name),
        reason=_ascii(f"Signed as licensed surveyor, licence {licence_number} ({jurisdiction})"),
        location=_ascii(office)[:120],
    )
    pdf_signer = PdfSigner(
        meta,
        signer=signer,
        stamp_style=style,
        new_field_spec=fields.SigFieldSpec(FIELD_NAME, on_page=int(page), box=(x1, y1, x2, y2)),
    )
    try:
        writer = IncrementalPdfFileWriter(io.BytesIO(content))
        out = io.BytesIO()
        pdf_signer.sign_pdf(writer, output=out)
    except Exception as exc:  # pyHanko raises several kinds; one answer for the user
        raise SigningError(f"The PDF could not be signed: {exc}", code="signing_failed") from exc
    return out.getvalue()


def _der(pem: str) -> bytes:
    from cryptography import x509

    return x509.load_pem_x509_certificate(pem.encode("ascii")).public_bytes(serialization.Encoding.DER)


@dataclass
class SignatureCheck:
    """What pyHanko says about the (single) signature of a PDF."""

    found: bool
    count: int = 0
    intact: bool = False  # the signed bytes hash to the signed digest
    valid: bool = False  # the cryptographic signature is correct
    trusted: bool = False  # the signer's chain ends in a trusted root
    covers_whole_file: bool = False
    signer_certificate_der: bytes = b""
    signer_subject: str = ""
    claimed_signing_time: dt.datetime | None = None
    problem: str = ""


def check_signature(data: bytes, *, trust_root_pems: list[str], at: dt.datetime | None = None) -> SignatureCheck:
    """Validate the signature of ``data`` against ``trust_root_pems`` (offline, no revocation fetching)."""
    from pyhanko.pdf_utils.misc import PdfReadError
    from pyhanko.pdf_utils.reader import PdfFileReader
    from pyhanko.sign.validation import validate_pdf_signature
    from pyhanko.sign.validation.errors import SignatureValidationError
    from pyhanko_certvalidator import ValidationContext

    for name in ("pyhanko", "pyhanko_certvalidator"):
        logging.getLogger(name).setLevel(logging.CRITICAL)
    try:
        reader = PdfFileReader(io.BytesIO(data), strict=False)
        sigs = reader.embedded_signatures
    except (PdfReadError, ValueError, KeyError, TypeError, IndexError) as exc:
        return SignatureCheck(found=False, problem=f"not a readable PDF ({exc})")
    if not sigs:
        return SignatureCheck(found=False, problem="the PDF carries no signature")
    sig = sigs[-1]
    roots = [asn1_x509.Certificate.load(_der(p)) for p in trust_root_pems]
    vc = ValidationContext(
        trust_roots=roots, allow_fetching=False, revocation_mode="soft-fail", moment=at, best_signature_time=at
    )
    try:
        status = validate_pdf_signature(sig, vc)
    except (SignatureValidationError, ValueError, KeyError, TypeError) as exc:
        return SignatureCheck(found=True, count=len(sigs), problem=f"the signature cannot be read ({exc})")
    from pyhanko.sign.validation.status import SignatureCoverageLevel

    cert = status.signing_cert
    return SignatureCheck(
        found=True,
        count=len(sigs),
        intact=bool(status.intact),
        valid=bool(status.valid),
        trusted=bool(status.trusted),
        covers_whole_file=status.coverage == SignatureCoverageLevel.ENTIRE_FILE,
        signer_certificate_der=cert.dump() if cert is not None else b"",
        signer_subject=cert.subject.human_friendly if cert is not None else "",
        claimed_signing_time=getattr(status, "signer_reported_dt", None),
    )
