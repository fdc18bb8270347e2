"""``POST /api/marks/<code>/occupations/rinex/``: record an occupation from a RINEX observation file.

Multipart: ``file`` (RINEX 2.11 / 3.x / 4.x, plain or gzip), optional ``method`` (default
static_gnss), ``observer``, ``notes`` (override what the header says), ``dry_run`` (true: check and
show, record nothing). The reply holds what the header said, the occupation fields, the warnings and,
unless a dry run, the recorded occupation. The rules are the service's
(``registry.services.rinex``): a refused file is a 400 with its reason on the ``file`` field.
"""

from __future__ import annotations

from drf_spectacular.utils import OpenApiResponse, extend_schema
from rest_framework import serializers
from rest_framework import status as http_status
from rest_framework.parsers import FormParser, MultiPartParser
from rest_framework.response import Response
from rest_framework.views import APIView

from registry.api.body import request_fields
from registry.api.fieldwork import OccupationSerializer
from registry.api.marks import ERROR_RESPONSES
from registry.api.positions import ReadViewerWriteRecorder
from registry.api.serializers import ErrorSerializer
from registry.models import Occupation, OccupationMethod
from registry.selectors.fieldwork import fieldwork_row
from registry.services._input import field_error
from registry.services.rinex import occupation_from_rinex


class RinexOccupationInput(serializers.Serializer):
    file = serializers.FileField(help_text="RINEX observation file (2.11, 3.x, 4.x), plain or gzip.")
    method = serializers.ChoiceField(OccupationMethod.choices, required=False)
    observer = serializers.CharField(max_length=120, required=False, allow_blank=True)
    notes = serializers.CharField(required=False, allow_blank=True)
    dry_run = serializers.BooleanField(required=False, default=False)


class RinexOccupationResult(serializers.Serializer):
    file = serializers.CharField()
    sha256 = serializers.CharField()
    size_bytes = serializers.IntegerField()
    header = serializers.DictField(help_text="What the header says; times in UTC.")
    approx_offset_from_mark_m = serializers.FloatField(allow_null=True)
    occupation = serializers.DictField(help_text="The occupation fields filled from the header.")
    warnings = serializers.ListField(child=serializers.CharField())
    dry_run = serializers.BooleanField()
    recorded = OccupationSerializer(allow_null=True)


_MAX_READ = 2**31


class MarkOccupationFromRinexView(APIView):
    permission_classes = [ReadViewerWriteRecorder]
    parser_classes = [MultiPartParser, FormParser]

    @extend_schema(
        operation_id="marks_occupations_from_rinex",
        request={"multipart/form-data": RinexOccupationInput},
        responses={
            201: RinexOccupationResult,
            200: OpenApiResponse(RinexOccupationResult, description="Dry run: checked, nothing recorded."),
            413: OpenApiResponse(ErrorSerializer, description="The request body is too large for the server."),
            **ERROR_RESPONSES,
        },
    )
    def post(self, request, code: str):
        data = request_fields(request)
        upload = data.get("file")
        if upload is None or not hasattr(upload, "read"):
            raise field_error("file", "Attach the RINEX observation file.", "required")
        dry_run = str(data.get("dry_run", "")).strip().lower() in ("1", "true", "yes", "on")
        overrides = {k: str(data.get(k)) for k in ("method", "observer", "notes") if data.get(k)}
        content = upload.read(_MAX_READ)
        occupation, prefill = occupation_from_rinex(
            actor=request.user,
            mark_code=code,
            content=content,
            filename=getattr(upload, "name", "") or "session.rnx",
            data=overrides,
            dry_run=dry_run,
        )
        body = prefill.as_dict()
        body["dry_run"] = dry_run
        body["recorded"] = None
        if occupation is not None:
            fresh = fieldwork_row(Occupation, pk=occupation.pk)
            body["recorded"] = OccupationSerializer(fresh, context={"request": request}).data
        return Response(body, status=http_status.HTTP_200_OK if dry_run else http_status.HTTP_201_CREATED)
