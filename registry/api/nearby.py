"""``GET /api/marks/near/``: marks within a radius of a point, nearest first.

A thin view: the input serializer checks the query, the selector
(:func:`registry.selectors.nearby.marks_near`) does the search, the answer carries the
search, the marks and the usual cautions. Reading needs the viewer ability (the API's
default permission). Rounding: latitude/longitude to 9 decimal places of a degree,
distances to 3 decimals of a metre (mm), azimuths to 6 decimal places of a degree.
"""

from __future__ import annotations

import datetime as dt
import json

from drf_spectacular.utils import OpenApiResponse, extend_schema
from rest_framework import serializers
from rest_framework.renderers import JSONRenderer
from rest_framework.response import Response
from rest_framework.views import APIView

from registry.models import MarkStatus, Stability
from registry.selectors import nearby_filters as lim
from registry.selectors.nearby import CAUTIONS, SEARCH_LOCATION_NOTE, marks_near
from registry.selectors.read_cache import cached_read


class _ChoiceList(serializers.CharField):
    """One or more choices, comma-separated or repeated (``?status=active,retired``)."""

    def __init__(self, *, choices, **kwargs):
        self.allowed = tuple(choices)
        super().__init__(**kwargs)

    def to_internal_value(self, data):
        items = [s.strip() for part in (data if isinstance(data, list) else [data]) for s in str(part).split(",")]
        items = [s for s in items if s]
        bad = [s for s in items if s not in self.allowed]
        if bad or not items:
            raise serializers.ValidationError(f"Choose from: {', '.join(self.allowed)}.", code="invalid_choice")
        return items


class NearbyQuery(serializers.Serializer):
    lat = serializers.FloatField(min_value=-90.0, max_value=90.0, help_text="Latitude of the search point, degrees.")
    lon = serializers.FloatField(min_value=-180.0, max_value=180.0, help_text="Longitude of the search point, degrees.")
    radius_km = serializers.FloatField(
        min_value=lim.RADIUS_MIN_KM, max_value=lim.RADIUS_MAX_KM, help_text="Search radius, km (geodesic, GRS80)."
    )
    limit = serializers.IntegerField(
        min_value=1, max_value=lim.ASKED_LIMIT_MAX, default=lim.DEFAULT_LIMIT, help_text="At most this many marks."
    )
    status = _ChoiceList(choices=MarkStatus.values, required=False, help_text="Mark statuses, comma-separated.")
    stability = _ChoiceList(
        choices=Stability.values, required=False, help_text="Monument stabilities, comma-separated."
    )
    frame_epsg = serializers.IntegerField(
        required=False,
        min_value=lim.FRAME_EPSG_MIN,
        help_text="Only marks with a published position in this frame (EPSG code).",
    )
    intact_visit_within_yr = serializers.FloatField(
        required=False,
        min_value=lim.INTACT_VISIT_MIN_YR,
        max_value=lim.INTACT_VISIT_MAX_YR,
        help_text="Only marks a visit found intact within N years. (The earlier name good_visit_within_yr is still accepted.)",
    )
    accuracy_class_max_m = serializers.FloatField(
        required=False,
        min_value=lim.ACCURACY_MIN_M,
        max_value=lim.ACCURACY_MAX_M,
        help_text="Only marks with a published position (in frame_epsg, if given) whose FGDC horizontal 95 % "
        "accuracy is at most this value, m.",
    )
    usable_only = serializers.BooleanField(
        required=False,
        help_text="Only usable marks (status and latest visit, the rule the pages use), applied before the "
        "limit: limit=N gives the N nearest usable marks.",
    )


class NearbyMarkOut(serializers.Serializer):
    code = serializers.CharField()
    name = serializers.CharField()
    status = serializers.CharField()
    stability = serializers.CharField()
    monument = serializers.CharField()
    lat_deg = serializers.FloatField(help_text="Search location (current published position), degrees.")
    lon_deg = serializers.FloatField()
    distance_m = serializers.FloatField(help_text="Geodesic distance on GRS80 from the search point, m (3 decimals).")
    azimuth_deg = serializers.FloatField(
        allow_null=True, help_text="Azimuth at the search point, degrees; null under 1 mm."
    )


class NearbySearchOut(serializers.Serializer):
    lat_deg = serializers.FloatField()
    lon_deg = serializers.FloatField()
    radius_m = serializers.FloatField()
    limit = serializers.IntegerField()
    filters = serializers.DictField()
    ellipsoid = serializers.CharField()
    location_note = serializers.CharField()


