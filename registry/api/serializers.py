"""Serializers of the JSON API.

Output serializers round numbers as the README's API section documents:
latitude/longitude to 9 decimal places of a degree (about 0.1 mm), metres to
3 decimals, sigmas in millimetres to 1 decimal, coordinate epochs to 3 decimals of a
year, velocities in m/yr to 5 decimals (0.01 mm/yr). Covariance elements (m²) are
given unrounded so that a client can propagate them.

Input serializers describe the request bodies for the OpenAPI schema; the services
do the validation (one set of rules for the pages, the API and the importers).
"""

from __future__ import annotations

from drf_spectacular.utils import extend_schema_field
from rest_framework import serializers

from registry.formatting import frame_name
from registry.geodesy.accuracy import sigma_from_variance_m
from registry.models import (
    POSITION_FROZEN_FIELDS,
    CheckStage,
    Mark,
    MarkStatus,
    MonumentKind,
    MovementVerdict,
    Position,
    PositionState,
    SkyView,
    Stability,
)
from registry.selectors.positions import network_accuracy
from registry.services import position_rules
from registry.services.marks import EDITABLE_FIELDS as MARK_EDITABLE_FIELDS
from registry.services.usability import STATES as USABILITY_STATES
from registry.services.usability import assess, mark_usability

# Machine output keeps its precision: 1e-9° (about 0.1 mm), 0.01 mm, 0.001 mm/yr; pages round for reading.
LATLON_DECIMALS = 9
METRE_DECIMALS = 5
SIGMA_MM_DECIMALS = 2
EPOCH_DECIMALS = 6
VELOCITY_M_YR_DECIMALS = 6


class RoundedFloatField(serializers.FloatField):
    """A read-only float rounded to ``decimals`` places (``None`` stays ``None``)."""

    def __init__(self, decimals: int, **kwargs):
        self.decimals = decimals
        kwargs.setdefault("read_only", True)
        super().__init__(**kwargs)

    def to_representation(self, value):
        if value is None:
            return None
        return round(float(value), self.decimals)


def _sigma_mm(variance_m2: float | None) -> float | None:
    if variance_m2 is None:
        return None
    return round(float(sigma_from_variance_m(variance_m2)) * 1000.0, SIGMA_MM_DECIMALS)


