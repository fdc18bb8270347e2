"""API views for positions: list and propose under a mark; read; publish, reject, withdraw.

Reading needs the viewer ability; proposing the technician ability (record
fieldwork); publishing, rejecting and withdrawing the manager ability.
"""

from __future__ import annotations

from django.core.exceptions import ValidationError
from drf_spectacular.types import OpenApiTypes
from drf_spectacular.utils import OpenApiParameter, OpenApiResponse, extend_schema
from rest_framework import serializers
from rest_framework import status as http_status
from rest_framework.permissions import SAFE_METHODS, BasePermission
from rest_framework.response import Response
from rest_framework.views import APIView

from registry.api.body import request_body
from registry.api.marks import ERROR_RESPONSES
from registry.api.pagination import RegistryPagination
from registry.api.permissions import IsManager
from registry.api.serializers import (
    DecisionInput,
    ErrorSerializer,
    MovementCheckSerializer,
    MovementComparisonSerializer,
    PositionProposeInput,
    PositionSerializer,
    PublishedPositionSerializer,
    PublishInput,
)
from registry.models import PositionState
from registry.roles import Ability, has_ability
from registry.selectors.positions import mark_positions, position_for_display
from registry.selectors.proposals import proposals_queue
from registry.services.access import access_mark_by_code, access_position_by_id
from registry.services.combination import positions_combine, positions_velocity
from registry.services.movement import comparison_target, movement_compare
from registry.services.movement_checks import latest_check, stored_check_dict
from registry.services.positions import (
    AS_PROPOSED,
    position_propose,
    position_publish,
    position_reject,
    position_withdraw,
)

STATE_CONFLICT = OpenApiResponse(
    ErrorSerializer, description="The position is not in a state that allows this (code invalid_state)."
)


class ReadViewerWriteRecorder(BasePermission):
    """Reads need the viewer ability, writes the record-fieldwork ability."""

    def has_permission(self, request, view) -> bool:
        if request.method in SAFE_METHODS:
            return has_ability(request.user, Ability.VIEW)
        return has_ability(request.user, Ability.RECORD)

    def has_object_permission(self, request, view, obj) -> bool:
        return self.has_permission(request, view)


def _position_out(position_id: int) -> dict:
    return PositionSerializer(position_for_display(position_id=position_id)).data


class MarkPositionsView(APIView):
    """``GET /api/marks/<code>/positions/`` (every state, newest first); ``POST`` to propose one."""

    permission_classes = [ReadViewerWriteRecorder]
    pagination_class = RegistryPagination

    @extend_schema(
        operation_id="marks_positions_list",
        parameters=[OpenApiParameter("state", OpenApiTypes.STR, enum=PositionState.values)],
        responses={200: PositionSerializer(many=True), 401: ERROR_RESPONSES[401], 404: ERROR_RESPONSES[404]},
    )
    def get(self, request, code: str):
        mark = access_mark_by_code(request.user, code)
        state = request.query_params.get("state", "").strip()
        if state and state not in PositionState.values:
            raise ValidationError(
                {"state": ValidationError("Unknown state %(value)r.", code="invalid_choice", params={"value": state})}
            )
        qs = mark_positions(mark=mark, state=state)
        paginator = self.pagination_class()
        page = paginator.paginate_queryset(qs, request, view=self)
        return paginator.get_paginated_response(PositionSerializer(page, many=True).data)

    @extend_schema(
        operation_id="marks_positions_propose",
        request=PositionProposeInput,
        responses={
            201: PositionSerializer,
            409: OpenApiResponse(ErrorSerializer, description="The mark is destroyed (code mark_destroyed)."),
            **ERROR_RESPONSES,
        },
    )
    def post(self, request, code: str):
        position = position_propose(actor=request.user, mark_code=code, data=request_body(request))
        return Response(_position_out(position.pk), status=http_status.HTTP_201_CREATED)


class PositionDetailView(APIView):
    """``GET /api/positions/<id>/``."""

    @extend_schema(
        operation_id="positions_retrieve",
        responses={200: PositionSerializer, 401: ERROR_RESPONSES[401], 404: ERROR_RESPONSES[404]},
    )
    def get(self, request, position_id: int):
        position = access_position_by_id(request.user, position_id)
        return Response(_position_out(position.pk))


class _DecisionView(APIView):
    permission_classes = [IsManager]
    http_method_names = ["post", "options"]

    def decide(self, request, position_id: int):  # pragma: no cover - overridden
        raise NotImplementedError

    def post(self, request, position_id: int):
        position = self.decide(request, position_id)
        return Response(_position_out(position.pk))


_DECISION_RESPONSES = {200: PositionSerializer, 409: STATE_CONFLICT, **ERROR_RESPONSES}


