"""Creating and editing marks through the pages: validation, the version check, nothing lost."""

from __future__ import annotations

import re

import pytest
from django.urls import reverse

from registry.errors import Conflict
from registry.models import AuditEvent, Mark
from registry.services.marks import mark_update

CREATE = reverse("web:mark-create")


def edit_url(code: str) -> str:
    return reverse("web:mark-edit", kwargs={"code": code})


def form_values(response) -> dict[str, str]:
    """The values a browser would submit from the rendered form (inputs, selects, textareas)."""
    html = response.content.decode()
    form = html[html.index('<form method="post" class="markform"') :]
    form = form[: form.index("</form>")]
    values: dict[str, str] = {}
    for tag in re.findall(r"<input[^>]*>", form):
        name = re.search(r'name="([^"]+)"', tag)
        if not name or "disabled" in tag:
            continue
        value = re.search(r'value="([^"]*)"', tag)
        values[name.group(1)] = value.group(1) if value else ""
    for name, body in re.findall(r'<select name="([^"]+)"[^>]*>(.*?)</select>', form, flags=re.S):
        chosen = re.search(r'<option value="([^"]*)"[^>]*selected', body)
        values[name] = chosen.group(1) if chosen else ""
    for name, body in re.findall(r'<textarea name="([^"]+)"[^>]*>(.*?)</textarea>', form, flags=re.S):
        values[name] = body.strip("\n").replace("&#x27;", "'").replace("&amp;", "&")
    values.pop("csrfmiddlewaretoken", None)
    return values


def text_of(response) -> str:
    html = re.sub(r"<head>.*?</head>", "", response.content.decode(), flags=re.S)
    return re.sub(r"\s+", " ", re.sub(r"<[^>]+>", " ", html))


# ---------------------------------------------------------------- create


@pytest.mark.django_db
def test_manager_creates_a_mark(signed_in, manager):
    client = signed_in(manager)
    response = client.post(
        CREATE,
        {
            "code": "KV-050",
            "name": "Heron Point",
            "monument": "deep_rod",
            "stability": "high",
            "sky_view": "clear",
            "marking": "KV 050 2024",
            "keeper": "Kestrel Valley Survey Office",
            "access_directions": "End of Heron Lane, 15 m west of the gate.",
        },
    )
    assert response.status_code == 302
    assert response["Location"] == reverse("web:mark-detail", kwargs={"code": "KV-050"})
    mark = Mark.objects.get(code="KV-050")
    assert (mark.name, mark.monument, mark.version, mark.status) == ("Heron Point", "deep_rod", 1, "active")
    event = AuditEvent.objects.get(action="mark_create", mark=mark)
    assert event.actor == manager
    page = client.get(response["Location"])
    assert "Mark KV-050 created (version 1)." in text_of(page)


@pytest.mark.django_db
@pytest.mark.parametrize(
    "data,field,message",
    [
        ({"code": "kv 50"}, "code", "capital letters, digits"),  # the model's invalid_code
        ({"code": ""}, "code", "This field is required."),
        ({"code": "KV-002"}, "code", "already exists"),  # unique
        ({"code": "KV-051", "monument": "cairn"}, "monument", "Select a valid choice."),
        ({"code": "KV-051", "name": "x" * 121}, "name", "at most 120 characters"),
    ],
)
def test_create_shows_errors_per_field_and_stores_nothing(kestrel, signed_in, manager, data, field, message):
    before = Mark.objects.count()
    audit_before = AuditEvent.objects.count()
    payload = {"monument": "other", "stability": "unknown", "sky_view": "unknown", **data}
    response = signed_in(manager).post(CREATE, payload)
    assert response.status_code == 200
    html = response.content.decode()
    errors = re.search(rf'<ul class="errorlist" id="id_{field}_errors">(.*?)</ul>', html, flags=re.S)
    assert errors, f"no error list under {field}"
    assert message in errors.group(1)
    assert "Not saved. Please correct the fields marked below." in html
    assert Mark.objects.count() == before
    assert AuditEvent.objects.count() == audit_before


# ---------------------------------------------------------------- edit


