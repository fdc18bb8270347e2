"""What every signed-in request reads, and the mark page's cached parts: fewer reads, the same answers.

The session and its user, their roles and permissions come in one query (``registry.sessions``,
``registry.auth_backend``), the newest audit row in a second (``registry.selectors.read_cache``). Nothing of a user is kept between requests: a role given or taken
away, a deactivated account, a signed-out session count from the next request on. The mark page's
sheets and position plot are kept until the next audit row, like the rest of the page.
"""

from __future__ import annotations

import pytest
from django.contrib.auth.models import Group, Permission
from django.db import connection
from django.test.utils import CaptureQueriesContext

from registry.services.marks import mark_create
from registry.services.positions import position_propose, position_publish
from tests.web.scenario import position_data

NEAR = "/api/marks/near/?lat=45.2&lon=-110.6&radius_km=5&limit=20"


@pytest.fixture
def mark(manager, technician):
    m = mark_create(actor=manager, data={"code": "RR-1", "name": "Reads Ridge"})
    p = position_propose(actor=technician, mark_code="RR-1", data=position_data())
    position_publish(actor=manager, position_id=p.pk)
    return m


@pytest.mark.django_db
def test_a_repeated_read_costs_the_session_with_its_user_and_the_audit_head(client, viewer, mark):
    client.force_login(viewer)
    for url in (NEAR, "/marks/RR-1/", "/marks/"):
        assert client.get(url).status_code == 200  # fills the read cache
        with CaptureQueriesContext(connection) as ctx:
            assert client.get(url).status_code == 200
        sql = [q["sql"] for q in ctx.captured_queries]
        assert len(sql) == 2, (url, sql)
        assert "registry_session_with_user" in sql[0] or ("registry_signin_session" in sql[0] and "auth_user" in sql[0])
        assert "registry_audit_head" in sql[1] or "registry_auditevent" in sql[1]


@pytest.mark.django_db
def test_roles_given_and_taken_count_from_the_next_request(client, viewer, mark):
    client.force_login(viewer)
    page = client.get("/marks/RR-1/").content.decode()
    assert "vera · viewer" in page and "Edit description" not in page
    assert client.get("/marks/RR-1/edit/").status_code == 403
    viewer.groups.add(Group.objects.get(name="manager"))
    page = client.get("/marks/RR-1/").content.decode()
    assert "vera · viewer, manager" in page and "Edit description" in page
    assert client.get("/marks/RR-1/edit/").status_code == 200
    viewer.groups.clear()
    assert client.get("/marks/RR-1/").status_code == 403
    assert client.get(NEAR).status_code == 403
    assert "no role" in client.get("/marks/RR-1/").content.decode()


@pytest.mark.django_db
def test_a_permission_held_directly_and_a_superuser_count(client, django_user_model, mark):
    loner = django_user_model.objects.create_user(username="lone", password="pw-lone-123!")
    loner.user_permissions.add(Permission.objects.get(codename="view_registry"))
    client.force_login(loner)
    assert client.get("/marks/RR-1/").status_code == 200
    assert client.get("/marks/RR-1/edit/").status_code == 403
    boss = django_user_model.objects.create_superuser(username="boss", password="pw-boss-123!")
    client.force_login(boss)
    assert client.get("/marks/RR-1/edit/").status_code == 200


@pytest.mark.django_db
def test_a_deactivated_account_and_a_signed_out_session_read_nothing(client, viewer, mark):
    client.force_login(viewer)
    assert client.get(NEAR).status_code == 200
    viewer.is_active = False
    viewer.save(update_fields=["is_active"])
    assert client.get(NEAR).status_code in (401, 403)
    page = client.get("/marks/RR-1/")
    assert page.status_code == 302 and "/signin/" in page["Location"]

    viewer.is_active = True
    viewer.save(update_fields=["is_active"])
    client.force_login(viewer)
    cookie = client.cookies["sessionid"].value
    assert client.get("/marks/RR-1/").status_code == 200
    client.logout()
    client.cookies["sessionid"] = cookie  # the old session's cookie, kept by a stranger
    assert client.get("/marks/RR-1/").status_code == 302


