"""Writes on the office's certificate authority and signatories' certificates (admin ability, audited).

- ``office_ca_init``: make the office's authority (a P-256 root); at most one is active. Replacing it
  (``replace=True``) keeps the old one trusted for what it signed.
- ``certificate_issue``: a signing certificate for a signatory (a user with the SIGN ability and a
  licence on their profile), key made and stored encrypted here.
- ``certificate_import``: a certificate and key a signatory brings (PKCS#12); its issuer becomes a
  trusted authority of the registry (by this deliberate, audited act of an administrator).
- ``certificate_revoke``: revoke; the authority's revocation list (``office_crl``) lists it from then on.
  A revoked certificate signs nothing more; what it signed before stays authentic, and verification
  says the certificate has since been revoked.

Keys are encrypted with ``REGISTRY["SIGNING_KEY_SECRET"]`` (``REGISTRY_SIGNING_KEY_SECRET``).
"""

from __future__ import annotations

import datetime as dt
from typing import Any

from cryptography.exceptions import InvalidSignature
from cryptography.hazmat.primitives import serialization
from django.conf import settings
from django.contrib.auth import get_user_model
from django.core.exceptions import ValidationError
from django.db import IntegrityError, transaction
from django.db.models import F
from django.urls import reverse
from django.utils import timezone

from registry.errors import Conflict, NotFound
from registry.models import CertificateAuthority, SignatoryProfile, SigningCertificate
from registry.reports import ca as ca_lib
from registry.roles import Ability, has_ability
from registry.services._input import parse_note
from registry.services.access import require_ability
from registry.services.audit import audit_record

DEFAULT_VALID_DAYS = 730


def key_secret() -> str:
    return settings.REGISTRY.get("SIGNING_KEY_SECRET") or ""


def _ca_error(exc: ca_lib.CaError) -> ValidationError:
    return ValidationError(str(exc), code=exc.code)


def active_authority() -> CertificateAuthority | None:
    return CertificateAuthority.objects.filter(active=True).first()


def crl_url() -> str:
    return settings.REGISTRY.get("PUBLIC_URL", "").rstrip("/") + reverse("web:ca-crl")


def _user(username: Any):
    User = get_user_model()
    if not isinstance(username, str) or not username.strip() or "\x00" in username:
        raise NotFound(f"No user named {username!r}.", details={"username": str(username)})
    try:
        return User.objects.get(username=username.strip())
    except User.DoesNotExist:
        raise NotFound(f"No user named {username!r}.", details={"username": username}) from None


def signatory_set_licence(*, actor, username: str, licence_number: str, jurisdiction: str) -> SignatoryProfile:
    """Record (or change) a signatory's licence number and jurisdiction (admin)."""
    require_ability(actor, Ability.ADMINISTER)
    user = _user(username)
    licence_number = (licence_number or "").strip()
    jurisdiction = (jurisdiction or "").strip()
    errors = {}
    if not licence_number or len(licence_number) > 60:
        errors["licence_number"] = ValidationError("Give the licence number (at most 60 characters).", code="required")
    if not jurisdiction or len(jurisdiction) > 120:
        errors["jurisdiction"] = ValidationError(
            "Give the licensing jurisdiction (at most 120 characters).", code="required"
        )
    if errors:
        raise ValidationError(errors)
    if not has_ability(user, Ability.SIGN):
        raise ValidationError(
            f"{user.username} does not hold the signatory role; give it first (set_roles).", code="not_a_signatory"
        )
    with transaction.atomic():
        profile = SignatoryProfile.objects.select_for_update().filter(user=user).first()
        before = {"licence_number": profile.licence_number, "jurisdiction": profile.jurisdiction} if profile else None
        if profile is None:
            profile = SignatoryProfile(user=user)
        profile.licence_number, profile.jurisdiction = licence_number, jurisdiction
        profile.save()
        audit_record(
            actor=actor,
            action="signatory_set_licence",
            obj=profile,
            before=before,
            after={"user": user.username, "licence_number": licence_number, "jurisdiction": jurisdiction},
        )
    return profile


def office_ca_init(
    *, actor, name: str, organisation: str = "", demo: bool = False, valid_years: int = 20, replace: bool = False
) -> CertificateAuthority:
    """Create the office's certificate authority (admin). Refused when one is active, unless ``replace``."""
    require_ability(actor, Ability.ADMINISTER)
    name = (name or "").strip()
    if not name or len(name) > 60:
        raise ValidationError({"name": ValidationError("Name the authority (at most 60 characters).", code="required")})
    if not 1 <= int(valid_years) <= 40:
        raise ValidationError("An authority is valid for 1 to 40 years.", code="bad_validity")
    now = timezone.now()
    pair = ca_lib.new_authority(name, organisation.strip(), demo=demo, now=now, valid_years=int(valid_years))
    try:
        key_pem = ca_lib.encrypt_key(pair.key, key_secret())
    except ca_lib.CaError as exc:
        raise _ca_error(exc) from None
    with transaction.atomic():
        current = CertificateAuthority.objects.select_for_update().filter(active=True).first()
        if current is not None and not replace:
            raise Conflict(
                f"The office already has an active authority ({current.name}). Replacing it is a deliberate act: "
                "use replace (certificates it issued stay valid until they expire or are revoked).",
                code="authority_exists",
            )
        if current is not None:
            current.active = False
            current.save(update_fields=["active"])
        authority = CertificateAuthority.objects.create(
            name=name if not demo or "DEMO" in name.upper() else f"DEMO {name}",
            certificate_pem=ca_lib.certificate_pem(pair.certificate),
            key_pem_encrypted=key_pem,
            fingerprint_sha256=ca_lib.certificate_fingerprint(pair.certificate),
            office=True,
            active=True,
            is_demo=demo,
            not_after=pair.certificate.not_valid_after_utc,
            created_by=actor if getattr(actor, "is_authenticated", False) else None,
        )
        audit_record(
            actor=actor,
            action="office_ca_init",
            obj=authority,
            before={"active_authority": current.pk} if current else None,
            after={"name": authority.name, "fingerprint_sha256": authority.fingerprint_sha256, "demo": demo},
        )
    return authority


