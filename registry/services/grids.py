"""Writes on custom grids: a manager stores a low-distortion projection or a scaled ground system once.

``custom_grid_create`` checks the actor's MANAGE ability, validates every parameter with a coded
``ValidationError`` (the parameters as :class:`registry.geodesy.customgrid.CustomGridDefinition`
names them), builds the grid with PROJ (:func:`registry.geodesy.customgrid.build_custom_grid`: a
round trip through it at the middle of its area of use must close and the grid must be conformal)
and stores it with an audit event, in one transaction. A stored grid is never edited: coordinates
computed on it stay reproducible; a changed design is stored as a new grid under a new code.
"""

from __future__ import annotations

import math
from typing import Any

from django.core.exceptions import ValidationError

from registry.geodesy.customgrid import CustomGridError, build_custom_grid, proj_definition
from registry.models import GRID_CODE_VALIDATOR, CustomGrid, GridMethod, GridUnit
from registry.roles import Ability
from registry.selectors.grids import definition_of
from registry.services._input import field_error
from registry.services.access import require_ability
from registry.services.audit import create_audited
from registry.services.limits import NOTES_MAX

NUMBER_FIELDS = (
    "lat0_deg",
    "lon0_deg",
    "k0",
    "false_easting",
    "false_northing",
    "anchor_lat_deg",
    "anchor_lon_deg",
    "scale",
    "area_west_deg",
    "area_south_deg",
    "area_east_deg",
    "area_north_deg",
)
FIELDS = ("code", "name", "notes", "frame_epsg", "method", "unit", "utm_zone", "utm_south", *NUMBER_FIELDS)
REQUIRED = (
    "code",
    "name",
    "frame_epsg",
    "method",
    "area_west_deg",
    "area_south_deg",
    "area_east_deg",
    "area_north_deg",
)


def _number(field: str, value: Any) -> float | None:
    if value is None or (isinstance(value, str) and not value.strip()):
        return None
    if isinstance(value, bool):
        raise field_error(field, "Expected a number.", "invalid_number")
    try:
        x = float(value.strip() if isinstance(value, str) else value)
    except (TypeError, ValueError):
        raise field_error(field, "Expected a number.", "invalid_number") from None
    if not math.isfinite(x):
        raise field_error(field, "Expected a finite number.", "not_finite")
    return x


def _integer(field: str, value: Any) -> int | None:
    x = _number(field, value)
    if x is None:
        return None
    if x != int(x):
        raise field_error(field, "Expected a whole number.", "invalid_integer")
    return int(x)


def _clean(data: Any) -> dict[str, Any]:
    if not isinstance(data, dict):
        raise ValidationError("Send the fields as an object.", code="invalid_payload")
    errors: dict[str, list] = {}
    cleaned: dict[str, Any] = {}
    for key, value in data.items():
        try:
            if key not in FIELDS:
                raise field_error(str(key), f"Unknown field '{key}'.", "unknown_field")
            if key == "code":
                code = value.strip().upper() if isinstance(value, str) else value
                if not isinstance(code, str) or not code:
                    raise field_error(key, "A grid needs a code.", "required")
                try:
                    GRID_CODE_VALIDATOR(code)
                except ValidationError as exc:
                    raise field_error(key, exc.messages[0], "invalid_code") from None
                if code == "UTM":
                    raise field_error(key, "'UTM' means the automatic UTM zone; choose another code.", "invalid_code")
                cleaned[key] = code
            elif key in ("name", "notes"):
                text = "" if value is None else value
                if not isinstance(text, str):
                    raise field_error(key, "Expected text.", "invalid_type")
                limit = 200 if key == "name" else NOTES_MAX
                if len(text.strip()) > limit:
                    raise field_error(key, f"At most {limit} characters.", "max_length")
                cleaned[key] = text.strip()
            elif key == "method":
                if value not in GridMethod.values:
                    raise field_error(
                        key, f"{value!r} is not one of: {', '.join(GridMethod.values)}.", "invalid_choice"
                    )
                cleaned[key] = value
            elif key == "unit":
                if value in (None, ""):
                    value = GridUnit.METRE
                if value not in GridUnit.values:
                    raise field_error(key, f"{value!r} is not one of: {', '.join(GridUnit.values)}.", "invalid_choice")
                cleaned[key] = value
            elif key == "utm_south":
                if isinstance(value, str):
                    value = value.strip().lower() in ("1", "true", "yes", "on", "s", "south")
                cleaned[key] = bool(value)
            elif key in ("frame_epsg", "utm_zone"):
                cleaned[key] = _integer(key, value)
            else:
                cleaned[key] = _number(key, value)
        except ValidationError as exc:
            for field, items in exc.error_dict.items():
                errors.setdefault(field, []).extend(items)
    missing = [f for f in REQUIRED if cleaned.get(f) in (None, "") and f not in errors]
    for f in missing:
        errors.setdefault(f, []).append(
            ValidationError("This field is required.", code="required", params={"field": f})
        )
    if errors:
        raise ValidationError(errors)
    return cleaned


def custom_grid_create(*, actor, data: dict) -> CustomGrid:
    """Store a custom grid after building it with PROJ.

    Required: ``code``, ``name``, ``frame_epsg``, ``method`` and the area of use
    (``area_west_deg``, ``area_south_deg``, ``area_east_deg``, ``area_north_deg``); then per
    method ``lat0_deg``, ``lon0_deg``, ``k0``, ``false_easting``, ``false_northing`` (in ``unit``),
    or for ``utm_scaled`` ``utm_zone``, ``utm_south``, ``anchor_lat_deg``, ``anchor_lon_deg``,
    ``scale``.

    Raises
    ------
    registry.errors.PermissionDeniedError
        Unless the actor may manage.
    django.core.exceptions.ValidationError
        Codes: ``required``, ``unknown_field``, ``invalid_code``, ``unique``, ``invalid_number``,
        ``not_finite``, ``invalid_integer``, ``invalid_choice``, and those of the grid builder
        (``out_of_range``, ``bad_area``, ``invalid_frame``, ``proj_refused``) on the field at fault.
    """
    require_ability(actor, Ability.MANAGE)
    cleaned = _clean(data)
    grid = CustomGrid(**cleaned, created_by=actor if getattr(actor, "is_authenticated", False) else None)
    defn = definition_of(grid)
    try:
        build_custom_grid(defn)
        grid.proj_definition = proj_definition(defn)
    except CustomGridError as exc:
        raise field_error(exc.field or "method", str(exc), exc.code) from None
    return create_audited(grid, actor=actor, action="custom_grid_create", what="grid")
