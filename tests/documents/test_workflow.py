"""Workflow rules and permissions per role: prepare, check, sign; revisions; the out-of-date hook."""

from __future__ import annotations

import pytest

from registry.errors import Conflict, NotFound, PermissionDeniedError
from registry.models import AuditEvent, Document, DocumentState, Position, PositionState
from registry.services.documents import (
    document_build_sheet,
    document_check,
    document_sign,
    documents_mark_changed,
)
from registry.services.marks import mark_set_status
from registry.services.positions import position_propose, position_publish, position_withdraw
from tests.documents.conftest import POSITION, SIGNATORY_PASSWORD

pytestmark = pytest.mark.django_db


@pytest.mark.parametrize("role", ["technician", "manager", "signatory"])
def test_roles_that_prepare(role, mark, request):
    user = request.getfixturevalue(role)
    doc = document_build_sheet(actor=user, mark_code=mark.code)
    assert doc.state == DocumentState.DRAFT and doc.created_by == user
    assert AuditEvent.objects.filter(action="document_prepare", object_id=str(doc.pk)).count() == 1


@pytest.mark.parametrize("role", ["viewer", "admin_user_role"])
def test_roles_that_do_not_prepare(role, mark, request):
    user = request.getfixturevalue(role)
    with pytest.raises(PermissionDeniedError):
        document_build_sheet(actor=user, mark_code=mark.code)
    assert not Document.objects.exists()


def test_no_role_sees_not_found(mark, make_user):
    nobody = make_user("nobody")
    with pytest.raises(PermissionDeniedError):
        document_build_sheet(actor=nobody, mark_code=mark.code)


def test_unknown_mark(technician, db):
    with pytest.raises(NotFound):
        document_build_sheet(actor=technician, mark_code="NO-SUCH")


def test_checker_is_not_the_preparer(mark, manager):
    doc = document_build_sheet(actor=manager, mark_code=mark.code)
    with pytest.raises(Conflict) as exc:
        document_check(actor=manager, code=doc.code)
    assert exc.value.code == "checker_is_preparer"
    doc.refresh_from_db()
    assert doc.state == DocumentState.DRAFT


@pytest.mark.parametrize(
    "role,allowed", [("technician", False), ("viewer", False), ("manager", True), ("signatory", True)]
)
def test_who_checks(role, allowed, mark, request, make_user):
    preparer = make_user("prep", "technician")
    doc = document_build_sheet(actor=preparer, mark_code=mark.code)
    user = request.getfixturevalue(role)
    if allowed:
        checked = document_check(actor=user, code=doc.code, note="compared with the registry")
        assert checked.state == DocumentState.CHECKED and checked.checked_sha256 == doc.sha256
    else:
        with pytest.raises(PermissionDeniedError):
            document_check(actor=user, code=doc.code)


def test_only_a_signatory_signs(mark, office, technician, manager):
    doc = document_build_sheet(actor=technician, mark_code=mark.code)
    document_check(actor=office["signatory"], code=doc.code)  # a signatory may check too
    with pytest.raises(PermissionDeniedError):
        document_sign(actor=manager, code=doc.code, password="pw-mona-123!")
    signed = document_sign(actor=office["signatory"], code=doc.code, password=SIGNATORY_PASSWORD)
    assert signed.state == DocumentState.SIGNED and signed.signed_by == office["signatory"]
    assert signed.pdf.name.endswith(f"{signed.code}-r1.pdf")
    assert signed.pdf.read() == bytes(signed.content)


def test_a_draft_cannot_be_signed(mark, office, technician):
    doc = document_build_sheet(actor=technician, mark_code=mark.code)
    with pytest.raises(Conflict) as exc:
        document_sign(actor=office["signatory"], code=doc.code, password=SIGNATORY_PASSWORD)
    assert exc.value.code == "invalid_state"


def test_signatory_without_licence(mark, technician, manager, make_user):
    from registry.services.certificates import office_ca_init

    admin = make_user("adm2", "admin")
    office_ca_init(actor=admin, name="Office authority")
    bare = make_user("bare", "signatory")
    doc = document_build_sheet(actor=technician, mark_code=mark.code)
    document_check(actor=manager, code=doc.code)
    with pytest.raises(Conflict) as exc:
        document_sign(actor=bare, code=doc.code, password="pw-bare-123!")
    assert exc.value.code == "no_licence"


