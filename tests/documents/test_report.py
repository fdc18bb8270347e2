"""The control report: built in the background (tasks run at once in tests), read back, signed; builds that
fail show their error and can be started again."""

from __future__ import annotations

import datetime as dt
import io
import math
import re

import pytest
from django.urls import reverse
from pypdf import PdfReader

from registry.models import BuildState, Document, DocumentBuild, DocumentKind, Finding, Job, Visit
from registry.services.documents import (
    document_build_report,
    document_check,
    document_request_report,
    document_retry_build,
    document_sign,
)
from tests.documents.conftest import POSITION, SIGNATORY_PASSWORD

pytestmark = pytest.mark.django_db

#: Residuals with RMSE_x = RMSE_y = 0.010 m and RMSE_z = 0.020 m (invented).
RESIDUALS = "point_id,de_m,dn_m,du_m\n" + "\n".join(
    f"CP{i:02d},{0.01 * sx:.3f},{0.01 * sy:.3f},{0.02 * sz:.3f}"
    for i, (sx, sy, sz) in enumerate([(1, 1, 1), (-1, 1, -1), (1, -1, 1), (-1, -1, -1)], start=1)
)


@pytest.fixture
def job(mark, manager):
    from registry.models import Mark

    Visit.objects.create(mark=Mark.objects.get(code="CR-101"), visited_on=dt.date(2025, 6, 1), finding=Finding.INTACT)
    return Job.objects.create(
        code="J-1",
        name="Invented stake-out",
        client="Invented client",
        site_geojson={"type": "Point", "coordinates": [POSITION["lon_deg"] + 0.002, POSITION["lat_deg"] + 0.001]},
        frame_epsg=6319,
        epoch_yr=2010.0,
        tol_h_mm=30.0,
        tol_v_mm=50.0,
        created_by=manager,
    )


def _text(doc: Document) -> str:
    return re.sub(r"\s+", " ", " ".join(p.extract_text() for p in PdfReader(io.BytesIO(bytes(doc.content))).pages))


def test_report_content_and_nssda_statement(job, technician):
    doc = document_build_report(actor=technician, job_code=job.code, residuals_csv=RESIDUALS, style="nssda")
    assert doc.kind == DocumentKind.REPORT and doc.state == "draft" and doc.page_count >= 4
    pages = [re.sub(r"\s+", " ", p.extract_text()) for p in PdfReader(io.BytesIO(bytes(doc.content))).pages]
    for i, page in enumerate(pages, start=1):
        assert f"page {i} of {len(pages)}" in page and f"Document {doc.code} · revision 1" in page
    text = " ".join(pages)
    for heading in (
        "Control report",
        "1. Purpose and scope",
        "2. Deliverable",
        "NAD83(2011) (EPSG:6319), plate-fixed",
        "3. Control used",
        "4. Base screening",
        "Coverage map",
        "5. Check-point results",
        "6. Methods and equipment",
        "7. Limitations",
        "Signature of the licensed surveyor",
        "Appendix: station description sheets of the marks used",
        "A.1 Mark CR-100",
    ):
        assert heading in text, heading
    # NSSDA (FGDC-STD-007.3-1998 §3.2.1, RMSE_x = RMSE_y): Accuracy_r = 1.7308·RMSE_r; Accuracy_z = 1.9600·RMSE_z
    rmse_r = math.hypot(0.01, 0.01)
    assert f"Tested {1.7308 * rmse_r:.3f} meters horizontal accuracy at 95% confidence level" in text
    assert f"Tested {1.96 * 0.02:.3f} meters vertical accuracy at 95% confidence level" in text
    assert "Only 4 check points: NSSDA asks for at least 20." in text
    assert "CR-100 (base)" in text  # the map's label, drawn from the job page's SVG
    assert set(doc.covered.values_list("mark__code", flat=True)) >= {"CR-100"}


