"""Document pages: list, one document (download, check, sign), builds with progress; the public verification page.

Views parse input and render; every decision is a service's (``registry.services.documents``,
``registry.services.verification``). The verification page and the authority's certificate and
revocation list are public (no sign-in): that is where a document's QR code leads.
"""

from __future__ import annotations

import io

from django.conf import settings
from django.contrib import messages
from django.core.exceptions import ValidationError
from django.http import Http404, HttpRequest, HttpResponse, JsonResponse
from django.shortcuts import redirect, render
from django.urls import reverse
from django.views.decorators.http import require_GET, require_http_methods, require_POST

from registry.errors import Conflict, NotFound, PermissionDeniedError, RegistryError
from registry.models import BuildState, Document, DocumentBuild, DocumentState
from registry.roles import Ability, has_ability
from registry.selectors import documents as doc_reads
from registry.services import documents as svc
from registry.services.certificates import office_ca_pem, office_crl_der, usable_certificate
from registry.services.verification import public_summary, verify_pdf
from registry.web import ratelimit
from registry.web.views import ability_required

MAX_UPLOAD_BYTES = 50 * 1024 * 1024


def _error_text(exc: Exception) -> str:
    if isinstance(exc, ValidationError):
        return " ".join(exc.messages)
    if isinstance(exc, RegistryError):
        return exc.message
    return str(exc)


# ---------------------------------------------------------------------------------------------------
# Signed-in pages
# ---------------------------------------------------------------------------------------------------


@ability_required(Ability.VIEW)
def document_list(request: HttpRequest) -> HttpResponse:
    lists = doc_reads.document_lists()
    context = {
        "to_reissue": lists.to_reissue,
        "open_docs": lists.open_docs,
        "recent": lists.recent,
        "builds": lists.builds,
        "can_prepare": svc.can_prepare(request.user),
        "is_signatory": has_ability(request.user, Ability.SIGN),
    }
    return render(request, "registry/document_list.html", context)


@ability_required(Ability.VIEW)
def document_page(request: HttpRequest, code: str) -> HttpResponse:
    doc = svc.access_document_by_code(request.user, code)
    user = request.user
    context = {
        "doc": doc,
        "revisions": doc_reads.document_revisions(doc),
        "verify_url": svc.verify_url(doc.code),
        "can_check": doc.state == DocumentState.DRAFT and svc.can_check(user) and doc.created_by_id != user.pk,
        "is_preparer": doc.created_by_id == user.pk,
        "can_sign": doc.state == DocumentState.CHECKED and has_ability(user, Ability.SIGN),
        "has_licence": doc_reads.has_licence(user),
        "certificate": usable_certificate(user) if has_ability(user, Ability.SIGN) else None,
        "can_prepare": svc.can_prepare(user),
    }
    return render(request, "registry/document_detail.html", context)


def _draft_overlay(content: bytes) -> bytes:
    """The unsigned PDF with "DRAFT — NOT SIGNED" across each page (downloads only; the stored bytes stay clean)."""
    from pypdf import PdfReader, PdfWriter
    from reportlab.pdfgen import canvas

    from registry.reports.layout import register_fonts

    register_fonts()
    writer = PdfWriter(clone_from=io.BytesIO(content))
    for page in writer.pages:
        w, h = float(page.mediabox.width), float(page.mediabox.height)
        buf = io.BytesIO()
        c = canvas.Canvas(buf, pagesize=(w, h))
        c.setFillColorRGB(0.55, 0.55, 0.55, alpha=0.35)
        c.setFont("Doc-Bold", 54)
        c.translate(w / 2, h / 2)
        c.rotate(52)
        c.drawCentredString(0, 10, "DRAFT — NOT SIGNED")
        c.setFont("Doc-Bold", 20)
        c.drawCentredString(0, -26, "not for use: no licensed surveyor has signed it")
        c.save()
        page.merge_page(PdfReader(io.BytesIO(buf.getvalue())).pages[0])
    out = io.BytesIO()
    writer.write(out)
    return out.getvalue()


def document_pdf_bytes(doc: Document) -> bytes:
    """What a download delivers: the signed file as issued, or the draft with its DRAFT band."""
    content = bytes(doc.content)
    return content if doc.issued else _draft_overlay(content)