def _profile_or_error(user) -> SignatoryProfile:
    profile = SignatoryProfile.objects.filter(user=user).first()
    if profile is None:
        raise ValidationError(
            f"{user.username} has no licence number and jurisdiction on their profile; record them first.",
            code="no_licence",
        )
    return profile


def certificate_issue(
    *,
    actor,
    username: str,
    valid_days: int = DEFAULT_VALID_DAYS,
    demo: bool | None = None,
    now: dt.datetime | None = None,
) -> SigningCertificate:
    """Issue a signing certificate to a signatory from the active office authority (admin)."""
    require_ability(actor, Ability.ADMINISTER)
    user = _user(username)
    if not has_ability(user, Ability.SIGN):
        raise ValidationError(f"{user.username} does not hold the signatory role.", code="not_a_signatory")
    profile = _profile_or_error(user)
    authority = active_authority()
    if authority is None:
        raise Conflict("The office has no certificate authority yet: create it first (office_ca init).", code="no_ca")
    demo = authority.is_demo if demo is None else demo
    now = now or timezone.now()
    full_name = user.get_full_name() or user.username
    try:
        ca_key = ca_lib.decrypt_key(authority.key_pem_encrypted, key_secret())
        pair = ca_lib.issue_signing_certificate(
            authority_cert=ca_lib.certificate_from_pem(authority.certificate_pem),
            authority_key=ca_key,
            common_name=f"{full_name}, licence {profile.licence_number}",
            organisation=settings.REGISTRY.get("OFFICE_NAME", "")[:64],
            email=user.email or "",
            demo=demo,
            now=now,
            valid_days=int(valid_days),
            crl_url=crl_url(),
        )
        key_pem = ca_lib.encrypt_key(pair.key, key_secret())
    except ca_lib.CaError as exc:
        raise _ca_error(exc) from None
    with transaction.atomic():
        cert = SigningCertificate.objects.create(
            user=user,
            authority=authority,
            serial_hex=f"{pair.certificate.serial_number:x}",
            subject=ca_lib.subject_text(pair.certificate)[:300],
            certificate_pem=ca_lib.certificate_pem(pair.certificate),
            key_pem_encrypted=key_pem,
            fingerprint_sha256=ca_lib.certificate_fingerprint(pair.certificate),
            not_before=pair.certificate.not_valid_before_utc,
            not_after=pair.certificate.not_valid_after_utc,
            is_demo=demo,
            issued_by=actor if getattr(actor, "is_authenticated", False) else None,
        )
        audit_record(
            actor=actor,
            action="certificate_issue",
            obj=cert,
            after={
                "user": user.username,
                "serial": cert.serial_hex,
                "fingerprint_sha256": cert.fingerprint_sha256,
                "not_after": cert.not_after,
                "demo": demo,
            },
        )
    return cert


