"""API views for fieldwork: a mark's visits, occupations and attachments.

``GET/POST /api/marks/<code>/visits/``, ``GET/POST /api/marks/<code>/occupations/``,
``GET/POST /api/marks/<code>/attachments/`` (POST as multipart: ``file``, ``kind``, optional
``caption``, ``occupation_id``, ``visit_id``). Reading needs the viewer ability, writing the
record-fieldwork ability (technician, manager); the services check again, validate, write
and audit. Errors come in the one shape of :mod:`registry.api.errors`.

Rounding: antenna heights to 3 decimals of a metre (mm). Attachments carry their SHA-256
and a download URL (served by the web server in production, by Django under ``DEBUG``).
"""

from __future__ import annotations

from drf_spectacular.utils import OpenApiResponse, extend_schema
from rest_framework import serializers
from rest_framework import status as http_status
from rest_framework.parsers import FormParser, MultiPartParser
from rest_framework.response import Response
from rest_framework.views import APIView

from registry.api.body import request_body, request_fields
from registry.api.marks import ERROR_RESPONSES
from registry.api.pagination import RegistryPagination
from registry.api.parsers import SafeJSONParser
from registry.api.positions import ReadViewerWriteRecorder
from registry.api.serializers import ErrorSerializer, RoundedFloatField
from registry.models import (
    AntennaHeightKind,
    Attachment,
    AttachmentKind,
    Finding,
    Occupation,
    OccupationMethod,
    Visit,
)
from registry.selectors.fieldwork import fieldwork_row, mark_fieldwork
from registry.services.access import access_mark_by_code
from registry.services.fieldwork import attachment_add, occupation_record, visit_record

# ----------------------------------------------------------------------------- serializers


class AttachmentSerializer(serializers.ModelSerializer):
    mark = serializers.CharField(source="mark.code", read_only=True)
    uploaded_by = serializers.CharField(source="uploaded_by.username", read_only=True, allow_null=True, default=None)
    download_url = serializers.SerializerMethodField(help_text="Where to download the file (absolute URL).")

    class Meta:
        model = Attachment
        fields = (
            "id",
            "mark",
            "kind",
            "original_name",
            "size_bytes",
            "sha256",
            "caption",
            "occupation",
            "visit",
            "uploaded_by",
            "uploaded_at",
            "download_url",
        )
        read_only_fields = fields
        extra_kwargs = {"kind": {"help_text": "photo, rinex, sketch or other."}}

    def get_download_url(self, obj: Attachment) -> str:
        request = self.context.get("request")
        url = obj.file.url
        return request.build_absolute_uri(url) if request is not None else url


class VisitSerializer(serializers.ModelSerializer):
    mark = serializers.CharField(source="mark.code", read_only=True)
    created_by = serializers.CharField(source="created_by.username", read_only=True, allow_null=True, default=None)
    attachments = serializers.PrimaryKeyRelatedField(many=True, read_only=True)

    class Meta:
        model = Visit
        fields = (
            "id",
            "mark",
            "visited_on",
            "finding",
            "visitor",
            "notes",
            "created_by",
            "created_at",
            "attachments",
        )
        read_only_fields = fields


class OccupationSerializer(serializers.ModelSerializer):
    mark = serializers.CharField(source="mark.code", read_only=True)
    created_by = serializers.CharField(source="created_by.username", read_only=True, allow_null=True, default=None)
    antenna_height_measured_m = RoundedFloatField(3, allow_null=True, read_only=True)
    antenna_height_arp_m = RoundedFloatField(
        3, allow_null=True, read_only=True, help_text="Vertical mark → ARP, m; null for a slant not yet reduced."
    )
    attachments = serializers.PrimaryKeyRelatedField(many=True, read_only=True)

    class Meta:
        model = Occupation
        fields = (
            "id",
            "mark",
            "method",
            "start_utc",
            "end_utc",
            "observer",
            "receiver",
            "antenna",
            "antenna_height_measured_m",
            "antenna_height_kind",
            "antenna_height_arp_m",
            "result_position",
            "notes",
            "created_by",
            "created_at",
            "attachments",
        )
        read_only_fields = fields


class VisitInput(serializers.Serializer):
    """The earlier name ``condition`` and values good / poor / not_found are still accepted (deprecated)."""

    visited_on = serializers.DateField()
    finding = serializers.ChoiceField(
        Finding.choices,
        help_text="What the visit found. disturbed or searched_not_found makes an active mark suspect when the visit "
        "is not older than the mark's newest published position.",
    )
    visitor = serializers.CharField(max_length=120, required=False, allow_blank=True)
    notes = serializers.CharField(required=False, allow_blank=True)


