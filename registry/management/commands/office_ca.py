"""``python manage.py office_ca init|issue|revoke|export|import|licence ...``: the office's signing certificates.

  office_ca init --name NAME --as ADMIN [--organisation ORG] [--years 20] [--demo] [--replace]
  office_ca licence USER --licence NUMBER --jurisdiction TEXT --as ADMIN
  office_ca issue USER --as ADMIN [--days 730]
  office_ca import USER FILE.p12 --as ADMIN --password-stdin
  office_ca revoke SERIAL --reason TEXT --as ADMIN
  office_ca export -o FILE            (the authority's certificate, PEM, for clients)
  office_ca export --crl -o FILE      (its current revocation list, DER)
  office_ca list

Private keys are stored encrypted with REGISTRY_SIGNING_KEY_SECRET. Every change is audited.
"""

from __future__ import annotations

import sys
from pathlib import Path

from django.core.exceptions import ValidationError
from django.core.management.base import BaseCommand, CommandError

from registry.errors import RegistryError
from registry.management.commands._documents import refusal
from registry.management.commands.set_roles import actor_by_username
from registry.models import CertificateAuthority, SigningCertificate
from registry.services import certificates as svc


class Command(BaseCommand):
    help = "Manage the office's certificate authority and signatories' certificates (admin)."

    def add_arguments(self, parser):
        sub = parser.add_subparsers(dest="action", required=True)
        p = sub.add_parser("init", help="create the office's certificate authority")
        p.add_argument("--name", required=True, help="e.g. 'Corvid County Survey Office signing authority'")
        p.add_argument("--organisation", default="")
        p.add_argument("--years", type=int, default=20)
        p.add_argument("--demo", action="store_true", help="mark it DEMO (for demonstrations only)")
        p.add_argument("--replace", action="store_true", help="replace the active authority")
        p.add_argument("--as", dest="actor", required=True)
        p = sub.add_parser("licence", help="record a signatory's licence number and jurisdiction")
        p.add_argument("username")
        p.add_argument("--licence", required=True)
        p.add_argument("--jurisdiction", required=True)
        p.add_argument("--as", dest="actor", required=True)
        p = sub.add_parser("issue", help="issue a signing certificate to a signatory")
        p.add_argument("username")
        p.add_argument("--days", type=int, default=svc.DEFAULT_VALID_DAYS)
        p.add_argument("--as", dest="actor", required=True)
        p = sub.add_parser("import", help="import a certificate and key a signatory brings (PKCS#12)")
        p.add_argument("username")
        p.add_argument("file")
        p.add_argument("--password-stdin", action="store_true", help="read the PKCS#12 password from stdin")
        p.add_argument("--as", dest="actor", required=True)
        p = sub.add_parser("revoke", help="revoke a signing certificate")
        p.add_argument("serial", help="the certificate's serial number (hex, as 'list' shows it)")
        p.add_argument("--reason", required=True)
        p.add_argument("--as", dest="actor", required=True)
        p = sub.add_parser("export", help="write the authority's certificate (PEM) or revocation list (DER)")
        p.add_argument("-o", "--output", required=True)
        p.add_argument("--crl", action="store_true", help="the revocation list instead of the certificate")
        sub.add_parser("list", help="list the authorities and certificates")

    def handle(self, *args, **opts):
        action = opts["action"]
        try:
            getattr(self, f"_{action}")(opts)
        except (ValidationError, RegistryError) as exc:
            raise refusal(exc) from None

    def _init(self, opts):
        ca = svc.office_ca_init(
            actor=actor_by_username(opts["actor"]),
            name=opts["name"],
            organisation=opts["organisation"],
            demo=opts["demo"],
            valid_years=opts["years"],
            replace=opts["replace"],
        )
        self.stdout.write(
            f"Created the office's certificate authority '{ca.name}', valid until {ca.not_after:%Y-%m-%d}.\n"
            f"SHA-256 fingerprint: {ca.fingerprint_sha256}\n"
            "Give clients its certificate: python manage.py office_ca export -o office-ca.pem"
        )

    def _licence(self, opts):
        p = svc.signatory_set_licence(
            actor=actor_by_username(opts["actor"]),
            username=opts["username"],
            licence_number=opts["licence"],
            jurisdiction=opts["jurisdiction"],
        )
        self.stdout.write(f"{p.user.username}: licence {p.licence_number} ({p.jurisdiction}) recorded.")

    def _issue(self, opts):
        cert = svc.certificate_issue(
            actor=actor_by_username(opts["actor"]), username=opts["username"], valid_days=opts["days"]
        )
        self.stdout.write(
            f"Issued a signing certificate to {cert.user.username}: serial {cert.serial_hex}, valid until "
            f"{cert.not_after:%Y-%m-%d}.\nSubject: {cert.subject}"
        )

    def _import(self, opts):
        try:
            data = Path(opts["file"]).read_bytes()
        except OSError as exc:
            raise CommandError(f"Cannot read {opts['file']}: {exc.strerror}.") from None
        password = ""
        if opts["password_stdin"]:
            password = (getattr(self, "stdin", None) or sys.stdin).readline().rstrip("\r\n")
        cert = svc.certificate_import(
            actor=actor_by_username(opts["actor"]), username=opts["username"], pkcs12_bytes=data, password=password
        )
        self.stdout.write(
            f"Imported the certificate of {cert.user.username}: serial {cert.serial_hex}, issued by "
            f"{cert.authority.name}, valid until {cert.not_after:%Y-%m-%d}."
        )

    def _revoke(self, opts):
        cert = svc.certificate_revoke(
            actor=actor_by_username(opts["actor"]), serial=opts["serial"], reason=opts["reason"]
        )
        self.stdout.write(
            f"Revoked certificate {cert.serial_hex} of {cert.user.username} on {cert.revoked_at:%Y-%m-%d %H:%M} UTC. "
            "Documents it signed before stay authentic; verification says the certificate has since been revoked."
        )

    def _export(self, opts):
        data = svc.office_crl_der() if opts["crl"] else svc.office_ca_pem().encode("ascii")
        try:
            Path(opts["output"]).write_bytes(data)
        except OSError as exc:
            raise CommandError(f"Cannot write {opts['output']}: {exc.strerror}.") from None
        what = "revocation list (DER)" if opts["crl"] else "certificate (PEM)"
        self.stdout.write(f"Wrote the office authority's {what} to {opts['output']}.")

    def _list(self, opts):
        for ca in CertificateAuthority.objects.order_by("-active", "-created_at"):
            flags = ", ".join(f for f, on in (("active", ca.active), ("office", ca.office), ("DEMO", ca.is_demo)) if on)
            self.stdout.write(f"Authority {ca.name} ({flags or 'trusted issuer'}), until {ca.not_after:%Y-%m-%d}")
        for c in SigningCertificate.objects.select_related("user").order_by("user__username", "-issued_at"):
            state = f"revoked {c.revoked_at:%Y-%m-%d}" if c.revoked_at else f"valid until {c.not_after:%Y-%m-%d}"
            self.stdout.write(f"  {c.user.username:<16} serial {c.serial_hex}  {state}{'  DEMO' if c.is_demo else ''}")