def certificate_import(*, actor, username: str, pkcs12_bytes: bytes, password: str) -> SigningCertificate:
    """Store a certificate and key a signatory brings (PKCS#12), and trust its issuer (admin).

    The file must hold the issuer's certificate too (the chain up to a self-signed root, or the issuing
    authority itself): that authority becomes one the registry trusts for verification.
    """
    require_ability(actor, Ability.ADMINISTER)
    user = _user(username)
    if not has_ability(user, Ability.SIGN):
        raise ValidationError(f"{user.username} does not hold the signatory role.", code="not_a_signatory")
    _profile_or_error(user)
    try:
        key, cert, others = ca_lib.read_pkcs12(pkcs12_bytes, password)
    except ca_lib.CaError as exc:
        raise _ca_error(exc) from None
    issuer = next((o for o in others if o.subject == cert.issuer), None)
    if issuer is None:
        raise ValidationError(
            "The PKCS#12 file does not include the certificate of the authority that issued this one.",
            code="no_issuer",
        )
    try:
        cert.verify_directly_issued_by(issuer)
    except (ValueError, TypeError, InvalidSignature):
        raise ValidationError("The certificate was not signed by the included issuer.", code="bad_chain") from None
    now = timezone.now()
    if not cert.not_valid_before_utc <= now <= cert.not_valid_after_utc:
        raise ValidationError("The certificate is not valid today.", code="not_valid_now")
    try:
        key_pem = ca_lib.encrypt_key(key, key_secret())
    except ca_lib.CaError as exc:
        raise _ca_error(exc) from None
    fingerprint = ca_lib.certificate_fingerprint(cert)
    with transaction.atomic():
        authority, created = CertificateAuthority.objects.get_or_create(
            fingerprint_sha256=ca_lib.certificate_fingerprint(issuer),
            defaults={
                "name": issuer.subject.rfc4514_string()[:200],
                "certificate_pem": ca_lib.certificate_pem(issuer),
                "office": False,
                "active": False,
                "not_after": issuer.not_valid_after_utc,
                "created_by": actor if getattr(actor, "is_authenticated", False) else None,
            },
        )
        try:
            with transaction.atomic():
                stored = SigningCertificate.objects.create(
                    user=user,
                    authority=authority,
                    serial_hex=f"{cert.serial_number:x}",
                    subject=ca_lib.subject_text(cert)[:300],
                    certificate_pem=ca_lib.certificate_pem(cert),
                    key_pem_encrypted=key_pem,
                    fingerprint_sha256=fingerprint,
                    not_before=cert.not_valid_before_utc,
                    not_after=cert.not_valid_after_utc,
                    imported=True,
                    issued_by=actor if getattr(actor, "is_authenticated", False) else None,
                )
        except IntegrityError:
            raise ValidationError("This certificate is already in the registry.", code="duplicate") from None
        audit_record(
            actor=actor,
            action="certificate_import",
            obj=stored,
            after={
                "user": user.username,
                "serial": stored.serial_hex,
                "fingerprint_sha256": fingerprint,
                "issuer": authority.name,
                "issuer_newly_trusted": created,
            },
        )
    return stored


def certificate_revoke(*, actor, serial: str, reason: str, now: dt.datetime | None = None) -> SigningCertificate:
    """Revoke a signing certificate (admin), with the reason; it is on the revocation list from now on."""
    require_ability(actor, Ability.ADMINISTER)
    reason = parse_note(reason, required=True, what="the revocation")
    serial = (serial or "").strip().lower().removeprefix("0x")
    with transaction.atomic():
        matches = list(SigningCertificate.objects.select_for_update().filter(serial_hex=serial)[:2])
        if not matches:
            raise NotFound(f"No signing certificate with serial {serial!r}.", details={"serial": serial})
        if len(matches) > 1:
            raise ValidationError("Two authorities issued certificates with this serial.", code="ambiguous_serial")
        cert = matches[0]
        if cert.revoked_at is not None:
            raise Conflict(f"Certificate {serial} was already revoked on {cert.revoked_at:%Y-%m-%d}.", code="revoked")
        cert.revoked_at = now or timezone.now()
        cert.revocation_reason = reason[:200]
        cert.revoked_by = actor if getattr(actor, "is_authenticated", False) else None
        cert.save(update_fields=["revoked_at", "revocation_reason", "revoked_by"])
        CertificateAuthority.objects.filter(pk=cert.authority_id).update(crl_number=F("crl_number") + 1)
        audit_record(
            actor=actor,
            action="certificate_revoke",
            obj=cert,
            before={"revoked_at": None},
            after={"serial": cert.serial_hex, "revoked_at": cert.revoked_at},
            note=reason,
        )
    return cert


# ---------------------------------------------------------------------------------------------------
# Reads (public: the authority's certificate and revocation list)
# ---------------------------------------------------------------------------------------------------


def office_ca_pem(authority: CertificateAuthority | None = None) -> str:
    authority = authority or active_authority()
    if authority is None:
        raise NotFound("The office has no certificate authority.")
    return authority.certificate_pem


def office_crl_der(authority: CertificateAuthority | None = None) -> bytes:
    """The authority's current revocation list, DER (signed with its key on each call)."""
    authority = authority or active_authority()
    if authority is None or not authority.office:
        raise NotFound("The office has no certificate authority.")
    revoked = [
        (int(c.serial_hex, 16), c.revoked_at)
        for c in SigningCertificate.objects.filter(authority=authority, revoked_at__isnull=False)
    ]
    try:
        key = ca_lib.decrypt_key(authority.key_pem_encrypted, key_secret())
    except ca_lib.CaError as exc:
        raise _ca_error(exc) from None
    crl = ca_lib.make_crl(
        authority_cert=ca_lib.certificate_from_pem(authority.certificate_pem),
        authority_key=key,
        revoked=revoked,
        crl_number=authority.crl_number,
        now=timezone.now(),
    )
    return crl.public_bytes(serialization.Encoding.DER)


def usable_certificate(user, *, at: dt.datetime | None = None) -> SigningCertificate | None:
    """The user's newest certificate that is valid at ``at`` and not revoked (None if they have none)."""
    at = at or timezone.now()
    return (
        SigningCertificate.objects.filter(user=user, revoked_at__isnull=True, not_before__lte=at, not_after__gte=at)
        .select_related("authority")
        .order_by("-not_after", "-pk")
        .first()
    )
