"""POST /api/accuracy/ — an accuracy statement from a covariance or check-point residuals (viewer and above).

Input (JSON object; exactly one input form):

* ``cov_en_m2``: ``[var_e, cov_en, var_n]`` in m², optional ``var_u_m2`` (ellipsoid height) — FGDC
  network accuracy and classes;
* ``residuals_csv``: the residual CSV as text (format in ``registry.geodesy.statements`` and the README);
* ``residuals``: the same as a list of objects ``{"point_id", "de_m", "dn_m", "du_m", "sigma_e_m", ...}``;

plus ``style``: ``fgdc`` | ``nssda`` | ``asprs2023`` (default ``fgdc`` for a covariance, ``nssda`` for
residuals).

Output: exactly what ``manage.py accuracy_statement --json`` prints (one shared function,
:func:`registry.geodesy.statements.accuracy_report`). Metres (keys ending ``_m``) rounded to 4 decimals
(0.1 mm), ratios and factors to 6. Figures a style does not define are ``null``. Bad input: 400 in the
API's one error shape with the computation's ``code``; nothing is stored.
"""

from __future__ import annotations

from drf_spectacular.utils import OpenApiResponse, extend_schema
from rest_framework import serializers
from rest_framework.response import Response
from rest_framework.views import APIView

from registry.api.permissions import IsViewer
from registry.errors import InvalidInput
from registry.geodesy.accuracy import ComputationInputError
from registry.geodesy.statements import (
    STYLES,
    accuracy_report,
    parse_residuals_csv,
    report_as_json,
    residual_table_from_rows,
)

MAX_CSV_CHARS = 5 * 1024 * 1024


class AccuracyInputSerializer(serializers.Serializer):
    style = serializers.ChoiceField(
        choices=STYLES, required=False, help_text="default: fgdc for a covariance, nssda for residuals"
    )
    cov_en_m2 = serializers.ListField(
        child=serializers.FloatField(),
        min_length=3,
        max_length=3,
        required=False,
        help_text="[var_e, cov_en, var_n], m²",
    )
    var_u_m2 = serializers.FloatField(required=False, help_text="variance of the ellipsoid height, m² (with cov_en_m2)")
    residuals_csv = serializers.CharField(
        required=False, trim_whitespace=False, max_length=MAX_CSV_CHARS, help_text="residual CSV text"
    )
    residuals = serializers.ListField(
        child=serializers.DictField(), required=False, allow_empty=False, help_text="residual rows as objects"
    )

    def validate(self, attrs):
        given = [k for k in ("cov_en_m2", "residuals_csv", "residuals") if k in attrs]
        if len(given) != 1:
            raise serializers.ValidationError(
                "Give exactly one of cov_en_m2, residuals_csv or residuals.", code="input_choice"
            )
        return attrs


class AccuracyFindingSerializer(serializers.Serializer):
    code = serializers.CharField()
    message = serializers.CharField()
    params = serializers.DictField()


class AccuracyReportSerializer(serializers.Serializer):
    """Documentation of the output (the view returns the shared report as it is)."""

    style = serializers.ChoiceField(choices=STYLES)
    standard = serializers.CharField()
    input = serializers.ChoiceField(choices=["covariance", "residuals"])
    horizontal_95_m = serializers.FloatField(
        allow_null=True, help_text="95 % horizontal (m, 4 decimals); null for ASPRS 2023"
    )
    vertical_95_m = serializers.FloatField(
        allow_null=True, help_text="95 % vertical (m); null for ASPRS 2023 or without a vertical input"
    )
    horizontal_class = serializers.CharField(allow_null=True, help_text="FGDC-STD-007.2-1998 class (fgdc style only)")
    vertical_class = serializers.CharField(allow_null=True)
    statement = serializers.CharField(help_text="the statement, lines joined with newlines")
    statement_lines = serializers.ListField(child=serializers.CharField())
    findings = AccuracyFindingSerializer(many=True)
    cautions = serializers.ListField(child=serializers.CharField())
    n_checkpoints = serializers.IntegerField(required=False)
    rmse_x_m = serializers.FloatField(required=False, allow_null=True)
    rmse_y_m = serializers.FloatField(required=False, allow_null=True)
    rmse_r_m = serializers.FloatField(required=False, allow_null=True, help_text="nssda")
    rmse_z_m = serializers.FloatField(required=False, allow_null=True, help_text="nssda")
    rmse_h_m = serializers.FloatField(required=False, allow_null=True, help_text="asprs2023, survey accuracy included")
    rmse_v_m = serializers.FloatField(required=False, allow_null=True, help_text="asprs2023, survey accuracy included")
    rmse_3d_m = serializers.FloatField(required=False, allow_null=True, help_text="asprs2023")


class AccuracyView(APIView):
    """``POST /api/accuracy/``."""

    permission_classes = [IsViewer]

    @extend_schema(
        operation_id="accuracy_statement",
        request=AccuracyInputSerializer,
        responses={
            200: AccuracyReportSerializer,
            400: OpenApiResponse(description="Invalid input (error.code names the problem)."),
            401: OpenApiResponse(description="Not signed in."),
            403: OpenApiResponse(description="Your role does not allow this."),
        },
    )
    def post(self, request):
        incoming = AccuracyInputSerializer(data=request.data)
        incoming.is_valid(raise_exception=True)
        data = incoming.validated_data
        try:
            if "cov_en_m2" in data:
                report = accuracy_report(
                    style=data.get("style"), cov_en_m2=data["cov_en_m2"], var_u_m2=data.get("var_u_m2")
                )
            else:
                if "var_u_m2" in data:
                    raise ComputationInputError("var_u_m2 goes with cov_en_m2.", code="input_choice")
                table = (
                    parse_residuals_csv(data["residuals_csv"])
                    if "residuals_csv" in data
                    else residual_table_from_rows(data["residuals"])
                )
                report = accuracy_report(style=data.get("style"), residuals=table)
        except ComputationInputError as exc:
            raise InvalidInput(exc.message, code=exc.code, details=_json_safe(exc.params)) from exc
        return Response(report_as_json(report))


def _json_safe(params: dict) -> dict:
    return {k: (v if isinstance(v, str | int | float | bool | type(None)) else str(v)) for k, v in params.items()}
