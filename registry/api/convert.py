"""GET or POST /api/convert/ — one point in every form (viewer role and above).

Input (query parameters for GET, JSON body for POST; one input form):
``lat``, ``lon`` (decimal degrees or DMS text), ``h`` (ellipsoidal height, m) — or ``x``, ``y``, ``z``
(ECEF, m) — or ``easting``, ``northing`` (m) with ``grid_in`` (EPSG) and ``h``; plus ``frame`` (EPSG of
a geographic 3D CRS), ``epoch`` (decimal year), optional ``to_frame``, ``to_epoch``, ``grid`` (EPSG,
``utm`` or a custom grid's code, default ``utm``; ``grid_in`` likewise), and for an epoch change
without the office's plate rule: ``plate`` (``AUTO`` or a plate code of ITRF2020-PMM) or the point's
own velocity ``vel_e_mm_yr``, ``vel_n_mm_yr``, ``vel_u_mm_yr`` (mm/yr, in the input frame).

Output: the same keys as ``manage.py convert_point --json`` (``registry.geodesy.convert.JSON_KEYS``),
plus ``grid_native`` (feet beside metres for a grid in feet), ``plate``, ``added_sigma_mm``, ``chain``,
``warnings`` and ``cautions``. Numbers are NOT rounded (full double precision); rounding belongs to
pages and documents. Bad input: 400 in the API's one error shape, ``details`` naming the field.
"""

from __future__ import annotations

from drf_spectacular.types import OpenApiTypes
from drf_spectacular.utils import OpenApiResponse, extend_schema
from rest_framework import serializers
from rest_framework.response import Response
from rest_framework.views import APIView

from registry.api.permissions import IsViewer
from registry.errors import InvalidInput
from registry.geodesy.convert import ConversionError
from registry.selectors.conversion import point_convert


class ConvertInputSerializer(serializers.Serializer):
    frame = serializers.CharField(help_text="EPSG code of the input's geographic 3D frame, e.g. 7912")
    epoch = serializers.FloatField(help_text="coordinate epoch of the input, decimal year")
    lat = serializers.CharField(
        required=False, allow_blank=True, help_text="latitude: decimal degrees or DMS ('45 12 03.5 N')"
    )
    lon = serializers.CharField(
        required=False, allow_blank=True, help_text="longitude: decimal degrees or DMS ('110 36 00 W')"
    )
    h = serializers.FloatField(required=False, help_text="ellipsoidal height, m (also needed with easting/northing)")
    x = serializers.FloatField(required=False, help_text="ECEF X, m")
    y = serializers.FloatField(required=False, help_text="ECEF Y, m")
    z = serializers.FloatField(required=False, help_text="ECEF Z, m")
    easting = serializers.FloatField(required=False, help_text="grid easting, m")
    northing = serializers.FloatField(required=False, help_text="grid northing, m")
    grid_in = serializers.CharField(
        required=False, allow_blank=True, help_text="EPSG code of the grid of easting/northing"
    )
    to_frame = serializers.CharField(required=False, allow_blank=True, help_text="target frame (EPSG); default: frame")
    to_epoch = serializers.FloatField(required=False, help_text="target epoch (decimal year); default: epoch")
    grid = serializers.CharField(
        required=False,
        allow_blank=True,
        help_text="output grid: EPSG code of a projected CRS, 'utm', or the code of a custom grid",
    )
    plate = serializers.CharField(
        required=False,
        allow_blank=True,
        help_text="plate motion for this conversion: 'AUTO' (from the location) or an ITRF2020-PMM plate code; "
        "default: the office's setting",
    )
    vel_e_mm_yr = serializers.FloatField(required=False, help_text="the point's own velocity east, mm/yr")
    vel_n_mm_yr = serializers.FloatField(required=False, help_text="the point's own velocity north, mm/yr")
    vel_u_mm_yr = serializers.FloatField(required=False, help_text="the point's own velocity up, mm/yr")


def convert_inputs(data: dict) -> dict:
    """Validated serializer data → keyword arguments of ``point_convert`` (shared with the page)."""
    xyz = [data.get(k) for k in ("x", "y", "z")]
    en = [data.get(k) for k in ("easting", "northing")]
    if any(v is not None for v in xyz) and not all(v is not None for v in xyz):
        raise ConversionError("ECEF input needs all of x, y and z (m).", code="incomplete", field="xyz")
    if any(v is not None for v in en) and not all(v is not None for v in en):
        raise ConversionError("Grid input needs both easting and northing (m).", code="incomplete", field="en")
    vel = [data.get(k) for k in ("vel_e_mm_yr", "vel_n_mm_yr", "vel_u_mm_yr")]
    if any(v is not None for v in vel) and not all(v is not None for v in vel):
        raise ConversionError(
            "A velocity needs all three components east, north and up (mm/yr).", code="incomplete", field="velocity"
        )
    plate = (data.get("plate") or "").strip() or None
    if plate and vel[0] is not None:
        raise ConversionError(
            "Give either the point's velocity or a plate, not both.", code="velocity_and_plate", field="plate"
        )
    grid = data.get("grid")
    extra = {}
    if plate:
        extra["plate"] = plate
    if vel[0] is not None:
        extra["velocity_enu_m_yr"] = tuple(float(v) / 1000.0 for v in vel)
    return {
        **extra,
        "frame_epsg": data["frame"],
        "epoch_yr": data["epoch"],
        "lat": data.get("lat") or None,
        "lon": data.get("lon") or None,
        "h_m": data.get("h"),
        "xyz_m": xyz if xyz[0] is not None else None,
        "en_m": en if en[0] is not None else None,
        "grid_in": data.get("grid_in") or None,
        "to_frame_epsg": data.get("to_frame"),
        "to_epoch_yr": data.get("to_epoch"),
        "grid": grid or "utm",
        "grid_explicit": bool(grid),
    }


class ConvertView(APIView):
    """Convert one point between geodetic, ECEF and grid forms, and to another frame and epoch."""

    permission_classes = [IsViewer]

    def _convert(self, raw):
        ser = ConvertInputSerializer(data=raw)
        ser.is_valid(raise_exception=True)
        try:
            result = point_convert(**convert_inputs(ser.validated_data))
        except ConversionError as exc:
            field = exc.field or "non_field_errors"
            raise InvalidInput(
                str(exc), code=exc.code, details={field: [{"code": exc.code, "message": str(exc)}]}
            ) from None
        return Response(result.as_json())

    @extend_schema(
        operation_id="convert_point_get",
        parameters=[ConvertInputSerializer],
        responses={200: OpenApiResponse(OpenApiTypes.OBJECT, description="the point in every form")},
    )
    def get(self, request, *args, **kwargs):
        return self._convert(request.query_params)

    @extend_schema(
        operation_id="convert_point",
        request=ConvertInputSerializer,
        responses={200: OpenApiResponse(OpenApiTypes.OBJECT, description="the point in every form")},
    )
    def post(self, request, *args, **kwargs):
        return self._convert(request.data)