class PositionSerializer(serializers.ModelSerializer):
    """A position with its frame (EPSG code and name) and coordinate epoch."""

    mark = serializers.SlugRelatedField(slug_field="code", read_only=True)
    frame_name = serializers.SerializerMethodField()
    epoch_yr = RoundedFloatField(EPOCH_DECIMALS)
    lat_deg = RoundedFloatField(LATLON_DECIMALS)
    lon_deg = RoundedFloatField(LATLON_DECIMALS)
    h_m = RoundedFloatField(METRE_DECIMALS, help_text="Ellipsoidal height, m.")
    sigma_e_mm = serializers.SerializerMethodField()
    sigma_n_mm = serializers.SerializerMethodField()
    sigma_u_mm = serializers.SerializerMethodField()
    network_accuracy_h95_mm = serializers.SerializerMethodField(
        help_text="Horizontal network accuracy at 95 % (FGDC-STD-007.2-1998 circle), mm."
    )
    network_accuracy_u95_mm = serializers.SerializerMethodField(
        help_text="Ellipsoid-height network accuracy at 95 % (1.9600 σ), mm."
    )
    vel_e_m_yr = RoundedFloatField(VELOCITY_M_YR_DECIMALS, allow_null=True)
    vel_n_m_yr = RoundedFloatField(VELOCITY_M_YR_DECIMALS, allow_null=True)
    vel_u_m_yr = RoundedFloatField(VELOCITY_M_YR_DECIMALS, allow_null=True)
    vel_sigma_e_m_yr = RoundedFloatField(VELOCITY_M_YR_DECIMALS, allow_null=True)
    vel_sigma_n_m_yr = RoundedFloatField(VELOCITY_M_YR_DECIMALS, allow_null=True)
    vel_sigma_u_m_yr = RoundedFloatField(VELOCITY_M_YR_DECIMALS, allow_null=True)
    created_by = serializers.SlugRelatedField(slug_field="username", read_only=True, allow_null=True)
    decided_by = serializers.SlugRelatedField(slug_field="username", read_only=True, allow_null=True)

    class Meta:
        model = Position
        fields = [
            "id",
            "mark",
            "state",
            "frame_epsg",
            "frame_name",
            "epoch_yr",
            "lat_deg",
            "lon_deg",
            "h_m",
            "sigma_e_mm",
            "sigma_n_mm",
            "sigma_u_mm",
            "network_accuracy_h95_mm",
            "network_accuracy_u95_mm",
            # covariance and velocity fields in the model's order (models.marks.POSITION_FROZEN_FIELDS)
            *(f for f in POSITION_FROZEN_FIELDS if f.startswith("cov_")),
            *(f for f in POSITION_FROZEN_FIELDS if f.startswith("vel_")),
            "source",
            "note",
            "created_by",
            "created_at",
            "decided_by",
            "decided_at",
            "superseded_at",
            "superseded_by",
        ]
        read_only_fields = fields

    def get_frame_name(self, obj: Position) -> str | None:
        return frame_name(obj.frame_epsg)

    def get_sigma_e_mm(self, obj: Position) -> float | None:
        return _sigma_mm(obj.cov_ee_m2)

    def get_sigma_n_mm(self, obj: Position) -> float | None:
        return _sigma_mm(obj.cov_nn_m2)

    def get_sigma_u_mm(self, obj: Position) -> float | None:
        return _sigma_mm(obj.cov_uu_m2)

    def get_network_accuracy_h95_mm(self, obj: Position) -> float:
        return round(network_accuracy(obj).horizontal_95_m * 1000.0, SIGMA_MM_DECIMALS)

    def get_network_accuracy_u95_mm(self, obj: Position) -> float:
        return round(network_accuracy(obj).ellipsoid_height_95_m * 1000.0, SIGMA_MM_DECIMALS)


class SearchLocationSerializer(serializers.Serializer):
    """Where the mark is searched: the latest published position's latitude/longitude."""

    lat_deg = RoundedFloatField(LATLON_DECIMALS)
    lon_deg = RoundedFloatField(LATLON_DECIMALS)
    frame_epsg = serializers.IntegerField(allow_null=True, read_only=True)
    frame_name = serializers.CharField(allow_null=True, read_only=True)
    epoch_yr = RoundedFloatField(EPOCH_DECIMALS, allow_null=True)


def search_location(mark: Mark, frame_epsg: int | None, epoch_yr: float | None) -> dict | None:
    if mark.search_lat_deg is None or mark.search_lon_deg is None:
        return None
    return {
        "lat_deg": mark.search_lat_deg,
        "lon_deg": mark.search_lon_deg,
        "frame_epsg": frame_epsg,
        "frame_name": frame_name(frame_epsg),
        "epoch_yr": epoch_yr,
    }


class UsabilitySerializer(serializers.Serializer):
    """Whether the mark's coordinates may be used (``registry.services.usability``, the rule the pages show)."""

    usable = serializers.BooleanField(help_text="True when nothing recorded stands against using the mark.")
    state = serializers.ChoiceField(
        choices=list(USABILITY_STATES),
        help_text="Stable code: " + "; ".join(f"{code} = {words}" for code, words in USABILITY_STATES.items()) + ".",
    )
    reason = serializers.CharField(help_text="Why the mark is not for use, in words; empty when usable.")


