"""Forms of the pages. They parse and validate input; the services make the change."""

from __future__ import annotations

from typing import Any

from django import forms
from django.forms.models import fields_for_model

from registry.models import Mark, MarkStatus
from registry.selectors.marks import MATCH_CONTAINS, MATCH_PREFIX
from registry.services.marks import EDITABLE_FIELDS as MARK_EDITABLE_FIELDS
from registry.web.service_errors import ServiceErrorsMixin

# What a manager edits on the mark form: the code (on creation) and the service's editable fields.
# The status has its own action (with a note); the search location follows the published position;
# the version is the form's own.
MARK_FORM_FIELDS = ("code", *MARK_EDITABLE_FIELDS)


_LOADED_SALT = "registry.mark-form.loaded"


def pack_loaded(mark: Mark) -> str:
    """The mark's editable values, signed, for the form's hidden ``loaded`` field."""
    from django.core import signing

    values = {name: getattr(mark, name) for name in MARK_EDITABLE_FIELDS}
    return signing.dumps({"pk": mark.pk, "version": mark.version, "values": values}, salt=_LOADED_SALT, compress=True)


def unpack_loaded(text: str) -> dict[str, Any] | None:
    from django.core import signing

    if not text:
        return None
    try:
        data = signing.loads(text, salt=_LOADED_SALT)
    except signing.BadSignature:
        return None
    values = data.get("values") if isinstance(data, dict) else None
    return values if isinstance(values, dict) else None


class MarkSearchForm(forms.Form):
    q = forms.CharField(label="Code or name", required=False, max_length=120)
    match = forms.ChoiceField(
        label="Match",
        required=False,
        choices=[(MATCH_PREFIX, "starts with"), (MATCH_CONTAINS, "contains")],
    )
    text = forms.CharField(label="Free text (code, name, marking, keeper, monument)", required=False, max_length=200)
    status = forms.ChoiceField(label="Status", required=False, choices=[("", "any status"), *MarkStatus.choices])

    def filters(self) -> dict[str, str]:
        """The cleaned filters (empty values for anything invalid)."""
        data = self.cleaned_data if self.is_valid() else {}
        return {
            "q": data.get("q", ""),
            "match": data.get("match") or MATCH_PREFIX,
            "text": data.get("text", ""),
            "status": data.get("status", ""),
        }


class MarkForm(ServiceErrorsMixin, forms.Form):
    """Create or edit a mark. ``version`` is the mark's version when the form was loaded."""

    version = forms.IntegerField(widget=forms.HiddenInput, required=False, min_value=1)
    #: the editable values as the form was loaded (signed), for the three-way merge of a stale save
    loaded = forms.CharField(widget=forms.HiddenInput, required=False)

    def __init__(self, *args, editing: bool = False, **kwargs):
        super().__init__(*args, **kwargs)
        model_fields = fields_for_model(Mark, fields=MARK_FORM_FIELDS)
        version = self.fields.pop("version")
        loaded = self.fields.pop("loaded")
        self.fields.update(model_fields)
        self.fields["version"] = version
        self.fields["loaded"] = loaded
        self.editing = editing
        self.fields["access_directions"].widget.attrs.update(rows=4)
        self.fields["notes"].widget.attrs.update(rows=3)
        self.fields["code"].help_text = "1–32 characters: capital letters, digits, '_', '.', '-'."
        if editing:
            # The code identifies the mark in documents and links; it does not change here.
            self.fields["code"].disabled = True
            self.fields["code"].help_text = "The code does not change once the mark exists."
            self.fields["version"].required = True

    def clean_code(self) -> str:
        code = self.cleaned_data.get("code", "")
        return code.strip() if isinstance(code, str) else code

    def mark_data(self) -> dict[str, Any]:
        """The cleaned values of the mark's fields (not the version)."""
        return {name: self.cleaned_data[name] for name in MARK_FORM_FIELDS if name in self.cleaned_data}

    def loaded_values(self) -> dict[str, Any] | None:
        """The values the user started from (``None`` if absent or tampered with)."""
        return unpack_loaded(self.cleaned_data.get("loaded") or "")

    def my_changes(self, mark: Mark) -> tuple[dict[str, Any], dict[str, Any] | None]:
        """The fields the user changed from what they loaded, and those loaded values (the merge base).

        Without a usable base, the fields that differ from the stored mark (and no base).
        """
        base = self.loaded_values()
        data = {k: v for k, v in self.mark_data().items() if k != "code"}
        if base is None or not all(k in base for k in data):
            return self.changes_against(mark), None
        mine = {k: v for k, v in data.items() if v != base[k]}
        return mine, {k: base[k] for k in mine}

    def changes_against(self, mark: Mark) -> dict[str, Any]:
        """Fields whose submitted value differs from what ``mark`` holds now (code excluded)."""
        data = self.mark_data()
        return {k: v for k, v in data.items() if k != "code" and getattr(mark, k) != v}