def test_asprs_statement_has_no_95_percent(job, technician):
    doc = document_build_report(actor=technician, job_code=job.code, residuals_csv=RESIDUALS, style="asprs2023")
    section = _text(doc).split("5. Check-point results", 1)[1].split("6. Methods and equipment", 1)[0]
    # ASPRS Edition 2 (2023) states RMSE only: RMSE_H = √(RMSE_x² + RMSE_y²) = 0.014 m
    assert f"Horizontal: RMSE_H = {math.hypot(0.01, 0.01):.3f} m" in section
    assert "Vertical: RMSE_V = 0.020 m" in section
    assert "95%" not in section.split("Largest")[0]


def test_background_build_through_the_page_with_progress(client, job, technician):
    client.force_login(technician)
    upload = io.BytesIO(RESIDUALS.encode())
    upload.name = "residuals.csv"
    response = client.post(reverse("web:report-build", args=[job.code]), {"residuals": upload, "style": "nssda"})
    build = DocumentBuild.objects.get(job=job)
    assert response.status_code == 302 and response["Location"] == reverse("web:document-build", args=[build.pk])
    status = client.get(reverse("web:document-build-status", args=[build.pk])).json()
    assert status["state"] == "done" and status["percent"] == 100 and status["document_code"]
    # the page (no JavaScript needed) sends the finished build on to its document
    page = client.get(reverse("web:document-build", args=[build.pk]))
    assert page.status_code == 302 and status["document_code"] in page["Location"]
    stay = client.get(reverse("web:document-build", args=[build.pk]) + "?stay=1").content.decode()
    assert 'src="/static/registry/build_progress.js"' in stay and "<script>" not in stay  # no inline script


def test_failed_build_shows_its_error_and_can_be_retried(job, technician):
    good_site = job.site_geojson
    Job.objects.filter(pk=job.pk).update(site_geojson={"type": "Point", "coordinates": [500, 500]})
    build = document_request_report(actor=technician, job_code=job.code)
    build.refresh_from_db()
    assert build.state == BuildState.FAILED and build.error and build.document_id is None
    assert not Document.objects.filter(job=job).exists()  # nothing half-written
    Job.objects.filter(pk=job.pk).update(site_geojson=good_site)
    retried = document_retry_build(actor=technician, build_id=build.pk)
    retried.refresh_from_db()
    assert retried.state == BuildState.DONE and retried.attempts == 2 and retried.document is not None


def test_bad_residuals_are_refused_before_anything_starts(job, technician):
    from django.core.exceptions import ValidationError

    with pytest.raises(ValidationError) as exc:
        document_request_report(actor=technician, job_code=job.code, residuals_csv="point_id,de_m\nA,1\n")
    assert "residuals" in exc.value.message_dict
    assert not DocumentBuild.objects.exists()


def test_signed_report_goes_out_of_date_when_a_base_changes(job, office, technician, manager):
    from registry.services.marks import mark_update

    doc = document_build_report(actor=technician, job_code=job.code)
    document_check(actor=manager, code=doc.code)
    signed = document_sign(actor=office["signatory"], code=doc.code, password=SIGNATORY_PASSWORD)
    base = signed.covered.first().mark
    mark_update(actor=manager, code=base.code, expected_version=base.version, changes={"sky_view": "obstructed"})
    assert Document.objects.get(pk=signed.pk).out_of_date


def test_api_report_build(api_client_for, job, technician, viewer):
    response = api_client_for(technician).post(f"/api/jobs/{job.code}/report/", {"residuals": RESIDUALS}, format="json")
    assert response.status_code == 202
    body = response.json()
    assert body["state"] == "done" and body["document_code"]
    status = api_client_for(viewer).get(f"/api/documents/builds/{body['id']}/").json()
    assert status["progress"] == 1.0
    assert api_client_for(viewer).post(f"/api/jobs/{job.code}/report/", {}, format="json").status_code == 403