class MarkSerializer(serializers.ModelSerializer):
    """A mark as listed. ``search_location`` is for finding marks, not for staking out; ``usability`` says
    whether its coordinates may be used, and why not."""

    search_location = serializers.SerializerMethodField()
    usability = serializers.SerializerMethodField()

    class Meta:
        model = Mark
        fields = [
            "code",
            "name",
            "status",
            "suspect_since",
            "suspect_reason",
            # the descriptive fields a manager edits (services.marks.EDITABLE_FIELDS), name already first
            *(f for f in MARK_EDITABLE_FIELDS if f != "name"),
            "usability",
            "search_location",
            "version",
            "created_at",
            "updated_at",
        ]
        read_only_fields = fields

    @extend_schema_field(UsabilitySerializer)
    def get_usability(self, obj: Mark) -> dict:
        # The list's rows carry their latest finding (selectors.marks.mark_search); a single mark reads it.
        if hasattr(obj, "last_visit_finding"):
            u = assess(obj.status, obj.last_visit_finding, suspect_reason=obj.suspect_reason)
        else:
            u = mark_usability(obj)
        return UsabilitySerializer(u.as_dict() | {"usable": u.usable}).data

    @extend_schema_field(SearchLocationSerializer(allow_null=True))
    def get_search_location(self, obj: Mark) -> dict | None:
        loc = search_location(obj, getattr(obj, "src_frame_epsg", None), getattr(obj, "src_epoch_yr", None))
        if not loc:
            return None
        # One nested serializer for every row of a list: building one per row (DRF copies its fields each
        # time) was 40 % of a page of 50 marks.
        nested = self.__dict__.get("_search_location_serializer")
        if nested is None:
            nested = self._search_location_serializer = SearchLocationSerializer()
        return nested.to_representation(loc)


class MarkDetailSerializer(MarkSerializer):
    """A mark with its currently published positions (one per frame)."""

    published_positions = serializers.SerializerMethodField()

    class Meta(MarkSerializer.Meta):
        fields = [*MarkSerializer.Meta.fields, "published_positions"]
        read_only_fields = fields

    @extend_schema_field(PositionSerializer(many=True))
    def get_published_positions(self, obj: Mark) -> list:
        positions = getattr(obj, "published_list", None)
        if positions is None:
            positions = list(obj.positions.filter(state=PositionState.PUBLISHED).order_by("-decided_at", "-pk"))
        return PositionSerializer(positions, many=True).data


# ---- the error shape and GeoJSON (documentation for the schema) ----


class ErrorDetailSerializer(serializers.Serializer):
    code = serializers.CharField(help_text="Machine-readable error code, e.g. invalid, not_found, stale_version.")
    message = serializers.CharField()
    details = serializers.JSONField(
        allow_null=True,
        help_text="Per-field [{code, message}] for invalid input; per-field {yours, theirs, changed_by, changed_at} "
        "for a stale version.",
    )


class ErrorSerializer(serializers.Serializer):
    error = ErrorDetailSerializer()


class GeoJSONPointSerializer(serializers.Serializer):
    type = serializers.ChoiceField(["Point"])
    coordinates = serializers.ListField(
        child=serializers.FloatField(), min_length=2, max_length=2, help_text="[longitude, latitude], degrees."
    )


class MarkFeaturePropertiesSerializer(serializers.Serializer):
    code = serializers.CharField()
    name = serializers.CharField()
    status = serializers.CharField()
    monument = serializers.CharField()
    stability = serializers.CharField()
    sky_view = serializers.CharField()
    frame_epsg = serializers.IntegerField(allow_null=True)
    frame_name = serializers.CharField(allow_null=True)
    epoch_yr = serializers.FloatField(allow_null=True)
    usable = serializers.BooleanField(help_text="As usability.usable of the JSON list.")
    usability_state = serializers.ChoiceField(
        choices=list(USABILITY_STATES), help_text="As usability.state of the JSON list (stable code)."
    )
    usability_reason = serializers.CharField(help_text="Why not for use, in words; empty when usable.")
    version = serializers.IntegerField()


class MarkFeatureSerializer(serializers.Serializer):
    type = serializers.ChoiceField(["Feature"])
    id = serializers.CharField()
    geometry = GeoJSONPointSerializer(allow_null=True)
    properties = MarkFeaturePropertiesSerializer()


class MarkFeatureCollectionSerializer(serializers.Serializer):
    type = serializers.ChoiceField(["FeatureCollection"])
    features = MarkFeatureSerializer(many=True)
    coordinate_note = serializers.CharField()
    count = serializers.IntegerField()
    next = serializers.URLField(allow_null=True)
    previous = serializers.URLField(allow_null=True)