def test_a_new_build_replaces_the_open_draft_and_keeps_the_revision(mark, technician, manager):
    first = document_build_sheet(actor=technician, mark_code=mark.code)
    document_check(actor=manager, code=first.code)
    second = document_build_sheet(actor=technician, mark_code=mark.code)
    assert second.revision == first.revision == 1
    assert not Document.objects.filter(pk=first.pk).exists()
    assert AuditEvent.objects.filter(action="document_discard", object_id=str(first.pk)).exists()


def test_revision_two_supersedes_on_signing_only(signed_sheet, office, technician, manager):
    rev2 = document_build_sheet(actor=technician, mark_code=signed_sheet.mark.code)
    assert Document.objects.get(pk=signed_sheet.pk).state == DocumentState.SIGNED  # not before rev 2 is signed
    document_check(actor=manager, code=rev2.code)
    document_sign(actor=office["signatory"], code=rev2.code, password=SIGNATORY_PASSWORD)
    assert Document.objects.get(pk=signed_sheet.pk).state == DocumentState.SUPERSEDED
    assert Document.objects.filter(mark=signed_sheet.mark, state=DocumentState.SIGNED).count() == 1


def test_status_change_and_position_changes_make_signed_sheets_out_of_date(signed_sheet, manager, technician):
    mark = signed_sheet.mark
    mark_set_status(actor=manager, code=mark.code, status="retired", expected_version=mark.version, note="road works")
    doc = Document.objects.get(pk=signed_sheet.pk)
    assert doc.out_of_date and "retired" in doc.out_of_date_reason
    # flagged once; a second change adds no second flag
    assert documents_mark_changed(mark, "again") == 0


def _in_itrf2014(position: dict, epoch_yr: float) -> dict:
    """The NAD83(2011) position in ITRF2014 at ``epoch_yr`` (pyproj, the epoch as 4th coordinate), so that the
    movement check finds no movement and the mark does not become suspect."""
    from pyproj import Transformer

    lon, lat, h, _ = Transformer.from_crs("EPSG:6319", "EPSG:7912", always_xy=True).transform(
        position["lon_deg"], position["lat_deg"], position["h_m"], epoch_yr
    )
    return {"frame_epsg": 7912, "epoch_yr": epoch_yr, "lat_deg": lat, "lon_deg": lon, "h_m": h}


def test_publish_and_withdraw_flag_the_sheet(signed_sheet, manager, technician):
    mark = signed_sheet.mark
    proposed = position_propose(
        actor=technician,
        mark_code=mark.code,
        data=POSITION | _in_itrf2014(POSITION, 2024.5) | {"source": "campaign"},
    )
    position_publish(actor=manager, position_id=proposed.pk)
    doc = Document.objects.get(pk=signed_sheet.pk)
    assert doc.out_of_date and "EPSG:7912" in doc.out_of_date_reason


def test_withdraw_flags_the_sheet(signed_sheet, manager):
    published = Position.objects.get(mark=signed_sheet.mark, state=PositionState.PUBLISHED)
    position_withdraw(actor=manager, position_id=published.pk, note="wrong antenna height")
    assert Document.objects.get(pk=signed_sheet.pk).out_of_date


def test_drafts_are_not_flagged(mark, technician, manager):
    doc = document_build_sheet(actor=technician, mark_code=mark.code)
    assert documents_mark_changed(mark, "x") == 0
    assert not Document.objects.get(pk=doc.pk).out_of_date


def test_a_disturbed_visit_makes_the_mark_suspect_and_the_sheet_out_of_date(signed_sheet, technician):
    import datetime as dt

    from registry.services.fieldwork import visit_record

    visit_record(
        actor=technician,
        mark_code=signed_sheet.mark.code,
        data={"visited_on": (dt.date.today()).isoformat(), "finding": "disturbed", "notes": "disk loose"},
    )
    doc = Document.objects.get(pk=signed_sheet.pk)
    assert doc.out_of_date and "suspect" in doc.out_of_date_reason
