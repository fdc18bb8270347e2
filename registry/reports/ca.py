"""The office's certificate authority: keys, certificates, revocation lists, PKCS#12 import (``cryptography``).

No Django import: secrets and names are passed in. Keys are ECDSA on NIST P-256 with SHA-256 signatures
(FIPS 186-5; RFC 5480 for the X.509 encoding); certificates and CRLs follow RFC 5280. Private keys are
kept as encrypted PKCS#8 PEM (RFC 5958), "BestAvailableEncryption" of ``cryptography`` (scrypt key
derivation + AES-256-CBC at the time of writing) with the secret from the environment.

A signing certificate carries ``digitalSignature`` and ``nonRepudiation`` (content commitment) key usage,
the extended key usage ``emailProtection`` and ``1.2.840.113583.1.1.5`` (PDF document signing, as
commonly used by PDF readers; common practice), and a CRL distribution point at the registry's public
address so that a client can check revocation.
"""

from __future__ import annotations

import datetime as dt
import hashlib
from dataclasses import dataclass

from cryptography import x509
from cryptography.hazmat.primitives import hashes, serialization
from cryptography.hazmat.primitives.asymmetric import ec
from cryptography.hazmat.primitives.serialization import pkcs12
from cryptography.x509.oid import ExtendedKeyUsageOID, NameOID, ObjectIdentifier

__all__ = [
    "CaError",
    "IssuedPair",
    "certificate_fingerprint",
    "certificate_from_pem",
    "decrypt_key",
    "encrypt_key",
    "issue_signing_certificate",
    "make_crl",
    "new_authority",
    "read_pkcs12",
    "subject_text",
]

#: Extended key usage "PDF document signing" (Adobe's arc; recognised by common PDF readers).
PDF_SIGNING_EKU = ObjectIdentifier("1.2.840.113583.1.1.5")
DEMO_MARK = "DEMO"


class CaError(ValueError):
    """A certificate operation that cannot be done; ``code`` says why."""

    def __init__(self, message: str, *, code: str):
        super().__init__(message)
        self.code = code


@dataclass(frozen=True)
class IssuedPair:
    certificate: x509.Certificate
    key: ec.EllipticCurvePrivateKey


def _name(common_name: str, organisation: str, *, demo: bool) -> x509.Name:
    attrs = [x509.NameAttribute(NameOID.COMMON_NAME, common_name[:64])]
    if organisation:
        attrs.append(x509.NameAttribute(NameOID.ORGANIZATION_NAME, organisation[:64]))
    if demo:
        attrs.append(x509.NameAttribute(NameOID.ORGANIZATIONAL_UNIT_NAME, "DEMO - not for real use"))
    return x509.Name(attrs)


def _key_usage(*, ca: bool) -> x509.KeyUsage:
    return x509.KeyUsage(
        digital_signature=not ca,
        content_commitment=not ca,
        key_encipherment=False,
        data_encipherment=False,
        key_agreement=False,
        key_cert_sign=ca,
        crl_sign=ca,
        encipher_only=False,
        decipher_only=False,
    )


def new_authority(name: str, organisation: str, *, demo: bool, now: dt.datetime, valid_years: int = 20) -> IssuedPair:
    """A self-signed root for the office (P-256, SHA-256), path length 0: it signs signatories only."""
    if demo and not name.upper().startswith(DEMO_MARK):
        name = f"{DEMO_MARK} {name}"
    key = ec.generate_private_key(ec.SECP256R1())
    subject = _name(name, organisation, demo=demo)
    cert = (
        x509.CertificateBuilder()
        .subject_name(subject)
        .issuer_name(subject)
        .public_key(key.public_key())
        .serial_number(x509.random_serial_number())
        .not_valid_before(now - dt.timedelta(minutes=5))
        .not_valid_after(now + dt.timedelta(days=round(365.25 * valid_years)))
        .add_extension(x509.BasicConstraints(ca=True, path_length=0), critical=True)
        .add_extension(_key_usage(ca=True), critical=True)
        .add_extension(x509.SubjectKeyIdentifier.from_public_key(key.public_key()), critical=False)
        .sign(key, hashes.SHA256())
    )
    return IssuedPair(cert, key)