# ---- request bodies (documentation for the schema; the services validate) ----


class _MarkDescriptionInput(serializers.Serializer):
    """The fields that describe a mark, the same when it is created and when it is edited."""

    name = serializers.CharField(max_length=120, required=False, allow_blank=True)
    access_directions = serializers.CharField(required=False, allow_blank=True, help_text="Access directions.")
    monument = serializers.ChoiceField(MonumentKind.choices, required=False, help_text="Kind of monument.")
    monument_detail = serializers.CharField(
        max_length=200, required=False, allow_blank=True, help_text="How the monument is set."
    )
    marking = serializers.CharField(
        max_length=120, required=False, allow_blank=True, help_text="The marking as inscribed on the mark."
    )
    stability = serializers.ChoiceField(Stability.choices, required=False, help_text="Expected stability.")
    sky_view = serializers.ChoiceField(SkyView.choices, required=False)
    keeper = serializers.CharField(
        max_length=120, required=False, allow_blank=True, help_text="Who looks after the mark or its land."
    )
    notes = serializers.CharField(required=False, allow_blank=True)


class MarkCreateInput(_MarkDescriptionInput):
    """The earlier names (to_reach, monument_type, setting, stamping, custodian) are still accepted (deprecated)."""

    code = serializers.CharField(max_length=32, help_text="1–32 characters: capital letters, digits, '_', '.', '-'.")
    status = serializers.ChoiceField(
        MarkStatus.choices, required=False, help_text="Not suspect: a mark is not created suspect (refused)."
    )


class MarkPatchInput(_MarkDescriptionInput):
    """The earlier names (to_reach, monument_type, setting, stamping, custodian) are still accepted (deprecated)."""

    version = serializers.IntegerField(min_value=1, help_text="The version you started from (optimistic concurrency).")


class MarkStatusInput(serializers.Serializer):
    version = serializers.IntegerField(min_value=1)
    status = serializers.ChoiceField(
        MarkStatus.choices,
        help_text="Not suspect (refused: a visit or a check sets it). A suspect mark is made active only by "
        "clearing it (clear-suspect) or by publishing a new position (refused here: suspect_needs_clearance).",
    )
    note = serializers.CharField(
        required=False, allow_blank=True, help_text="Required when retiring or reporting destroyed."
    )


class MarkClearSuspectInput(serializers.Serializer):
    version = serializers.IntegerField(min_value=1, help_text="The version you started from (optimistic concurrency).")
    note = serializers.CharField(help_text="Why the mark can be used again (required).")


class PositionProposeInput(serializers.Serializer):
    frame_epsg = serializers.IntegerField(help_text="EPSG code of a geographic 3D CRS, e.g. 7912, 9989, 6319.")
    epoch_yr = serializers.FloatField(help_text="Coordinate epoch, decimal year (1900–2100).")
    lat_deg = serializers.FloatField(min_value=-90, max_value=90)
    lon_deg = serializers.FloatField(min_value=-180, max_value=180)
    h_m = serializers.FloatField(help_text="Ellipsoidal height, m.")
    cov_ee_m2 = serializers.FloatField(
        min_value=0, max_value=position_rules.VARIANCE_MAX_M2, help_text="East variance, m² (> 0; σ ≤ 100 m)."
    )
    cov_nn_m2 = serializers.FloatField(
        min_value=0, max_value=position_rules.VARIANCE_MAX_M2, help_text="North variance, m² (> 0; σ ≤ 100 m)."
    )
    cov_uu_m2 = serializers.FloatField(
        min_value=0, max_value=position_rules.VARIANCE_MAX_M2, help_text="Up variance, m² (> 0; σ ≤ 100 m)."
    )
    cov_en_m2 = serializers.FloatField(required=False, default=0.0)
    cov_eu_m2 = serializers.FloatField(required=False, default=0.0)
    cov_nu_m2 = serializers.FloatField(required=False, default=0.0)
    vel_e_m_yr = serializers.FloatField(
        required=False,
        allow_null=True,
        min_value=-position_rules.VELOCITY_MAX_M_YR,
        max_value=position_rules.VELOCITY_MAX_M_YR,
    )
    vel_n_m_yr = serializers.FloatField(
        required=False,
        allow_null=True,
        min_value=-position_rules.VELOCITY_MAX_M_YR,
        max_value=position_rules.VELOCITY_MAX_M_YR,
    )
    vel_u_m_yr = serializers.FloatField(
        required=False,
        allow_null=True,
        min_value=-position_rules.VELOCITY_MAX_M_YR,
        max_value=position_rules.VELOCITY_MAX_M_YR,
    )
    vel_sigma_e_m_yr = serializers.FloatField(
        required=False, allow_null=True, min_value=0, max_value=position_rules.VELOCITY_MAX_M_YR
    )
    vel_sigma_n_m_yr = serializers.FloatField(
        required=False, allow_null=True, min_value=0, max_value=position_rules.VELOCITY_MAX_M_YR
    )
    vel_sigma_u_m_yr = serializers.FloatField(
        required=False, allow_null=True, min_value=0, max_value=position_rules.VELOCITY_MAX_M_YR
    )
    source = serializers.CharField(max_length=200)
    note = serializers.CharField(required=False, allow_blank=True)