class PositionPublishView(_DecisionView):
    """``POST /api/positions/<id>/publish/``: publish a proposed position; supersedes the one before.

    The answer carries the movement check stored with the decision (``movement_check``).
    """

    @extend_schema(
        operation_id="positions_publish",
        request=PublishInput,
        responses={
            200: PublishedPositionSerializer,
            409: OpenApiResponse(
                ErrorSerializer,
                description=(
                    "Not a proposed position (invalid_state), the mark is destroyed (mark_destroyed), or the mark's "
                    "published position changed since the comparison (compared_with_changed)."
                ),
            ),
            **ERROR_RESPONSES,
        },
    )
    def post(self, request, position_id: int):
        body = request_body(request)
        compared_with = body["compared_with"] if "compared_with" in body else AS_PROPOSED
        position = position_publish(
            actor=request.user, position_id=position_id, note=body.get("note", ""), compared_with=compared_with
        )
        data = _position_out(position.pk)
        check = latest_check(position.pk, "published")
        data["movement_check"] = None if check is None else MovementCheckSerializer(stored_check_dict(check)).data
        return Response(data)


class PositionMovementView(APIView):
    """``GET /api/positions/<id>/movement-check/``: compare with the mark's published position now, and the stored checks."""

    @extend_schema(
        operation_id="positions_movement_check",
        responses={200: MovementComparisonSerializer, 401: ERROR_RESPONSES[401], 404: ERROR_RESPONSES[404]},
    )
    def get(self, request, position_id: int):
        position = access_position_by_id(request.user, position_id)
        current = movement_compare(position=position, published=comparison_target(position))
        stored = [stored_check_dict(c) for c in position.movement_checks.order_by("-created_at", "-id")]
        return Response(MovementComparisonSerializer({"current": current.as_dict(), "stored": stored}).data)


class PositionRejectView(_DecisionView):
    """``POST /api/positions/<id>/reject/``: reject a proposed position (reason in ``note``)."""

    @extend_schema(operation_id="positions_reject", request=DecisionInput, responses=_DECISION_RESPONSES)
    def post(self, request, position_id: int):
        return super().post(request, position_id)

    def decide(self, request, position_id: int):
        return position_reject(actor=request.user, position_id=position_id, note=request_body(request).get("note", ""))


class PositionWithdrawView(_DecisionView):
    """``POST /api/positions/<id>/withdraw/``: withdraw a published position (reason in ``note``)."""

    @extend_schema(operation_id="positions_withdraw", request=DecisionInput, responses=_DECISION_RESPONSES)
    def post(self, request, position_id: int):
        return super().post(request, position_id)

    def decide(self, request, position_id: int):
        return position_withdraw(
            actor=request.user, position_id=position_id, note=request_body(request).get("note", "")
        )


class ProposalQueueItemSerializer(serializers.Serializer):
    mark = serializers.CharField()
    mark_status = serializers.CharField()
    stability = serializers.CharField(allow_blank=True)
    suspect_since = serializers.DateField(allow_null=True)
    suspect_reason = serializers.CharField(allow_blank=True)
    position = PositionSerializer(allow_null=True)
    movement_check = MovementCheckSerializer(allow_null=True)
    recent_visits = serializers.ListField(child=serializers.DictField())
    source_occupations = serializers.ListField(child=serializers.IntegerField())


class ProposalQueueView(APIView):
    """``GET /api/proposals/``: proposed positions (oldest first) and suspect marks without one (managers)."""

    permission_classes = [IsManager]

    @extend_schema(
        operation_id="proposals_list",
        responses={
            200: ProposalQueueItemSerializer(many=True),
            401: ERROR_RESPONSES[401],
            403: ERROR_RESPONSES[403],
        },
    )
    def get(self, request):
        out = []
        for item in proposals_queue():
            out.append(
                {
                    "mark": item.mark.code,
                    "mark_status": item.mark.status,
                    "stability": item.mark.stability or "",
                    "suspect_since": item.mark.suspect_since,
                    "suspect_reason": item.mark.suspect_reason or "",
                    "position": item.position,
                    "movement_check": stored_check_dict(item.check) if item.check else None,
                    "recent_visits": [
                        {"visited_on": v.visited_on.isoformat(), "finding": v.finding} for v in item.visits
                    ],
                    "source_occupations": [o.pk for o in item.occupations],
                }
            )
        return Response(ProposalQueueItemSerializer(out, many=True).data)


class CombineInput(serializers.Serializer):
    position_ids = serializers.ListField(child=serializers.IntegerField(), help_text="the solutions to use")
    velocity = serializers.BooleanField(
        required=False, default=False, help_text="fit position and velocity (≥ 3 solutions over ≥ 2.5 yr)"
    )


class MarkCombineView(APIView):
    """``POST /api/marks/<code>/combine/``: propose the weighted combination (or velocity fit) of solutions."""

    permission_classes = [IsManager]

    @extend_schema(
        operation_id="marks_positions_combine",
        request=CombineInput,
        responses={201: PositionSerializer, **ERROR_RESPONSES},
    )
    def post(self, request, code: str):
        body = request_body(request)
        service = positions_velocity if body.get("velocity") is True else positions_combine
        ids = body.get("position_ids")
        if not isinstance(ids, list):
            raise ValidationError(
                {"position_ids": ValidationError("Give a list of position ids.", code="invalid_type")}
            )
        proposal, _ = service(actor=request.user, mark_code=code, position_ids=ids)
        return Response(_position_out(proposal.pk), status=http_status.HTTP_201_CREATED)