class OccupationInput(serializers.Serializer):
    method = serializers.ChoiceField(OccupationMethod.choices)
    start_utc = serializers.DateTimeField(help_text="ISO 8601 with a zone, e.g. 2024-05-01T14:30:00Z.")
    end_utc = serializers.DateTimeField()
    observer = serializers.CharField(max_length=120, required=False, allow_blank=True)
    receiver = serializers.CharField(max_length=120, required=False, allow_blank=True)
    antenna = serializers.CharField(max_length=120, required=False, allow_blank=True)
    antenna_height_measured_m = serializers.FloatField(required=False, allow_null=True, help_text="As measured, m.")
    antenna_height_kind = serializers.ChoiceField(AntennaHeightKind.choices, required=False)
    antenna_radius_m = serializers.FloatField(
        required=False, allow_null=True, help_text="Slant only: radius r of the slant-measure point, m."
    )
    arp_offset_m = serializers.FloatField(
        required=False,
        allow_null=True,
        help_text="Slant only: Δh from the slant-measure point to the ARP, m (negative when the ARP is below).",
    )
    result_position_id = serializers.IntegerField(required=False, allow_null=True)
    notes = serializers.CharField(required=False, allow_blank=True)


class AttachmentInput(serializers.Serializer):
    file = serializers.FileField()
    kind = serializers.ChoiceField(AttachmentKind.choices)
    caption = serializers.CharField(max_length=200, required=False, allow_blank=True)
    occupation_id = serializers.IntegerField(required=False, allow_null=True)
    visit_id = serializers.IntegerField(required=False, allow_null=True)


# ----------------------------------------------------------------------------- views


class _MarkChildren(APIView):
    """List a mark's rows (newest first, paginated) and record a new one through a service."""

    permission_classes = [ReadViewerWriteRecorder]
    pagination_class = RegistryPagination
    model = None
    serializer_class = None

    def list_rows(self, request, code: str):
        mark = access_mark_by_code(request.user, code)
        qs = mark_fieldwork(self.model, mark=mark)
        paginator = self.pagination_class()
        page = paginator.paginate_queryset(qs, request, view=self)
        data = self.serializer_class(page, many=True, context={"request": request}).data
        return paginator.get_paginated_response(data)

    def created(self, request, obj):
        fresh = fieldwork_row(self.model, pk=obj.pk)
        return Response(
            self.serializer_class(fresh, context={"request": request}).data, status=http_status.HTTP_201_CREATED
        )


class MarkVisitsView(_MarkChildren):
    """``GET /api/marks/<code>/visits/``; ``POST`` to record a visit (what the crew found)."""

    model = Visit
    serializer_class = VisitSerializer

    @extend_schema(operation_id="marks_visits_list", responses={200: VisitSerializer(many=True), **ERROR_RESPONSES})
    def get(self, request, code: str):
        return self.list_rows(request, code)

    @extend_schema(
        operation_id="marks_visits_record", request=VisitInput, responses={201: VisitSerializer, **ERROR_RESPONSES}
    )
    def post(self, request, code: str):
        visit = visit_record(actor=request.user, mark_code=code, data=request_body(request))
        return self.created(request, visit)


class MarkOccupationsView(_MarkChildren):
    """``GET /api/marks/<code>/occupations/``; ``POST`` to record an occupation."""

    model = Occupation
    serializer_class = OccupationSerializer

    @extend_schema(
        operation_id="marks_occupations_list", responses={200: OccupationSerializer(many=True), **ERROR_RESPONSES}
    )
    def get(self, request, code: str):
        return self.list_rows(request, code)

    @extend_schema(
        operation_id="marks_occupations_record",
        request=OccupationInput,
        responses={201: OccupationSerializer, **ERROR_RESPONSES},
    )
    def post(self, request, code: str):
        occupation = occupation_record(actor=request.user, mark_code=code, data=request_body(request))
        return self.created(request, occupation)


class MarkAttachmentsView(_MarkChildren):
    """``GET /api/marks/<code>/attachments/``; ``POST`` (multipart) to attach a file."""

    model = Attachment
    serializer_class = AttachmentSerializer
    parser_classes = [MultiPartParser, FormParser, SafeJSONParser]

    @extend_schema(
        operation_id="marks_attachments_list", responses={200: AttachmentSerializer(many=True), **ERROR_RESPONSES}
    )
    def get(self, request, code: str):
        return self.list_rows(request, code)

    @extend_schema(
        operation_id="marks_attachments_add",
        request={"multipart/form-data": AttachmentInput},
        responses={
            201: AttachmentSerializer,
            413: OpenApiResponse(ErrorSerializer, description="The request body is too large for the server."),
            **ERROR_RESPONSES,
        },
    )
    def post(self, request, code: str):
        data = request_fields(request)
        attachment = attachment_add(
            actor=request.user,
            mark_code=code,
            file=data.get("file"),
            kind=str(data.get("kind", "")),
            caption=str(data.get("caption", "")),
            occupation_id=data.get("occupation_id") or None,
            visit_id=data.get("visit_id") or None,
        )
        return self.created(request, attachment)
