"""One rule for putting a service's refusal on a form (registry/web/service_errors.py)."""

from __future__ import annotations

from django import forms
from django.core.exceptions import NON_FIELD_ERRORS, ValidationError

from registry.errors import Conflict
from registry.geodesy.accuracy import ComputationInputError
from registry.web.service_errors import ServiceErrorsMixin, add_service_error


class _Form(ServiceErrorsMixin, forms.Form):
    service_field_map = {"cov_ee_m2": "sigma_e_mm"}
    name = forms.CharField(required=False)
    sigma_e_mm = forms.FloatField(required=False)
    note = forms.CharField(required=False)
    version = forms.IntegerField(widget=forms.HiddenInput, required=False)


def _bound() -> _Form:
    form = _Form({})
    assert form.is_valid()
    return form


def test_keyed_errors_go_on_their_fields_and_the_rest_at_the_head():
    form = _bound()
    form.add_service_error(
        ValidationError(
            {
                "name": ValidationError("Name too long.", code="too_long"),
                "cov_ee_m2": ValidationError("Variance must be positive.", code="out_of_range"),
                "version": ValidationError("Stale version.", code="stale"),
                "mark_code": ValidationError("Unknown mark.", code="unknown"),
                NON_FIELD_ERRORS: ValidationError("Refused.", code="refused"),
            }
        )
    )
    assert form.errors["name"] == ["Name too long."]
    assert form.errors["sigma_e_mm"] == ["Variance must be positive."]  # renamed by service_field_map
    assert "version" not in form.errors  # a hidden field's message is shown at the head
    assert form.non_field_errors() == ["Stale version.", "Unknown mark.", "Refused."]


def test_unkeyed_refusals_go_to_the_head_or_to_the_field_asked():
    form = _bound()
    form.add_service_error(ValidationError("Not allowed now.", code="state"))
    form.add_service_error(Conflict("Someone else changed it.", code="conflict"))
    form.add_service_error(ComputationInputError("A variance cannot be negative.", code="negative_variance"))
    assert form.non_field_errors() == ["Not allowed now.", "Someone else changed it.", "A variance cannot be negative."]
    assert [e.code for e in form.errors.as_data()[NON_FIELD_ERRORS]] == ["state", "conflict", "negative_variance"]
    other = _bound()
    add_service_error(other, ValidationError("A reason is needed.", code="note_required"), plain_to="note")
    assert other.errors["note"] == ["A reason is needed."] and not other.non_field_errors()
