"""Custom grids: ``GET /api/grids/`` (viewer and above) lists them; ``POST /api/grids/`` stores one (manager).

Input of a POST: the parameters of ``registry.services.grids.custom_grid_create`` (``code``, ``name``,
``notes``, ``frame_epsg``, ``method`` one of ``tm`` | ``oblique_stereographic`` | ``lcc_1sp`` |
``utm_scaled``, ``unit`` one of ``metre`` | ``foot`` | ``US survey foot``, the projection's
parameters and the area of use). The grid is built with PROJ before it is stored; a grid is never
edited afterwards. Bad input: 400 with the field at fault. A stored grid's code is accepted wherever
a grid is (``/api/convert/`` ``grid`` and ``grid_in``, a job's ``custom_grid``).
"""

from __future__ import annotations

from drf_spectacular.utils import OpenApiResponse, extend_schema
from rest_framework import serializers
from rest_framework import status as http_status
from rest_framework.response import Response
from rest_framework.views import APIView

from registry.api.permissions import ReadViewerWriteManager
from registry.models import CustomGrid
from registry.selectors.grids import custom_grids
from registry.services.grids import FIELDS, custom_grid_create


class CustomGridSerializer(serializers.ModelSerializer):
    class Meta:
        model = CustomGrid
        fields = [*FIELDS, "proj_definition", "created_at"]
        read_only_fields = fields


class CustomGridInput(serializers.Serializer):
    code = serializers.CharField(help_text="capital letters, digits, '_', '.', '-', starting with a letter")
    name = serializers.CharField()
    notes = serializers.CharField(required=False, allow_blank=True)
    frame_epsg = serializers.IntegerField(help_text="geographic 3D frame the grid projects (its datum)")
    method = serializers.CharField(help_text="tm | oblique_stereographic | lcc_1sp | utm_scaled")
    unit = serializers.CharField(required=False, help_text="metre (default) | foot | US survey foot")
    lat0_deg = serializers.FloatField(required=False, allow_null=True)
    lon0_deg = serializers.FloatField(required=False, allow_null=True)
    k0 = serializers.FloatField(required=False, allow_null=True)
    false_easting = serializers.FloatField(required=False, allow_null=True, help_text="in the grid's unit")
    false_northing = serializers.FloatField(required=False, allow_null=True, help_text="in the grid's unit")
    utm_zone = serializers.IntegerField(required=False, allow_null=True)
    utm_south = serializers.BooleanField(required=False)
    anchor_lat_deg = serializers.FloatField(required=False, allow_null=True)
    anchor_lon_deg = serializers.FloatField(required=False, allow_null=True)
    scale = serializers.FloatField(required=False, allow_null=True)
    area_west_deg = serializers.FloatField()
    area_south_deg = serializers.FloatField()
    area_east_deg = serializers.FloatField()
    area_north_deg = serializers.FloatField()


class CustomGridListView(APIView):
    permission_classes = [ReadViewerWriteManager]

    @extend_schema(operation_id="custom_grid_list", responses={200: CustomGridSerializer(many=True)})
    def get(self, request):
        return Response(CustomGridSerializer(custom_grids(), many=True).data)

    @extend_schema(
        operation_id="custom_grid_create",
        request=CustomGridInput,
        responses={201: CustomGridSerializer, 400: OpenApiResponse(description="Invalid input.")},
    )
    def post(self, request):
        incoming = CustomGridInput(data=request.data)
        incoming.is_valid(raise_exception=True)
        grid = custom_grid_create(actor=request.user, data=dict(incoming.validated_data))
        return Response(CustomGridSerializer(grid).data, status=http_status.HTTP_201_CREATED)
