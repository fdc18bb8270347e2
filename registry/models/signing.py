"""Who may sign, and with what: signatories' licences, the office's certificate authority, signing certificates.

Private keys are stored only encrypted (PKCS#8 with the secret ``REGISTRY_SIGNING_KEY_SECRET`` from the
environment; see ``registry/reports/ca.py``). An authority the office does not run (the issuer of a
certificate a signatory brought in a PKCS#12 file) is kept with its certificate only, no key.
"""

from __future__ import annotations

from django.conf import settings
from django.db import models
from django.db.models import Q


class SignatoryProfile(models.Model):
    """A licensed surveyor's licence, printed in the signature block of what they sign."""

    user = models.OneToOneField(settings.AUTH_USER_MODEL, on_delete=models.CASCADE, related_name="signatory_profile")
    licence_number = models.CharField(max_length=60)
    jurisdiction = models.CharField(max_length=120, help_text="Who issued the licence, e.g. a state board.")
    updated_at = models.DateTimeField(auto_now=True)

    class Meta:
        constraints = [
            models.CheckConstraint(
                condition=~Q(licence_number="") & ~Q(jurisdiction=""), name="signatory_licence_complete"
            )
        ]

    def __str__(self) -> str:
        return f"{self.user} licence {self.licence_number} ({self.jurisdiction})"


class CertificateAuthority(models.Model):
    """An issuer of signing certificates that the registry trusts.

    ``office`` authorities are run by the registry (their key is held, encrypted); at most one of them is
    active and issues new certificates. Others were brought with an imported certificate (no key).
    """

    name = models.CharField(max_length=200)
    certificate_pem = models.TextField()
    key_pem_encrypted = models.TextField(blank=True)
    fingerprint_sha256 = models.CharField(max_length=64, unique=True)
    office = models.BooleanField(default=False, help_text="Run by the registry (its key is held).")
    active = models.BooleanField(default=False, help_text="Issues new certificates.")
    is_demo = models.BooleanField(default=False)
    crl_number = models.PositiveIntegerField(default=1)
    not_after = models.DateTimeField()
    created_at = models.DateTimeField(auto_now_add=True)
    created_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.SET_NULL, related_name="+"
    )

    class Meta:
        ordering = ["-created_at"]
        constraints = [
            models.UniqueConstraint(fields=["active"], condition=Q(active=True), name="one_active_office_ca"),
            models.CheckConstraint(condition=~Q(active=True) | Q(office=True), name="active_ca_is_office"),
            models.CheckConstraint(condition=~Q(office=True) | ~Q(key_pem_encrypted=""), name="office_ca_has_key"),
        ]

    def __str__(self) -> str:
        return self.name


class SigningCertificate(models.Model):
    """A signatory's certificate and (encrypted) private key."""

    user = models.ForeignKey(settings.AUTH_USER_MODEL, on_delete=models.PROTECT, related_name="signing_certificates")
    authority = models.ForeignKey(CertificateAuthority, on_delete=models.PROTECT, related_name="certificates")
    serial_hex = models.CharField(max_length=64)
    subject = models.CharField(max_length=300)
    certificate_pem = models.TextField()
    key_pem_encrypted = models.TextField()
    fingerprint_sha256 = models.CharField(max_length=64, unique=True)
    not_before = models.DateTimeField()
    not_after = models.DateTimeField()
    imported = models.BooleanField(default=False, help_text="Brought by the signatory (PKCS#12), not issued here.")
    is_demo = models.BooleanField(default=False)
    issued_at = models.DateTimeField(auto_now_add=True)
    issued_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.SET_NULL, related_name="+"
    )
    revoked_at = models.DateTimeField(null=True, blank=True)
    revocation_reason = models.CharField(max_length=200, blank=True)
    revoked_by = models.ForeignKey(
        settings.AUTH_USER_MODEL, null=True, blank=True, on_delete=models.SET_NULL, related_name="+"
    )

    class Meta:
        ordering = ["-issued_at"]
        constraints = [
            models.UniqueConstraint(fields=["authority", "serial_hex"], name="certificate_serial_unique"),
        ]

    def __str__(self) -> str:
        return f"{self.subject} (serial {self.serial_hex})"


__all__ = ["CertificateAuthority", "SignatoryProfile", "SigningCertificate"]