def issue_signing_certificate(
    *,
    authority_cert: x509.Certificate,
    authority_key: ec.EllipticCurvePrivateKey,
    common_name: str,
    organisation: str,
    email: str,
    demo: bool,
    now: dt.datetime,
    valid_days: int,
    crl_url: str,
) -> IssuedPair:
    """A signatory's certificate (P-256 key made here), signed by the office's authority."""
    if valid_days < 1:
        raise CaError("A certificate is valid for at least one day.", code="bad_validity")
    if now + dt.timedelta(days=valid_days) > authority_cert.not_valid_after_utc:
        raise CaError(
            "The certificate would outlive the authority that issues it; shorten it or renew the authority.",
            code="outlives_authority",
        )
    if demo and not common_name.upper().startswith(DEMO_MARK):
        common_name = f"{DEMO_MARK} {common_name}"
    key = ec.generate_private_key(ec.SECP256R1())
    builder = (
        x509.CertificateBuilder()
        .subject_name(_name(common_name, organisation, demo=demo))
        .issuer_name(authority_cert.subject)
        .public_key(key.public_key())
        .serial_number(x509.random_serial_number())
        .not_valid_before(now - dt.timedelta(minutes=5))
        .not_valid_after(now + dt.timedelta(days=valid_days))
        .add_extension(x509.BasicConstraints(ca=False, path_length=None), critical=True)
        .add_extension(_key_usage(ca=False), critical=True)
        .add_extension(x509.ExtendedKeyUsage([ExtendedKeyUsageOID.EMAIL_PROTECTION, PDF_SIGNING_EKU]), critical=False)
        .add_extension(x509.SubjectKeyIdentifier.from_public_key(key.public_key()), critical=False)
        .add_extension(x509.AuthorityKeyIdentifier.from_issuer_public_key(authority_key.public_key()), critical=False)
    )
    if email:
        builder = builder.add_extension(x509.SubjectAlternativeName([x509.RFC822Name(email)]), critical=False)
    if crl_url:
        builder = builder.add_extension(
            x509.CRLDistributionPoints(
                [x509.DistributionPoint([x509.UniformResourceIdentifier(crl_url)], None, None, None)]
            ),
            critical=False,
        )
    return IssuedPair(builder.sign(authority_key, hashes.SHA256()), key)


def make_crl(
    *,
    authority_cert: x509.Certificate,
    authority_key: ec.EllipticCurvePrivateKey,
    revoked: list[tuple[int, dt.datetime]],
    crl_number: int,
    now: dt.datetime,
    next_update_days: int = 7,
) -> x509.CertificateRevocationList:
    """The authority's certificate revocation list (RFC 5280 §5) for ``revoked`` (serial, revocation time)."""
    builder = (
        x509.CertificateRevocationListBuilder()
        .issuer_name(authority_cert.subject)
        .last_update(now)
        .next_update(now + dt.timedelta(days=next_update_days))
        .add_extension(x509.CRLNumber(crl_number), critical=False)
        .add_extension(x509.AuthorityKeyIdentifier.from_issuer_public_key(authority_key.public_key()), critical=False)
    )
    for serial, when in revoked:
        builder = builder.add_revoked_certificate(
            x509.RevokedCertificateBuilder().serial_number(serial).revocation_date(when).build()
        )
    return builder.sign(authority_key, hashes.SHA256())


def encrypt_key(key, secret: str) -> str:
    """The private key as encrypted PKCS#8 PEM (text)."""
    if not secret:
        raise CaError("REGISTRY_SIGNING_KEY_SECRET is not set: signing keys cannot be stored.", code="no_key_secret")
    return key.private_bytes(
        serialization.Encoding.PEM,
        serialization.PrivateFormat.PKCS8,
        serialization.BestAvailableEncryption(secret.encode("utf-8")),
    ).decode("ascii")


def decrypt_key(pem: str, secret: str):
    """Load an encrypted PKCS#8 PEM key; a wrong secret raises ``CaError`` (code ``key_secret_mismatch``)."""
    if not secret:
        raise CaError("REGISTRY_SIGNING_KEY_SECRET is not set: signing keys cannot be read.", code="no_key_secret")
    try:
        return serialization.load_pem_private_key(pem.encode("ascii"), password=secret.encode("utf-8"))
    except (ValueError, TypeError):
        raise CaError(
            "The stored key cannot be decrypted with REGISTRY_SIGNING_KEY_SECRET (was the secret changed?).",
            code="key_secret_mismatch",
        ) from None


def certificate_from_pem(pem: str) -> x509.Certificate:
    return x509.load_pem_x509_certificate(pem.encode("ascii"))


def certificate_pem(cert: x509.Certificate) -> str:
    return cert.public_bytes(serialization.Encoding.PEM).decode("ascii")


def certificate_fingerprint(cert: x509.Certificate) -> str:
    """SHA-256 of the DER certificate, lower-case hex."""
    return hashlib.sha256(cert.public_bytes(serialization.Encoding.DER)).hexdigest()


def subject_text(cert: x509.Certificate) -> str:
    return cert.subject.rfc4514_string()


def read_pkcs12(data: bytes, password: str):
    """(key, certificate, other certificates) from a PKCS#12 file; the key must be ECDSA P-256 or RSA ≥ 2048."""
    try:
        key, cert, others = pkcs12.load_key_and_certificates(data, password.encode("utf-8") if password else None)
    except (ValueError, TypeError):
        raise CaError("The PKCS#12 file cannot be read with this password.", code="bad_pkcs12") from None
    if key is None or cert is None:
        raise CaError("The PKCS#12 file holds no key and certificate pair.", code="bad_pkcs12")
    from cryptography.hazmat.primitives.asymmetric import rsa

    if isinstance(key, ec.EllipticCurvePrivateKey):
        if not isinstance(key.curve, ec.SECP256R1):
            raise CaError("Only P-256 elliptic-curve keys are accepted.", code="unsupported_key")
    elif isinstance(key, rsa.RSAPrivateKey):
        if key.key_size < 2048:
            raise CaError("RSA keys must have at least 2048 bits.", code="unsupported_key")
    else:
        raise CaError("Only ECDSA P-256 or RSA keys are accepted.", code="unsupported_key")
    return key, cert, list(others or [])
