"""Documents in the JSON API: prepare a sheet or a report, follow a build, check, sign, download; verify (public).

- ``POST /api/marks/<code>/sheet/`` → 201, the new draft (``document_build_sheet``).
- ``POST /api/jobs/<code>/report/`` (``residuals`` CSV text, ``style``, ``page_size``) → 202, the build
  (``document_request_report``); follow ``GET /api/documents/builds/<id>/``.
- ``GET /api/documents/`` (``state``, ``out_of_date``), ``GET /api/documents/<code>/``,
  ``GET /api/documents/<code>/pdf`` (the signed file, or the draft with its DRAFT band).
- ``POST /api/documents/<code>/check/`` (``note``), ``POST /api/documents/<code>/sign/`` (``password``).
- ``POST /api/verify/`` (multipart ``file``; no sign-in, rate-limited) → the same JSON as
  ``verify_document --json``.
"""

from __future__ import annotations

import time

from django.conf import settings
from django.core.exceptions import ValidationError
from django.http import HttpResponse
from drf_spectacular.utils import OpenApiResponse, extend_schema, inline_serializer
from rest_framework import serializers
from rest_framework import status as http_status
from rest_framework.pagination import LimitOffsetPagination
from rest_framework.parsers import FormParser, JSONParser, MultiPartParser
from rest_framework.permissions import AllowAny
from rest_framework.response import Response
from rest_framework.throttling import BaseThrottle
from rest_framework.views import APIView

from registry.api.marks import ERROR_RESPONSES, request_body
from registry.api.permissions import IsSignatory, IsViewer
from registry.errors import NotFound
from registry.models import Document, DocumentBuild, DocumentState
from registry.selectors import documents as doc_reads
from registry.services import documents as svc
from registry.services.verification import verify_pdf
from registry.web import ratelimit
from registry.web.document_views import build_status, document_pdf_bytes


class DocumentOut(serializers.Serializer):
    """A document as the API shows it (``document_json``)."""

    document_code = serializers.CharField()
    kind = serializers.CharField()
    subject = serializers.CharField()
    revision = serializers.IntegerField()
    state = serializers.CharField()
    out_of_date = serializers.BooleanField()
    out_of_date_reason = serializers.CharField(allow_null=True)
    sha256 = serializers.CharField()
    pages = serializers.IntegerField()
    size_bytes = serializers.IntegerField()
    prepared_by = serializers.CharField(allow_null=True)
    checked_by = serializers.CharField(allow_null=True)
    signed_by = serializers.CharField(allow_null=True)
    signed_at = serializers.DateTimeField(allow_null=True)
    verify_url = serializers.CharField()


BuildOut = inline_serializer(
    "DocumentBuild",
    {
        "id": serializers.IntegerField(),
        "state": serializers.CharField(),
        "progress": serializers.FloatField(),
        "step": serializers.CharField(),
        "error": serializers.CharField(),
        "document_code": serializers.CharField(allow_null=True),
    },
)


def document_json(doc: Document) -> dict:
    def who(u):
        return u.username if u is not None else None

    return {
        "document_code": doc.code,
        "kind": doc.kind,
        "subject": doc.mark.code if doc.mark_id else doc.job.code,
        "revision": doc.revision,
        "state": doc.state,
        "out_of_date": doc.out_of_date,
        "out_of_date_reason": doc.out_of_date_reason or None,
        "sha256": doc.sha256,
        "pages": doc.page_count,
        "size_bytes": doc.size_bytes,
        "prepared_by": who(doc.created_by),
        "checked_by": who(doc.checked_by),
        "signed_by": who(doc.signed_by),
        "signed_at": doc.signed_at.isoformat() if doc.signed_at else None,
        "verify_url": svc.verify_url(doc.code),
    }


def _build_json(build: DocumentBuild) -> dict:
    s = build_status(build)
    return {k: s[k] for k in ("id", "state", "progress", "step", "error", "document_code")}


class SheetBuildView(APIView):
    permission_classes = [IsViewer]

    @extend_schema(operation_id="marks_sheet_build", request=None, responses={201: DocumentOut, **ERROR_RESPONSES})
    def post(self, request, code: str):
        body = request_body(request) if request.data else {}
        doc = svc.document_build_sheet(actor=request.user, mark_code=code, page_size=body.get("page_size"))
        return Response(document_json(doc), status=http_status.HTTP_201_CREATED)


