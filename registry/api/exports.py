"""GET /api/marks/export.csv|.geojson|.gpkg, /api/marks/export?format=csv|geojson|gpkg (viewer role).

The body is the same text ``manage.py export_marks`` writes (``registry.io.export``): every mark with all
its currently published positions, one row (feature) per (mark, published position), each with the
mark's ``version`` and the position's ``position_revision`` (``?frame=EPSG`` keeps one frame only).
GeoJSON holds one frame per file (``?frame=`` or the office's export frame); GeoPackage one layer per
frame, each with its EPSG CRS.
Errors use the API's one JSON shape.
"""

from __future__ import annotations

from django.http import HttpResponse
from drf_spectacular.types import OpenApiTypes
from drf_spectacular.utils import OpenApiParameter, OpenApiResponse, extend_schema
from rest_framework.renderers import JSONRenderer
from rest_framework.views import APIView

from registry.api.permissions import IsViewer
from registry.errors import InvalidInput
from registry.io.common import frame_problem
from registry.io.export import EXPORT_FORMATS, TEXT_FORMATS, default_export_frame, export_marks_bytes

FRAME_PARAMETER = OpenApiParameter("frame", int, description="EPSG code of the positions' frame, e.g. 7912")
CSV_RESPONSE = {(200, "text/csv"): OpenApiResponse(OpenApiTypes.STR, description="CSV, columns as in the README")}
GEOJSON_RESPONSE = {
    (200, "application/geo+json"): OpenApiResponse(
        OpenApiTypes.OBJECT,
        description="GeoJSON FeatureCollection of one frame (?frame=, default the office's export frame), "
        "named in its 'frame' member",
    )
}
GPKG_RESPONSE = {
    (200, "application/geopackage+sqlite3"): OpenApiResponse(
        OpenApiTypes.BINARY, description="GeoPackage: one point layer per frame (marks_epsg<code>), each with its CRS"
    )
}


class _ExportView(APIView):
    permission_classes = [IsViewer]
    renderer_classes = [JSONRenderer]  # for errors; the export itself is a plain HttpResponse

    def perform_content_negotiation(self, request, force=False):
        # ?format= names the export format here, not a DRF renderer; errors are always JSON.
        renderer = JSONRenderer()
        return renderer, renderer.media_type

    def export(self, request, fmt: str) -> HttpResponse:
        if fmt not in EXPORT_FORMATS:
            raise InvalidInput(
                f"Unknown export format {fmt!r}; use csv, geojson or gpkg.",
                code="unknown_format",
                details={"format": fmt},
            )
        frame_epsg = None
        raw_frame = request.query_params.get("frame")
        if raw_frame not in (None, ""):
            try:
                frame_epsg = int(raw_frame)
            except ValueError:
                raise InvalidInput("frame must be an EPSG code (a whole number).", code="invalid_frame") from None
            problem = frame_problem(frame_epsg) if frame_epsg > 0 else f"EPSG:{frame_epsg} is not a valid code"
            if problem:
                raise InvalidInput(problem, code="invalid_frame", details={"frame": frame_epsg})
        media_type, extension = EXPORT_FORMATS[fmt]
        if fmt == "geojson" and frame_epsg is None:
            frame_epsg = default_export_frame()
        body = export_marks_bytes(fmt=fmt, frame_epsg=frame_epsg)
        charset = "; charset=utf-8" if fmt in TEXT_FORMATS else ""
        response = HttpResponse(body, content_type=f"{media_type}{charset}")
        suffix = f"-epsg{frame_epsg}" if frame_epsg else ""
        response["Content-Disposition"] = f'attachment; filename="marks{suffix}.{extension}"'
        return response


class MarksExportView(_ExportView):
    """Download every mark as CSV, GeoJSON or GeoPackage (``?format=``, default csv)."""

    @extend_schema(
        operation_id="marks_export",
        parameters=[
            OpenApiParameter(
                "format", str, enum=list(EXPORT_FORMATS), description="csv, geojson or gpkg (default csv)"
            ),
            FRAME_PARAMETER,
        ],
        responses={**CSV_RESPONSE, **GEOJSON_RESPONSE, **GPKG_RESPONSE},
    )
    def get(self, request, *args, **kwargs):
        return self.export(request, (request.query_params.get("format") or "csv").strip().lower())


class MarksExportCsvView(_ExportView):
    """Download every mark as CSV, in the format the importer reads."""

    @extend_schema(operation_id="marks_export_csv", parameters=[FRAME_PARAMETER], responses=CSV_RESPONSE)
    def get(self, request, *args, **kwargs):
        return self.export(request, "csv")


class MarksExportGeoJSONView(_ExportView):
    """Download every mark as GeoJSON, in the format the importer reads."""

    @extend_schema(operation_id="marks_export_geojson", parameters=[FRAME_PARAMETER], responses=GEOJSON_RESPONSE)
    def get(self, request, *args, **kwargs):
        return self.export(request, "geojson")


class MarksExportGeoPackageView(_ExportView):
    """Download every mark with a published position as a GeoPackage: one layer per frame, each with its CRS."""

    @extend_schema(operation_id="marks_export_gpkg", parameters=[FRAME_PARAMETER], responses=GPKG_RESPONSE)
    def get(self, request, *args, **kwargs):
        return self.export(request, "gpkg")
