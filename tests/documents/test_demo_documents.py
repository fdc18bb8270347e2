"""load_demo: a DEMO authority and certificate for the invented signatory; --reset with signed documents."""

from __future__ import annotations

import io

import pytest
from django.core.management import call_command
from django.db import DatabaseError, connection, transaction

from registry.models import CertificateAuthority, Document, SignatoryProfile, SigningCertificate

pytestmark = [pytest.mark.slow, pytest.mark.django_db]


def test_demo_signs_and_resets(settings):
    from django.contrib.auth import get_user_model

    from registry.services.documents import document_build_sheet, document_check, document_sign

    call_command("load_demo", stdout=(out := io.StringIO()))
    assert "DEMO certificate" in out.getvalue()
    ca = CertificateAuthority.objects.get(active=True)
    assert ca.is_demo and ca.name.startswith("DEMO")
    User = get_user_model()
    signatory = User.objects.get(username="demo_signatory")
    assert SignatoryProfile.objects.get(user=signatory).licence_number == "DEMO-0412"
    cert = SigningCertificate.objects.get(user=signatory)
    assert cert.is_demo and "DEMO" in cert.subject

    doc = document_build_sheet(actor=User.objects.get(username="demo_technician"), mark_code="ASH-024")
    document_check(actor=User.objects.get(username="demo_manager"), code=doc.code)
    signed = document_sign(actor=signatory, code=doc.code, password="demo-only-signatory-H9")
    assert signed.state == "signed"

    call_command("load_demo", "--reset", stdout=(out := io.StringIO()))
    assert "1 documents" in out.getvalue()
    assert not Document.objects.filter(code=doc.code).exists()
    assert SigningCertificate.objects.filter(user__username="demo_signatory").count() == 1  # made again
    # the guard is back: a signed document cannot be deleted behind the ORM's back
    fresh = document_build_sheet(actor=User.objects.get(username="demo_technician"), mark_code="ASH-024")
    document_check(actor=User.objects.get(username="demo_manager"), code=fresh.code)
    document_sign(actor=User.objects.get(username="demo_signatory"), code=fresh.code, password="demo-only-signatory-H9")
    with pytest.raises(DatabaseError), transaction.atomic(), connection.cursor() as cur:
        cur.execute("DELETE FROM registry_document WHERE code = %s", [fresh.code])