class NearbyOut(serializers.Serializer):
    search = NearbySearchOut()
    count = serializers.IntegerField()
    left_out_not_usable = serializers.IntegerField(
        help_text="With usable_only: marks not for use passed over (nearer than the last mark returned, or all "
        "within the radius when fewer than the limit were found); 0 otherwise."
    )
    marks = NearbyMarkOut(many=True)
    cautions = serializers.ListField(child=serializers.CharField())


_FILTERS = ("status", "stability", "frame_epsg", "intact_visit_within_yr", "accuracy_class_max_m", "usable_only")


class EncodedJSON:
    """An answer already encoded by DRF's JSON renderer (``encoded``, UTF-8 bytes)."""

    __slots__ = ("encoded",)

    def __init__(self, encoded: bytes):
        self.encoded = encoded


def _encode(answer: dict) -> bytes:
    """``answer`` as DRF's JSON renderer writes it by default (compact, no indent)."""
    return JSONRenderer().render(answer, "application/json", {})


class EncodedJSONRenderer(JSONRenderer):
    """DRF's JSON renderer; an :class:`EncodedJSON` answer is sent as it was encoded.

    Encoding the cached nearby answer (twenty marks and the cautions) on every request cost more CPU
    than finding it. A client asking for indented JSON (``Accept: application/json; indent=2``) gets it
    encoded again from the same answer, as before.
    """

    def render(self, data, accepted_media_type=None, renderer_context=None):
        if isinstance(data, EncodedJSON):
            if self.get_indent(accepted_media_type, renderer_context or {}) is None:
                return data.encoded
            data = json.loads(data.encoded)
        return super().render(data, accepted_media_type, renderer_context)


class MarksNearView(APIView):
    renderer_classes = [EncodedJSONRenderer]

    @extend_schema(
        summary="Marks near a point",
        parameters=[NearbyQuery],
        responses={
            200: NearbyOut,
            400: OpenApiResponse(description='Invalid input: {"error": {"code", "message", "details"}}.'),
            403: OpenApiResponse(description="Your role does not allow reading the registry."),
        },
    )
    def get(self, request):
        # The answer depends on the query, the registry's state (a published position moves a search
        # location: the newest audit row) and the date (the visit filter counts years to today): cached
        # under all three (registry.selectors.read_cache), and under the query as sent, so that a query
        # answered before is neither validated nor searched again. One that is not valid raises before
        # anything is cached.
        # What is kept is the answer as JSON (encoded once, then sent as it is: EncodedJSONRenderer).
        raw = tuple(sorted((k, tuple(v)) for k, v in request.query_params.lists()))
        encoded = cached_read("marks-near-json", (raw, dt.date.today()), lambda: _encode(self._answer(request)))
        return Response(EncodedJSON(encoded))

    def _answer(self, request) -> dict:
        params = request.query_params.dict()
        if "good_visit_within_yr" in params and "intact_visit_within_yr" not in params:
            params["intact_visit_within_yr"] = params.pop("good_visit_within_yr")  # the earlier name (deprecated)
        query = NearbyQuery(data=params | self._lists(request))
        query.is_valid(raise_exception=True)
        q = query.validated_data
        filters = {k: q[k] for k in _FILTERS if k in q}
        nearby = marks_near(
            lat_deg=q["lat"], lon_deg=q["lon"], radius_m=q["radius_km"] * 1000.0, limit=q["limit"], **filters
        )
        found = [m.as_dict() for m in nearby]
        return {
            "search": {
                "lat_deg": round(q["lat"], 9),
                "lon_deg": round(q["lon"], 9),
                "radius_m": round(q["radius_km"] * 1000.0, 3),
                "limit": q["limit"],
                "filters": filters,
                "ellipsoid": "GRS80",
                "location_note": SEARCH_LOCATION_NOTE,
            },
            "count": len(found),
            "left_out_not_usable": nearby.left_out_not_usable,
            "marks": found,
            "cautions": list(CAUTIONS),
        }

    @staticmethod
    def _lists(request) -> dict:
        """Repeated ``status`` / ``stability`` parameters, kept as lists."""
        return {k: request.query_params.getlist(k) for k in ("status", "stability") if k in request.query_params}