class DecisionInput(serializers.Serializer):
    note = serializers.CharField(required=False, allow_blank=True, help_text="Reason; required to reject or withdraw.")


class PublishInput(serializers.Serializer):
    note = serializers.CharField(
        required=False, allow_blank=True, help_text="Reason; required when the movement check shows possible movement."
    )
    compared_with = serializers.IntegerField(
        required=False,
        allow_null=True,
        help_text=(
            "The published position you compared the proposal with (null: none was published). Omitted: the one "
            "of the check made when the position was proposed. If the mark's published position is another one "
            "now, publishing is refused (409, compared_with_changed)."
        ),
    )


class MovementAxesMm(serializers.Serializer):
    east = serializers.FloatField(allow_null=True)
    north = serializers.FloatField(allow_null=True)
    up = serializers.FloatField(allow_null=True)


class MovementCheckSerializer(serializers.Serializer):
    """A movement check (proposed against published), in millimetres; see the README."""

    verdict = serializers.ChoiceField(choices=MovementVerdict.choices)
    verdict_words = serializers.CharField()
    compared_with = serializers.IntegerField(allow_null=True)
    level = serializers.FloatField(help_text="Level α of the one global 3D test.")
    power = serializers.FloatField(help_text="Power used for the detectable movement.")
    d_east_mm = serializers.FloatField(allow_null=True)
    d_north_mm = serializers.FloatField(allow_null=True)
    d_up_mm = serializers.FloatField(allow_null=True)
    t_global = serializers.FloatField(allow_null=True)
    dof = serializers.IntegerField(allow_null=True)
    critical = serializers.FloatField(allow_null=True)
    p_value = serializers.FloatField(allow_null=True)
    moved_horizontal = serializers.BooleanField(allow_null=True)
    moved_vertical = serializers.BooleanField(allow_null=True)
    detectable_mm = MovementAxesMm(allow_null=True)
    detectable_above_threshold = serializers.BooleanField()
    added_sigma_mm = MovementAxesMm()
    used_velocity = serializers.BooleanField()
    frame_chain = serializers.ListField(child=serializers.CharField())
    warnings = serializers.ListField(child=serializers.CharField())
    reason = serializers.CharField(allow_blank=True)
    stage = serializers.ChoiceField(choices=CheckStage.choices, required=False)
    checked_at = serializers.DateTimeField(required=False)


class PublishedPositionSerializer(PositionSerializer):
    """A published position with the movement check stored with the decision."""

    movement_check = MovementCheckSerializer(read_only=True, allow_null=True)

    class Meta(PositionSerializer.Meta):
        fields = [*PositionSerializer.Meta.fields, "movement_check"]


class MovementComparisonSerializer(serializers.Serializer):
    current = MovementCheckSerializer(help_text="The comparison with the mark's published position now (not stored).")
    stored = MovementCheckSerializer(
        many=True, help_text="Checks stored when proposed and at publication, newest first."
    )