@pytest.mark.django_db
def test_edit_form_carries_the_version_and_saves(kestrel, signed_in, manager):
    client = signed_in(manager)
    page = client.get(edit_url("KV-002"))
    values = form_values(page)
    assert values["version"] == "1"
    assert "code" not in values  # the code is shown but not editable
    values["name"] = "Mill Creek Bridge, east abutment"
    values["sky_view"] = "obstructed"
    response = client.post(edit_url("KV-002"), values)
    assert response.status_code == 302
    mark = Mark.objects.get(code="KV-002")
    assert (mark.name, mark.sky_view, mark.version) == ("Mill Creek Bridge, east abutment", "obstructed", 2)
    event = AuditEvent.objects.filter(action="mark_update", mark=mark).get()
    assert event.before == {"name": "Mill Creek Bridge", "sky_view": "partial", "version": 1}
    assert event.after == {"name": "Mill Creek Bridge, east abutment", "sky_view": "obstructed", "version": 2}
    assert "Mark KV-002 saved (version 2)." in text_of(client.get(response["Location"]))


@pytest.mark.django_db
def test_a_posted_code_cannot_rename_the_mark(kestrel, signed_in, manager):
    client = signed_in(manager)
    values = form_values(client.get(edit_url("KV-002")))
    values.update(code="KV-999", name="Renamed bridge")
    assert client.post(edit_url("KV-002"), values).status_code == 302
    assert Mark.objects.filter(code="KV-999").count() == 0
    assert Mark.objects.get(code="KV-002").name == "Renamed bridge"


@pytest.mark.django_db
def test_saving_unchanged_values_changes_nothing(kestrel, signed_in, manager):
    client = signed_in(manager)
    values = form_values(client.get(edit_url("KV-002")))
    audit_before = AuditEvent.objects.count()
    response = client.post(edit_url("KV-002"), values)
    assert response.status_code == 302
    assert Mark.objects.get(code="KV-002").version == 1
    assert AuditEvent.objects.count() == audit_before
    assert "Nothing to save" in text_of(client.get(response["Location"]))


@pytest.mark.django_db
def test_edit_validation_error_is_shown_and_nothing_changes(kestrel, signed_in, manager):
    client = signed_in(manager)
    values = form_values(client.get(edit_url("KV-002")))
    values["marking"] = "S" * 121
    values["name"] = "Should not be stored"
    stored = Mark.objects.filter(code="KV-002").values().get()
    response = client.post(edit_url("KV-002"), values)
    assert response.status_code == 200
    html = response.content.decode()
    assert re.search(r'id="id_marking_errors">.*?at most 120 characters', html, flags=re.S)
    assert 'value="Should not be stored"' in html  # the entry is kept in the form
    assert Mark.objects.filter(code="KV-002").values().get() == stored


@pytest.mark.django_db
def test_missing_version_is_refused(kestrel, signed_in, manager):
    client = signed_in(manager)
    values = form_values(client.get(edit_url("KV-002")))
    del values["version"]
    values["name"] = "No version"
    response = client.post(edit_url("KV-002"), values)
    assert response.status_code == 200
    assert "This field is required." in response.content.decode()
    assert Mark.objects.get(code="KV-002").name == "Mill Creek Bridge"


