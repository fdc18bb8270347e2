"""How long a piece of text may be: one place for every text field's maximum.

A 15 MB visit note was once accepted and made the mark page 31 MB. Now every text a user can
enter has a maximum, checked by the services before anything is saved (so the pages, the API,
the commands and imports all obey it) and listed in the README ("Limits"):

- short text fields (names, codes, equipment, sources, captions...) keep the ``max_length`` of
  their model field, checked by ``full_clean``;
- free text (a mark's description and notes, visit and occupation notes, a position's note, a
  job's notes: every ``TextField`` a user fills in) at most :data:`NOTES_MAX` characters;
- a reason given for an action (reject, withdraw, a status change, unlock...) at most
  :data:`REASON_MAX` characters (``parse_note``).

The rule is keyed by the kind of field, not by its name: any ``TextField`` of a model gets
:data:`NOTES_MAX` unless :data:`TEXT_MAX` names a tighter limit, so renamed or new fields are
covered too. Pages show at most :data:`SHOWN_MAX` characters of a free text in a list and link
to the whole text (``registry_format.clip``).
"""

from __future__ import annotations

from django.core.exceptions import ValidationError
from django.db import models

#: Free text: descriptions, directions, notes (about eight printed pages).
NOTES_MAX = 20_000
#: A reason given for an action.
REASON_MAX = 2_000
#: Characters of a free text a page shows before "show all".
SHOWN_MAX = 1_000
#: Tighter limits for particular text fields: {model name: {field name: characters}}.
TEXT_MAX: dict[str, dict[str, int]] = {}


def text_limit(model: type[models.Model], field_name: str) -> int | None:
    """The maximum number of characters of ``model.field_name`` (``None``: not a text field)."""
    field = model._meta.get_field(field_name)
    if isinstance(field, models.TextField):
        return TEXT_MAX.get(model._meta.model_name, {}).get(field_name, NOTES_MAX)
    if isinstance(field, models.CharField):
        return field.max_length
    return None


def check_text_limits(instance: models.Model, *, fields=None) -> None:
    """Raise a ``ValidationError`` (code ``max_length``) for every free-text field over its limit.

    ``fields``: only these field names (e.g. the fields an edit changes).
    """
    errors: dict[str, list[ValidationError]] = {}
    for field in instance._meta.concrete_fields:
        if not isinstance(field, models.TextField) or (fields is not None and field.name not in fields):
            continue
        value = getattr(instance, field.attname)
        limit = text_limit(type(instance), field.name)
        if isinstance(value, str) and limit is not None and len(value) > limit:
            errors[field.name] = [
                ValidationError(
                    "At most %(limit_value)d characters (this has %(show_value)d).",
                    code="max_length",
                    params={"limit_value": limit, "show_value": len(value)},
                )
            ]
    if errors:
        raise ValidationError(errors)


def limits_table() -> list[tuple[str, str, int | None]]:
    """(model, field, characters) for every user-entered text field: the README's table."""
    from django.apps import apps

    rows: list[tuple[str, str, int | None]] = []
    for model in apps.get_app_config("registry").get_models():
        if model._meta.model_name in {"auditevent", "signinthrottle", "idempotencyrecord"}:
            continue
        for field in model._meta.concrete_fields:
            if isinstance(field, models.CharField | models.TextField) and not field.choices and field.editable:
                rows.append((model._meta.verbose_name, field.verbose_name, text_limit(model, field.name)))
    return rows
