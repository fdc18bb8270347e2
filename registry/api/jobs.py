"""API for jobs and their base screening.

- ``GET /api/jobs/`` list; ``POST /api/jobs/`` create (technician or manager).
- ``GET /api/jobs/<code>/`` read; ``PATCH /api/jobs/<code>/`` edit with ``version`` (technician or manager;
  409 ``stale_version`` with ``{field: {"yours", "theirs"}}`` when someone saved first).
- ``GET /api/jobs/<code>/screening/`` the screening of a stored job (``?as_of=YYYY-MM-DD``).
- ``POST /api/screening/`` screening of an ad-hoc site (nothing stored).

Thin views: they parse, call :mod:`registry.services.jobs` / :mod:`registry.services.screening`
(which check roles and validate with coded errors) and serialize. Rounding: mm to 1 decimal,
m to 3, degrees to 9 places, fractions to 4.
"""

from __future__ import annotations

import datetime as dt

from django.core.exceptions import ValidationError
from drf_spectacular.types import OpenApiTypes
from drf_spectacular.utils import OpenApiParameter, OpenApiResponse, extend_schema
from rest_framework import serializers
from rest_framework import status as http_status
from rest_framework.response import Response
from rest_framework.views import APIView

from registry.api.body import request_body
from registry.api.permissions import IsViewer, ReadViewerWriteJobPlanner
from registry.models import Job, JobStatus, RtkCombination, RtkHorizontalMeaning, VerticalDeliverable
from registry.selectors.jobs import jobs_in_order
from registry.services.access import access_job_by_code
from registry.services.jobs import CREATE_FIELDS, job_create, job_update
from registry.services.screening import site_screen
from registry.services.screening.cache import job_screen_cached

ERRORS = {
    400: OpenApiResponse(description="Invalid input: {error: {code, message, details: {field: [{code, message}]}}}."),
    403: OpenApiResponse(description="Your role does not allow this."),
    404: OpenApiResponse(description="No such job (or not visible to you)."),
}


class JobSerializer(serializers.ModelSerializer):
    class Meta:
        model = Job
        fields = [*CREATE_FIELDS, "version", "created_at", "updated_at"]
        read_only_fields = fields


class ScreeningSettingsInput(serializers.Serializer):
    """Ad-hoc screening: the site and the job settings that matter (defaults as for a new job)."""

    site_geojson = serializers.JSONField(
        help_text="GeoJSON Point or Polygon (longitude, latitude in degrees). An optional third coordinate is read "
        "as the ELLIPSOIDAL height in the job's frame (not an orthometric height from a plan); it is used only "
        "for the base-to-site height difference."
    )
    frame_epsg = serializers.IntegerField(help_text="Deliverable frame: EPSG code of a geographic 3D CRS.")
    epoch_yr = serializers.FloatField(help_text="Deliverable coordinate epoch, decimal year.")
    tol_h_mm = serializers.FloatField(help_text="Horizontal tolerance, 95 % circle, mm.")
    tol_v_mm = serializers.FloatField(help_text="Vertical tolerance, 95 %, mm.")
    rtk_h_fixed_mm = serializers.FloatField(required=False)
    rtk_h_ppm = serializers.FloatField(required=False)
    rtk_v_fixed_mm = serializers.FloatField(required=False)
    rtk_v_ppm = serializers.FloatField(required=False)
    rtk_combination = serializers.ChoiceField(choices=RtkCombination.choices, required=False)
    rtk_h_meaning = serializers.ChoiceField(choices=RtkHorizontalMeaning.choices, required=False)
    setup_h_mm = serializers.FloatField(required=False)
    setup_v_mm = serializers.FloatField(required=False)
    rover_h_mm = serializers.FloatField(required=False, help_text="Rover pole centring per axis, 1σ, mm (default 2).")
    rover_v_mm = serializers.FloatField(required=False, help_text="Rover rod height, 1σ, mm (default 3).")
    assumed_rate_mm_yr = serializers.FloatField(required=False, help_text="Dynamic frames, mm/yr per axis.")
    assumed_rate_plate_fixed_mm_yr = serializers.FloatField(required=False, help_text="Plate-fixed frames, mm/yr.")
    field_date = serializers.DateField(
        required=False, allow_null=True, help_text="When the crew observes (default: the screening date)."
    )
    vertical_deliverable = serializers.ChoiceField(choices=VerticalDeliverable.choices, required=False)
    max_baseline_m = serializers.FloatField(required=False)
    recovery_years = serializers.FloatField(required=False)
    grid_spacing_m = serializers.FloatField(required=False, allow_null=True)
    as_of = serializers.DateField(required=False, help_text="Screen as of this date (visits after it are ignored).")


class JobCreateInput(ScreeningSettingsInput):
    code = serializers.CharField()
    name = serializers.CharField()
    client = serializers.CharField(required=False, allow_blank=True)
    status = serializers.ChoiceField(choices=JobStatus.choices, required=False)
    grid_epsg = serializers.IntegerField(required=False, allow_null=True)
    custom_grid = serializers.CharField(
        required=False, allow_null=True, allow_blank=True, help_text="code of a custom grid (instead of grid_epsg)"
    )
    notes = serializers.CharField(required=False, allow_blank=True)
    as_of = None


class BudgetTermSerializer(serializers.Serializer):
    term = serializers.ChoiceField(choices=["rtk", "base", "drift", "motion", "setup", "rover", "geoid"])
    h_mm = serializers.FloatField(help_text="1σ per horizontal axis, mm.")
    v_mm = serializers.FloatField(help_text="1σ vertical, mm.")
    description = serializers.CharField(help_text="Where the term comes from (base: with any frame-change part).")


class ReasonSerializer(serializers.Serializer):
    code = serializers.CharField()
    words = serializers.CharField()