@ability_required(Ability.VIEW)
def document_download(request: HttpRequest, code: str) -> HttpResponse:
    doc = svc.access_document_by_code(request.user, code)
    data = document_pdf_bytes(doc)
    name = f"{doc.code}-r{doc.revision}{'' if doc.issued else '-DRAFT'}.pdf"
    response = HttpResponse(data, content_type="application/pdf")
    response["Content-Disposition"] = f'attachment; filename="{name}"'
    response["Cache-Control"] = "private"
    return response


@ability_required(Ability.VIEW)
@require_POST
def document_check_view(request: HttpRequest, code: str) -> HttpResponse:
    try:
        doc = svc.document_check(actor=request.user, code=code, note=request.POST.get("note", ""))
    except (ValidationError, Conflict) as exc:
        messages.error(request, _error_text(exc))
    else:
        messages.success(request, f"Document {doc.code} is checked; a signatory can sign it now.")
    return redirect("web:document-detail", code=code.upper())


@ability_required(Ability.SIGN)
@require_POST
def document_sign_view(request: HttpRequest, code: str) -> HttpResponse:
    try:
        doc = svc.document_sign(actor=request.user, code=code, password=request.POST.get("password", ""))
    except (ValidationError, Conflict) as exc:
        messages.error(request, _error_text(exc))
    except PermissionDeniedError as exc:
        if exc.code == "wrong_password":
            messages.error(request, exc.message)
        else:
            raise
    else:
        messages.success(request, f"Document {doc.code} (revision {doc.revision}) is signed and issued.")
    return redirect("web:document-detail", code=code.upper())


@ability_required(Ability.VIEW)
@require_POST
def sheet_build_view(request: HttpRequest, code: str) -> HttpResponse:
    try:
        doc = svc.document_build_sheet(actor=request.user, mark_code=code, page_size=request.POST.get("page_size"))
    except (ValidationError, Conflict) as exc:
        messages.error(request, _error_text(exc))
        return redirect("web:mark-detail", code=code)
    messages.success(request, f"Sheet prepared: document {doc.code}, revision {doc.revision} (draft).")
    return redirect("web:document-detail", code=doc.code)


@ability_required(Ability.VIEW)
@require_http_methods(["GET", "POST"])
def report_build_view(request: HttpRequest, code: str) -> HttpResponse:
    from registry.services.access import access_job_by_code

    job = access_job_by_code(request.user, code)
    error = ""
    if request.method == "POST":
        upload = request.FILES.get("residuals")
        residuals = None
        if upload is not None:
            if upload.size > 2_000_000:
                error = "The residual file is larger than 2 MB."
            else:
                try:
                    residuals = upload.read().decode("utf-8-sig")
                except UnicodeDecodeError:
                    error = "The residual file is not UTF-8 text."
        if not error:
            try:
                build = svc.document_request_report(
                    actor=request.user,
                    job_code=job.code,
                    residuals_csv=residuals,
                    style=request.POST.get("style") or None,
                    page_size=request.POST.get("page_size") or None,
                )
            except (ValidationError, Conflict) as exc:
                error = _error_text(exc)
            else:
                return redirect("web:document-build", build_id=build.pk)
    context = {
        "job": job,
        "error": error,
        "default_style": settings.REGISTRY.get("REPORT_STATEMENT_STYLE", "nssda"),
        "default_size": settings.REGISTRY.get("PAGE_SIZE", "A4"),
        "can_prepare": svc.can_prepare(request.user),
    }
    return render(request, "registry/report_form.html", context, status=400 if error else 200)


def _build_or_404(user, build_id: int) -> DocumentBuild:
    build = doc_reads.build_by_id(build_id)
    if build is None or not has_ability(user, Ability.VIEW):
        raise Http404("No such build.")
    return build


def build_status(build: DocumentBuild) -> dict:
    """The JSON the progress bar polls (also in the API)."""
    return {
        "id": build.pk,
        "state": build.state,
        "state_words": build.get_state_display(),
        "progress": round(build.progress, 3),
        "percent": int(round(build.progress * 100)),
        "step": build.step,
        "error": build.error,
        "finished": build.state in (BuildState.DONE, BuildState.FAILED),
        "document_code": build.document.code if build.document_id else None,
        "document_url": reverse("web:document-detail", args=[build.document.code]) if build.document_id else None,
    }


