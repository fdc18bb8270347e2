"""A service's refusal shown on the form that asked: each message on its field, the rest at the form's head.

Services raise Django's ``ValidationError`` keyed by their own field names (``errors.py``); pages
show the message where the user typed the value. A ``registry.errors`` refusal (a conflict, an
input the computation refused) and a computation's ``ComputationInputError`` carry one message and
a code: they go where a refusal without keys goes. One rule for every form: a key the form names
(after ``field_map``) goes on that field; a key it does not show (no such field, a hidden field such
as ``version``, or ``__all__``) goes at the head of the form; a refusal without keys goes to
``plain_to`` (the head unless a form says otherwise).
"""

from __future__ import annotations

from collections.abc import Mapping

from django.core.exceptions import NON_FIELD_ERRORS, ValidationError

from registry.errors import RegistryError
from registry.geodesy.accuracy import ComputationInputError


def add_service_error(
    form,
    error: ValidationError | RegistryError | ComputationInputError,
    *,
    field_map: Mapping[str, str] | None = None,
    plain_to: str | None = None,
) -> None:
    """Put ``error`` (a service's refusal) on ``form``'s fields (see the module docstring)."""
    if isinstance(error, RegistryError | ComputationInputError):
        error = ValidationError(error.message, code=error.code)
    if not hasattr(error, "error_dict"):
        form.add_error(plain_to, error)
        return
    field_map = field_map or {}
    for key, errors in error.error_dict.items():
        target = field_map.get(key, key)
        field = form.fields.get(target) if target != NON_FIELD_ERRORS else None
        if field is None or field.widget.is_hidden:
            target = None
        for e in errors:
            form.add_error(target, e)


class ServiceErrorsMixin:
    """``form.add_service_error(error)``: :func:`add_service_error` with the form's ``service_field_map``."""

    #: service key → form field
    service_field_map: dict[str, str] = {}

    def add_service_error(self, error: ValidationError | RegistryError | ComputationInputError) -> None:
        add_service_error(self, error, field_map=self.service_field_map)