@pytest.mark.django_db
def test_stale_save_is_refused_and_shows_both_values(kestrel, signed_in, manager, make_user):
    """Two managers change the same field from the same version: the second save must not silently
    overwrite the first; only that field is compared, and "changed by" names the colleague."""
    client = signed_in(manager)
    values = form_values(client.get(edit_url("KV-002")))  # loaded at version 1
    colleague = make_user("marta", "manager")
    mark_update(actor=colleague, code="KV-002", expected_version=1, changes={"keeper": "Alder County Bridges Unit"})
    # a third manager's refused attempt must not be named as the one who changed it
    with pytest.raises(Conflict):
        mark_update(actor=make_user("otto", "manager"), code="KV-002", expected_version=1, changes={"keeper": "X"})
    stored = Mark.objects.filter(code="KV-002").values().get()
    audit_before = AuditEvent.objects.filter(action="mark_update").count()

    values["name"] = "Mill Creek Bridge (north rail)"  # my own change, untouched by others
    values["keeper"] = "Alder County Roads, bridge crew"  # the field the colleague changed too
    response = client.post(edit_url("KV-002"), values)

    assert response.status_code == 409
    assert Mark.objects.filter(code="KV-002").values().get() == stored  # nothing overwritten
    assert AuditEvent.objects.filter(action="mark_update").count() == audit_before
    assert AuditEvent.objects.filter(action="mark_update_refused", actor=manager).count() == 1
    html = response.content.decode()
    text = text_of(response)
    assert "Not saved: someone changed this mark while you were editing" in text
    assert "You started from version 1 ; the stored mark is now at version 2 ." in text
    table = html[html.index('<table class="compare">') : html.index("</table>", html.index('<table class="compare">'))]
    rows = {
        re.sub(r"<[^>]+>", "", field).strip(): (yours.strip(), theirs.strip(), who)
        for field, yours, theirs, who in re.findall(
            r'<th scope="row">(.*?)</th>\s*<td class="yours">(.*?)</td>\s*<td class="theirs">(.*?)</td>\s*<td class="small">(.*?)</td>',
            table,
            flags=re.S,
        )
    }
    assert list(rows) == ["Keeper"]  # only the field both changed; my name change is not a conflict
    assert rows["Keeper"][:2] == ("Alder County Roads, bridge crew", "Alder County Bridges Unit")
    assert "marta" in rows["Keeper"][2] and "otto" not in rows["Keeper"][2] and "UTC" in rows["Keeper"][2]
    # the form keeps what I entered and now carries the stored version
    again = form_values(response)
    assert again["name"] == "Mill Creek Bridge (north rail)"
    assert again["keeper"] == "Alder County Roads, bridge crew"
    assert again["version"] == "2"

    # A deliberate second save, after reading the comparison, is checked against version 2.
    again["keeper"] = "Alder County Bridges Unit"  # keep the colleague's value
    saved = client.post(edit_url("KV-002"), again)
    assert saved.status_code == 302
    mark = Mark.objects.get(code="KV-002")
    assert (mark.name, mark.keeper, mark.version) == (
        "Mill Creek Bridge (north rail)",
        "Alder County Bridges Unit",
        3,
    )


@pytest.mark.django_db
def test_a_stale_save_merges_fields_nobody_else_changed(kestrel, signed_in, manager, make_user):
    """Issue 10, item 13: an untouched field must not revert a colleague's change; my change is kept."""
    client = signed_in(manager)
    values = form_values(client.get(edit_url("KV-002")))  # version 1, sky view "partly obstructed"
    mark_update(actor=make_user("marta", "manager"), code="KV-002", expected_version=1, changes={"sky_view": "clear"})
    values["marking"] = "MC BR 1998 (worn)"  # sky view left as loaded
    response = client.post(edit_url("KV-002"), values, follow=True)
    assert response.status_code == 200
    mark = Mark.objects.get(code="KV-002")
    assert (mark.sky_view, mark.marking, mark.version) == ("clear", "MC BR 1998 (worn)", 3)
    assert "their changes are kept" in text_of(response)
    event = AuditEvent.objects.filter(action="mark_update").latest("id")
    assert event.after == {"marking": "MC BR 1998 (worn)", "version": 3} and "merged" in event.note


@pytest.mark.django_db
def test_the_same_change_by_both_is_no_conflict(kestrel, signed_in, manager, make_user):
    client = signed_in(manager)
    values = form_values(client.get(edit_url("KV-002")))
    mark_update(actor=make_user("marta", "manager"), code="KV-002", expected_version=1, changes={"sky_view": "clear"})
    values["sky_view"] = "clear"
    response = client.post(edit_url("KV-002"), values)
    assert response.status_code == 302
    assert Mark.objects.get(code="KV-002").version == 2  # nothing left to change


@pytest.mark.django_db
def test_a_tampered_base_falls_back_to_the_strict_check(kestrel, signed_in, manager, make_user):
    client = signed_in(manager)
    values = form_values(client.get(edit_url("KV-002")))
    mark_update(actor=make_user("marta", "manager"), code="KV-002", expected_version=1, changes={"sky_view": "clear"})
    values["loaded"] = values["loaded"][:-3] + "xyz"
    values["marking"] = "MC BR 1998 (worn)"
    response = client.post(edit_url("KV-002"), values)
    assert response.status_code == 409
    mark = Mark.objects.get(code="KV-002")
    assert (mark.sky_view, mark.marking, mark.version) == ("clear", "MC BR 1998", 2)