@ability_required(Ability.VIEW)
def build_page(request: HttpRequest, build_id: int) -> HttpResponse:
    build = _build_or_404(request.user, build_id)
    if build.state == BuildState.DONE and build.document_id and request.GET.get("stay") != "1":
        return redirect("web:document-detail", code=build.document.code)
    return render(
        request,
        "registry/document_build.html",
        {"build": build, "status": build_status(build), "can_prepare": svc.can_prepare(request.user)},
    )


@ability_required(Ability.VIEW)
@require_GET
def build_status_json(request: HttpRequest, build_id: int) -> JsonResponse:
    build = _build_or_404(request.user, build_id)
    response = JsonResponse(build_status(build))
    response["Cache-Control"] = "no-store"
    return response


@ability_required(Ability.VIEW)
@require_POST
def build_retry_view(request: HttpRequest, build_id: int) -> HttpResponse:
    try:
        svc.document_retry_build(actor=request.user, build_id=build_id)
    except NotFound:
        raise Http404("No such build.") from None
    except (ValidationError, Conflict) as exc:
        messages.error(request, _error_text(exc))
    return redirect("web:document-build", build_id=build_id)


# ---------------------------------------------------------------------------------------------------
# Public: verification, the authority's certificate and revocation list
# ---------------------------------------------------------------------------------------------------


def _rate_limited(request) -> HttpResponse | None:
    per_min = int(settings.REGISTRY.get("VERIFY_RATE_PER_MIN", 30))
    if ratelimit.allow(request, "verify", per_min):
        return None
    response = render(request, "registry/verify.html", {"rate_limited": True}, status=429)
    response["Retry-After"] = "60"
    return response


def _read_upload(request) -> tuple[bytes | None, str]:
    upload = request.FILES.get("file")
    if upload is None:
        return None, "Choose the PDF file to verify."
    if upload.size > MAX_UPLOAD_BYTES:
        return None, "The file is larger than 50 MB; it is not a document of this registry."
    return upload.read(), ""


@require_http_methods(["GET", "POST"])
def verify_page(request: HttpRequest, code: str | None = None) -> HttpResponse:
    """``/verify/`` and ``/verify/<code>/``: a document's public summary, and a file upload to check."""
    limited = _rate_limited(request)
    if limited is not None:
        return limited
    summary = None
    status = 200
    if code is not None:
        try:
            summary = public_summary(code)
        except NotFound:
            status = 404
    result, error = None, ""
    if request.method == "POST":
        data, error = _read_upload(request)
        if data is not None:
            result = verify_pdf(data)
        else:
            status = 400
    context = {
        "code": (code or "").upper(),
        "summary": summary,
        "result": result,
        "error": error,
        "mismatch": bool(
            result and summary and result.document is not None and result.document.code != summary.document.code
        ),
        "office": settings.REGISTRY.get("OFFICE_NAME", ""),
    }
    return render(request, "registry/verify.html", context, status=status)


@require_GET
def ca_certificate(request: HttpRequest) -> HttpResponse:
    try:
        pem = office_ca_pem()
    except NotFound:
        raise Http404("The office has no certificate authority.") from None
    response = HttpResponse(pem, content_type="application/x-pem-file")
    response["Content-Disposition"] = 'attachment; filename="office-ca.pem"'
    return response


@require_GET
def ca_crl(request: HttpRequest) -> HttpResponse:
    per_min = int(settings.REGISTRY.get("CRL_RATE_PER_MIN", 120))
    limited = None if ratelimit.allow(request, "crl", per_min) else HttpResponse("Too many requests.", status=429)
    if limited is not None:
        return limited
    try:
        der = office_crl_der()
    except NotFound:
        raise Http404("The office has no certificate authority.") from None
    response = HttpResponse(der, content_type="application/pkix-crl")
    response["Content-Disposition"] = 'attachment; filename="office-ca.crl"'
    response["Cache-Control"] = "public, max-age=300"
    return response
