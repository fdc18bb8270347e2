"""API views for marks: list/search (JSON or GeoJSON), create, read, edit, status, clearing a suspect mark.

Thin views: they parse the request, call a selector or a service, and serialize the
result. Permissions: reading needs the viewer ability; creating, editing and changing
status need the manager ability (checked here and again in the services).
"""

from __future__ import annotations

from django.core.exceptions import ValidationError
from drf_spectacular.types import OpenApiTypes
from drf_spectacular.utils import OpenApiParameter, OpenApiResponse, extend_schema
from rest_framework import status as http_status
from rest_framework.renderers import JSONRenderer
from rest_framework.response import Response
from rest_framework.views import APIView

from registry.api.body import request_body
from registry.api.geojson import GEOJSON_MEDIA_TYPE, GeoJSONRenderer, feature_collection
from registry.api.pagination import MarkKeysetPagination
from registry.api.permissions import ReadViewerWriteManager
from registry.api.serializers import (
    ErrorSerializer,
    MarkClearSuspectInput,
    MarkCreateInput,
    MarkDetailSerializer,
    MarkFeatureCollectionSerializer,
    MarkPatchInput,
    MarkSerializer,
    MarkStatusInput,
)
from registry.models import MarkStatus
from registry.selectors.marks import mark_api_search
from registry.selectors.positions import published_positions
from registry.services.access import access_mark_by_code
from registry.services.marks import mark_create, mark_set_status, mark_update
from registry.services.suspect import mark_clear_suspect

ERROR_RESPONSES = {
    400: OpenApiResponse(ErrorSerializer, description="Invalid input; details per field."),
    401: OpenApiResponse(ErrorSerializer, description="Not signed in (token or session)."),
    403: OpenApiResponse(ErrorSerializer, description="Your role does not allow this."),
    404: OpenApiResponse(ErrorSerializer, description="No such object."),
}
CONFLICT_RESPONSE = OpenApiResponse(
    ErrorSerializer,
    description="Stale version (code stale_version): details give, per field, yours / theirs / changed_by / changed_at.",
)


def mark_with_published(user, code: str):
    """The mark (through the gatekeeper) with its published positions and search-location source."""
    mark = access_mark_by_code(user, code)
    published = published_positions(mark=mark)
    mark.published_list = published
    source = published[0] if published else None
    mark.src_frame_epsg = source.frame_epsg if source else None
    mark.src_epoch_yr = source.epoch_yr if source else None
    return mark


class MarkListView(APIView):
    """``GET /api/marks/``: search marks; ``POST /api/marks/``: create one (manager)."""

    permission_classes = [ReadViewerWriteManager]
    renderer_classes = [JSONRenderer, GeoJSONRenderer]
    pagination_class = MarkKeysetPagination

    def get_renderers(self):
        if getattr(self, "request", None) is not None and self.request.method not in ("GET", "HEAD"):
            return [JSONRenderer()]
        return super().get_renderers()

    @extend_schema(
        operation_id="marks_list",
        parameters=[
            OpenApiParameter("code", OpenApiTypes.STR, description="Exact mark code."),
            OpenApiParameter("name", OpenApiTypes.STR, description="Part of the name (case-insensitive)."),
            OpenApiParameter("status", OpenApiTypes.STR, enum=MarkStatus.values),
            OpenApiParameter("q", OpenApiTypes.STR, description="Part of the code or the name (case-insensitive)."),
            OpenApiParameter(
                "format",
                OpenApiTypes.STR,
                enum=["json", "geojson"],
                description="geojson: an RFC 7946 FeatureCollection (also with Accept: application/geo+json).",
            ),
            OpenApiParameter("limit", OpenApiTypes.INT, description="Rows per page, 1 to 500 (default 100)."),
            OpenApiParameter(
                "offset",
                OpenApiTypes.INT,
                description="Rows to skip, 0 to 10,000; deeper pages: follow next (a cursor).",
            ),
            OpenApiParameter("cursor", OpenApiTypes.STR, description="Opaque position from a next or previous link."),
        ],
        responses={
            (200, "application/json"): MarkSerializer(many=True),
            (200, GEOJSON_MEDIA_TYPE): MarkFeatureCollectionSerializer,
            400: ERROR_RESPONSES[400],
            401: ERROR_RESPONSES[401],
        },
    )
    def get(self, request):
        params = request.query_params
        for key in ("q", "code", "name", "status"):
            if "\x00" in params.get(key, ""):
                raise ValidationError(
                    {key: ValidationError("Null characters are not allowed.", code="null_characters_not_allowed")}
                )
        status = params.get("status", "").strip()
        if status and status not in MarkStatus.values:
            raise ValidationError(
                {
                    "status": ValidationError(
                        "Unknown status %(value)r.", code="invalid_choice", params={"value": status}
                    )
                }
            )
        code = params.get("code", "").strip()
        name = params.get("name", "").strip()
        qs = mark_api_search(q=params.get("q", ""), status=status, code=code, name=name)
        self.unfiltered = not (params.get("q", "").strip() or status or code or name)
        paginator = self.pagination_class()
        page = paginator.paginate_queryset(qs, request, view=self)
        if getattr(request.accepted_renderer, "format", "") == GeoJSONRenderer.format:
            return Response(
                feature_collection(
                    page,
                    paging={
                        "count": paginator.count,
                        "count_is_estimate": not paginator.count_exact,
                        "next": paginator.get_next_link(),
                        "previous": paginator.get_previous_link(),
                    },
                ),
                content_type=GEOJSON_MEDIA_TYPE,
            )
        return paginator.get_paginated_response(MarkSerializer(page, many=True).data)

    @extend_schema(
        operation_id="marks_create",
        request=MarkCreateInput,
        responses={201: MarkDetailSerializer, **ERROR_RESPONSES},
    )
    def post(self, request):
        mark = mark_create(actor=request.user, data=request_body(request))
        return Response(
            MarkDetailSerializer(mark_with_published(request.user, mark.code)).data, status=http_status.HTTP_201_CREATED
        )


