"""The read cache of the mark page and the mark list: current after every audited write."""

from __future__ import annotations

import pytest
from django.db import connection
from django.test.utils import CaptureQueriesContext

from registry.services.marks import mark_create, mark_update


@pytest.mark.django_db
def test_mark_page_and_list_show_an_edit_at_once_and_read_less_when_nothing_changed(client, manager, viewer):
    mark_create(actor=manager, data={"code": "RC-1", "name": "Before the edit"})
    client.force_login(viewer)
    first = client.get("/marks/RC-1/")
    assert "Before the edit" in first.content.decode()
    with CaptureQueriesContext(connection) as again:
        assert "Before the edit" in client.get("/marks/RC-1/").content.decode()
    with CaptureQueriesContext(connection) as uncached:
        from django.core.cache import cache

        cache.clear()
        client.get("/marks/RC-1/")
    assert len(again) < len(uncached)  # the mark's rows come from the cache
    mark_update(actor=manager, code="RC-1", expected_version=1, changes={"name": "After the edit"})
    assert "After the edit" in client.get("/marks/RC-1/").content.decode()
    assert "After the edit" in client.get("/marks/").content.decode()
    mark_create(actor=manager, data={"code": "RC-2", "name": "A second mark"})
    listed = client.get("/marks/").content.decode()
    assert "RC-2" in listed and "A second mark" in listed


@pytest.mark.django_db
def test_permissions_are_read_in_one_query_with_the_same_answers(manager, viewer, django_user_model):
    from django.contrib.auth.models import Permission

    from registry.roles import Ability, has_ability

    with CaptureQueriesContext(connection) as reads:
        assert has_ability(viewer, Ability.VIEW) and not has_ability(viewer, Ability.MANAGE)
    assert len(reads) == 1
    assert has_ability(manager, Ability.MANAGE)
    # a permission given to the user directly, not through a group, still counts
    loner = django_user_model.objects.create_user(username="loner", password="pw-loner-123!")
    loner.user_permissions.add(Permission.objects.get(codename=Ability.VIEW.value))
    assert has_ability(loner, Ability.VIEW) and not has_ability(loner, Ability.MANAGE)
    loner.is_active = False
    del loner._perm_cache
    assert not has_ability(loner, Ability.VIEW)


@pytest.mark.django_db
def test_a_session_signed_in_through_djangos_model_backend_stays_valid(client, viewer):
    client.force_login(viewer, backend="django.contrib.auth.backends.ModelBackend")
    assert client.get("/marks/").status_code == 200