class ReportBuildView(APIView):
    permission_classes = [IsViewer]
    parser_classes = [JSONParser, FormParser, MultiPartParser]

    @extend_schema(operation_id="jobs_report_build", request=None, responses={202: BuildOut, **ERROR_RESPONSES})
    def post(self, request, code: str):
        data = request.data
        residuals = data.get("residuals") if hasattr(data, "get") else None
        if hasattr(residuals, "read"):
            residuals = residuals.read().decode("utf-8-sig", errors="replace")
        if residuals is not None and not isinstance(residuals, str):
            raise ValidationError({"residuals": ValidationError("Send the residual CSV as text.", code="invalid_type")})
        build = svc.document_request_report(
            actor=request.user,
            job_code=code,
            residuals_csv=residuals or None,
            style=data.get("style") if hasattr(data, "get") else None,
            page_size=data.get("page_size") if hasattr(data, "get") else None,
        )
        build.refresh_from_db()
        return Response(_build_json(build), status=http_status.HTTP_202_ACCEPTED)


class BuildDetailView(APIView):
    permission_classes = [IsViewer]

    @extend_schema(operation_id="documents_build_status", responses={200: BuildOut, **ERROR_RESPONSES})
    def get(self, request, build_id: int):
        build = doc_reads.build_by_id(build_id)
        if build is None:
            raise NotFound(f"No build {build_id}.")
        return Response(_build_json(build))


class DocumentListView(APIView):
    permission_classes = [IsViewer]
    pagination_class = LimitOffsetPagination

    @extend_schema(operation_id="documents_list", responses={200: DocumentOut(many=True), **ERROR_RESPONSES})
    def get(self, request):
        state = request.query_params.get("state", "").strip()
        if state:
            if state not in DocumentState.values:
                raise ValidationError(
                    {
                        "state": ValidationError(
                            "Unknown state %(value)r.", code="invalid_choice", params={"value": state}
                        )
                    }
                )
        ood = request.query_params.get("out_of_date", "").strip().lower()
        out_of_date = True if ood in ("1", "true", "yes") else False if ood in ("0", "false", "no") else None
        qs = doc_reads.documents_filtered(state=state or None, out_of_date=out_of_date)
        paginator = self.pagination_class()
        page = paginator.paginate_queryset(qs, request, view=self)
        return paginator.get_paginated_response([document_json(d) for d in page])


class DocumentDetailView(APIView):
    permission_classes = [IsViewer]

    @extend_schema(operation_id="documents_read", responses={200: DocumentOut, **ERROR_RESPONSES})
    def get(self, request, code: str):
        return Response(document_json(svc.access_document_by_code(request.user, code)))


class DocumentPdfView(APIView):
    permission_classes = [IsViewer]

    @extend_schema(
        operation_id="documents_pdf", responses={(200, "application/pdf"): OpenApiResponse(description="PDF")}
    )
    def get(self, request, code: str):
        doc = svc.access_document_by_code(request.user, code)
        response = HttpResponse(document_pdf_bytes(doc), content_type="application/pdf")
        response["Content-Disposition"] = f'attachment; filename="{doc.code}-r{doc.revision}.pdf"'
        return response


class DocumentCheckView(APIView):
    permission_classes = [IsViewer]

    @extend_schema(operation_id="documents_check", request=None, responses={200: DocumentOut, **ERROR_RESPONSES})
    def post(self, request, code: str):
        body = request_body(request) if request.data else {}
        doc = svc.document_check(actor=request.user, code=code, note=body.get("note", ""))
        return Response(document_json(doc))


class DocumentSignView(APIView):
    permission_classes = [IsSignatory]

    @extend_schema(operation_id="documents_sign", request=None, responses={200: DocumentOut, **ERROR_RESPONSES})
    def post(self, request, code: str):
        body = request_body(request) if request.data else {}
        doc = svc.document_sign(actor=request.user, code=code, password=body.get("password", ""))
        return Response(document_json(doc))


class VerifyThrottle(BaseThrottle):
    """The public verification limit (``REGISTRY_VERIFY_RATE_PER_MIN`` per client address and minute),
    counted in the database together with the verification page's requests, so that it holds across
    every worker and application server (``registry.web.ratelimit``)."""

    def allow_request(self, request, view):
        return ratelimit.allow(request, "verify", int(settings.REGISTRY.get("VERIFY_RATE_PER_MIN", 30)))

    def wait(self):
        return 60 - time.time() % 60  # the count starts again with the next clock minute


class VerifyView(APIView):
    """Public: is this PDF an authentic, current document of the registry?"""

    permission_classes = [AllowAny]
    authentication_classes: list = []
    throttle_classes = [VerifyThrottle]
    parser_classes = [MultiPartParser]

    @extend_schema(operation_id="verify", request=None, responses={200: OpenApiResponse(description="verification")})
    def post(self, request):
        upload = request.FILES.get("file")
        if upload is None:
            raise ValidationError({"file": ValidationError("Send the PDF as the 'file' field.", code="required")})
        if upload.size > 50 * 1024 * 1024:
            raise ValidationError({"file": ValidationError("The file is larger than 50 MB.", code="too_large")})
        return Response(verify_pdf(upload.read()).as_json())