class MarkDetailView(APIView):
    """``GET /api/marks/<code>/``; ``PATCH`` with ``version`` (manager)."""

    permission_classes = [ReadViewerWriteManager]

    @extend_schema(
        operation_id="marks_retrieve",
        responses={200: MarkDetailSerializer, 401: ERROR_RESPONSES[401], 404: ERROR_RESPONSES[404]},
    )
    def get(self, request, code: str):
        return Response(MarkDetailSerializer(mark_with_published(request.user, code)).data)

    @extend_schema(
        operation_id="marks_partial_update",
        request=MarkPatchInput,
        responses={
            200: MarkDetailSerializer,
            409: CONFLICT_RESPONSE,
            **ERROR_RESPONSES,
        },
    )
    def patch(self, request, code: str):
        data = request_body(request)
        version = data.pop("version", None)
        mark_update(actor=request.user, code=code, expected_version=version, changes=data)
        return Response(MarkDetailSerializer(mark_with_published(request.user, code)).data)


class MarkStatusView(APIView):
    """``POST /api/marks/<code>/status/``: set active / retired / destroyed (manager)."""

    permission_classes = [ReadViewerWriteManager]
    http_method_names = ["post", "options"]

    @extend_schema(
        operation_id="marks_set_status",
        request=MarkStatusInput,
        responses={200: MarkDetailSerializer, 409: CONFLICT_RESPONSE, **ERROR_RESPONSES},
    )
    def post(self, request, code: str):
        data = request_body(request)
        mark_set_status(
            actor=request.user,
            code=code,
            status=data.get("status"),
            expected_version=data.get("version"),
            note=data.get("note", ""),
        )
        return Response(MarkDetailSerializer(mark_with_published(request.user, code)).data)


class MarkClearSuspectView(APIView):
    """``POST /api/marks/<code>/clear-suspect/``: a manager's clearance of a suspect mark (note required)."""

    permission_classes = [ReadViewerWriteManager]
    http_method_names = ["post", "options"]

    @extend_schema(
        operation_id="marks_clear_suspect",
        request=MarkClearSuspectInput,
        responses={
            200: MarkDetailSerializer,
            409: OpenApiResponse(
                ErrorSerializer,
                description="stale_version (details per field as for an edit), or not_suspect (the mark is not suspect).",
            ),
            **ERROR_RESPONSES,
        },
    )
    def post(self, request, code: str):
        data = request_body(request)
        mark_clear_suspect(
            actor=request.user, code=code, note=data.get("note", ""), expected_version=data.get("version")
        )
        return Response(MarkDetailSerializer(mark_with_published(request.user, code)).data)
