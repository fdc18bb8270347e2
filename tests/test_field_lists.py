"""Field lists that used to be written out in several places come from one source (review S-10).

Sources: ``services.marks.EDITABLE_FIELDS`` (mark), ``models.marks.POSITION_FROZEN_FIELDS`` and
``POSITION_MUTABLE_FIELDS`` (position). The trigger lists are checked in tests/models/test_position_history.py.
"""

from __future__ import annotations

from registry.api.serializers import MarkSerializer, PositionSerializer
from registry.models import POSITION_FROZEN_FIELDS, POSITION_MUTABLE_FIELDS, Mark, Position
from registry.services.marks import CREATE_FIELDS, EDITABLE_FIELDS
from registry.web.forms import MARK_FORM_FIELDS


def _api_name(attname: str) -> str:
    return attname.removesuffix("_id") if attname.endswith("_id") else attname


def test_mark_form_edits_exactly_what_the_service_accepts():
    assert MARK_FORM_FIELDS == ("code", *EDITABLE_FIELDS)
    assert set(MARK_FORM_FIELDS) <= set(CREATE_FIELDS)


def test_mark_api_shows_every_editable_field_once():
    fields = MarkSerializer.Meta.fields
    assert len(fields) == len(set(fields))
    assert set(EDITABLE_FIELDS) | {"code", "status", "version"} <= set(fields)
    concrete = {f.name for f in Mark._meta.concrete_fields} - {"id", "search_lat_deg", "search_lon_deg"}
    assert concrete <= set(fields)  # search_lat/lon_deg are shown as search_location


def test_position_api_shows_every_stored_field_once():
    fields = PositionSerializer.Meta.fields
    assert len(fields) == len(set(fields))
    stored = {_api_name(f) for f in (*POSITION_FROZEN_FIELDS, *POSITION_MUTABLE_FIELDS)} | {"id"}
    assert stored == {_api_name(f.attname) for f in Position._meta.concrete_fields}
    assert stored <= set(fields)