class CandidateSerializer(serializers.Serializer):
    rank = serializers.IntegerField()
    code = serializers.CharField()
    name = serializers.CharField()
    distance_m = serializers.FloatField(help_text="To the nearest site point (0 inside a polygon).")
    max_distance_m = serializers.FloatField(help_text="To the farthest site point.")
    azimuth_deg = serializers.FloatField(allow_null=True)
    lat_deg = serializers.FloatField(allow_null=True, help_text="In the job's frame at the job's epoch.")
    lon_deg = serializers.FloatField(allow_null=True)
    h_m = serializers.FloatField(allow_null=True, help_text="Ellipsoidal height.")
    position = serializers.JSONField(allow_null=True)
    horizontal_95_mm = serializers.FloatField(allow_null=True, help_text="Worst over the site.")
    vertical_95_mm = serializers.FloatField(allow_null=True)
    margin_mm = serializers.FloatField(allow_null=True)
    coverage = serializers.FloatField(help_text="Fraction of the site inside both tolerances.")
    covers_site = serializers.BooleanField()
    coverage_words = serializers.CharField(help_text='"covers site", "covers N %" or "covers none".')
    max_height_difference_m = serializers.FloatField(
        allow_null=True, help_text="Largest |Δh| base → the site's given ellipsoidal heights (null: none given)."
    )
    excluded = serializers.BooleanField()
    reasons = ReasonSerializer(many=True)
    reaches_whole_site = serializers.BooleanField(help_text="Every site point is within the maximum baseline.")
    velocity_mm_yr = serializers.ListField(child=serializers.FloatField(), allow_null=True)
    motion_offset_mm = serializers.ListField(
        child=serializers.FloatField(),
        allow_null=True,
        help_text="Predicted offset east, north, up from the deliverable epoch to the field date (null: none).",
    )
    budget = BudgetTermSerializer(many=True, allow_null=True)
    sigma_h_mm = serializers.FloatField(allow_null=True)
    sigma_v_mm = serializers.FloatField(allow_null=True)
    steps = serializers.JSONField()
    warnings = serializers.ListField(child=serializers.CharField())


class ScreeningOutput(serializers.Serializer):
    job = serializers.CharField(allow_null=True)
    as_of = serializers.DateField()
    site = serializers.JSONField()
    frame = serializers.JSONField()
    epoch_yr = serializers.FloatField()
    tolerances = serializers.JSONField()
    settings = serializers.JSONField()
    candidates = CandidateSerializer(many=True)
    best_pair = serializers.JSONField(allow_null=True)
    chosen_bases = serializers.ListField(child=serializers.CharField())
    service_areas = serializers.JSONField(help_text="Per chosen base, the share of the site it serves.")
    check_marks = serializers.JSONField()
    achievable = serializers.JSONField(allow_null=True)
    statement = serializers.CharField()
    warnings = serializers.ListField(child=serializers.CharField())
    cautions = serializers.ListField(child=serializers.CharField())


def _as_of(value) -> dt.date | None:
    if value in (None, ""):
        return None
    try:
        return dt.date.fromisoformat(str(value))
    except ValueError:
        raise ValidationError(
            {"as_of": ValidationError("Expected a date as YYYY-MM-DD.", code="invalid_date")}
        ) from None


class JobListView(APIView):
    permission_classes = [ReadViewerWriteJobPlanner]

    @extend_schema(operation_id="jobs_list", responses={200: JobSerializer(many=True)})
    def get(self, request):
        return Response(JobSerializer(jobs_in_order(), many=True).data)

    @extend_schema(operation_id="jobs_create", request=JobCreateInput, responses={201: JobSerializer, **ERRORS})
    def post(self, request):
        job = job_create(actor=request.user, data=request_body(request))
        return Response(JobSerializer(job).data, status=http_status.HTTP_201_CREATED)


class JobDetailView(APIView):
    permission_classes = [ReadViewerWriteJobPlanner]

    @extend_schema(operation_id="jobs_read", responses={200: JobSerializer, 404: ERRORS[404]})
    def get(self, request, code: str):
        return Response(JobSerializer(access_job_by_code(request.user, code)).data)

    @extend_schema(
        operation_id="jobs_update",
        request=JobCreateInput(partial=True),
        description="Send the fields to change and `version` (the version you started from).",
        responses={
            200: JobSerializer,
            409: OpenApiResponse(description="stale_version: details {field: {yours, theirs}}."),
            **ERRORS,
        },
    )
    def patch(self, request, code: str):
        body = request_body(request)
        version = body.pop("version", None)
        job = job_update(actor=request.user, code=code, expected_version=version, changes=body)
        return Response(JobSerializer(job).data)


class JobScreeningView(APIView):
    permission_classes = [IsViewer]

    @extend_schema(
        operation_id="jobs_screening",
        parameters=[
            OpenApiParameter("as_of", OpenApiTypes.DATE, description="Screen as of this date (default today, UTC).")
        ],
        responses={200: ScreeningOutput, 404: ERRORS[404]},
    )
    def get(self, request, code: str):
        result = job_screen_cached(actor=request.user, code=code, as_of=_as_of(request.query_params.get("as_of")))
        return Response(result.as_dict())


class SiteScreeningView(APIView):
    permission_classes = [IsViewer]

    @extend_schema(
        operation_id="screening_ad_hoc", request=ScreeningSettingsInput, responses={200: ScreeningOutput, **ERRORS}
    )
    def post(self, request):
        ser = ScreeningSettingsInput(data=request.data)
        ser.is_valid(raise_exception=True)
        body = request_body(request)
        as_of = _as_of(body.pop("as_of", None))
        result = site_screen(actor=request.user, data=body, as_of=as_of)
        return Response(result.as_dict())