@pytest.mark.django_db
def test_an_expired_session_is_not_read(client, viewer):
    import datetime as dt

    from django.utils import timezone

    from registry.sessions.models import SignInSession

    client.force_login(viewer)
    assert client.get("/marks/").status_code == 200
    assert client.get(NEAR).status_code == 200
    SignInSession.objects.update(expire_date=timezone.now() - dt.timedelta(seconds=1))
    assert client.get("/marks/").status_code == 302
    assert client.get(NEAR).status_code in (401, 403)


@pytest.mark.django_db
def test_the_mark_page_shows_a_new_sheet_and_a_new_position_at_once(client, viewer, technician, manager, mark):
    from registry.services.documents import document_build_sheet

    client.force_login(viewer)
    page = client.get("/marks/RR-1/").content.decode()
    assert "Station description sheet" not in page
    plotted_before = page.count('<tr><td class="num">')  # the rows of the plotted values
    assert plotted_before == 1
    doc = document_build_sheet(actor=technician, mark_code="RR-1")
    page = client.get("/marks/RR-1/").content.decode()
    assert "Station description sheet" in page and doc.code in page
    p = position_propose(actor=technician, mark_code="RR-1", data=position_data(epoch_yr=2021.5))
    page = client.get("/marks/RR-1/").content.decode()
    assert page.count('<tr><td class="num">') == 2 and "2021.500" in page  # the proposed position is plotted
    assert "row-superseded" not in page
    position_publish(actor=manager, position_id=p.pk, note="Re-observed; accepted as it stands.")
    page = client.get("/marks/RR-1/").content.decode()
    assert "row-superseded" in page  # the first position, superseded by the second


@pytest.mark.django_db
def test_pages_of_more_marks_than_django_s_default_cache_holds_are_still_read_from_memory(client, viewer, many_marks):
    """Django's default of 300 entries, cycled over by 120 mark pages of three entries each, kept none."""
    many_marks(120, "MM")
    client.force_login(viewer)
    for i in range(1, 121):
        assert client.get(f"/marks/MM-{i:04d}/").status_code == 200
    with CaptureQueriesContext(connection) as ctx:
        assert client.get("/marks/MM-0001/").status_code == 200
    assert len(ctx.captured_queries) == 2


@pytest.mark.django_db
def test_the_nearby_answer_follows_a_published_position_and_refuses_as_before(client, viewer, manager, technician):
    """The API's answer is kept under the query as sent: a write still shows at once, a bad query is
    still a 400 each time, and a user without the role is refused before anything is read."""
    mark_create(actor=manager, data={"code": "NB-1", "name": "Nearby One"})
    client.force_login(viewer)
    assert client.get(NEAR).json()["count"] == 0
    p = position_propose(actor=technician, mark_code="NB-1", data=position_data(lat_deg=45.2, lon_deg=-110.6))
    assert client.get(NEAR).json()["count"] == 0  # proposed only: no search location yet
    position_publish(actor=manager, position_id=p.pk)
    found = client.get(NEAR).json()
    assert found["count"] == 1 and found["marks"][0]["code"] == "NB-1" and found["marks"][0]["distance_m"] == 0.0
    for _ in range(2):
        bad = client.get(NEAR.replace("radius_km=5", "radius_km=5000"))
        assert bad.status_code == 400 and bad.json()["error"]["details"]
    client.logout()
    assert client.get(NEAR).status_code in (401, 403)


@pytest.mark.django_db
def test_the_list_links_each_mark_to_its_page_as_django_names_it(client, viewer):
    """The list builds its addresses from one reversed address; a code from before the code rule (here with a
    space and a small letter) is still quoted as Django quotes it."""
    from django.core.cache import cache
    from django.urls import reverse

    from registry.models import Mark

    Mark.objects.bulk_create([Mark(code="LK-1.A_2", name="Link one"), Mark(code="Old mark 7", name="Link two")])
    cache.clear()  # written without the services
    client.force_login(viewer)
    page = client.get("/marks/").content.decode()
    for code in ("LK-1.A_2", "Old mark 7"):
        assert f'<a href="{reverse("web:mark-detail", args=[code])}" class="code">' in page
    assert "/marks/Old%20mark%207/" in page
