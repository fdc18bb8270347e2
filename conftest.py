"""Shared pytest fixtures: one user per role, an API client per role.

Run on SQLite (default) or PostgreSQL + PostGIS (``DATABASE_URL=postgres://...``).
"""

from __future__ import annotations

import os

import pytest
from hypothesis import settings as hypothesis_settings

# Property and fuzz tests (hypothesis): the suite and CI run a fixed seed ("deterministic"), so a
# run's result does not depend on luck; HYPOTHESIS_PROFILE=explore draws fresh random examples, as a
# by-hand search for new failures does (failures found that way become @example regression cases).
hypothesis_settings.register_profile("deterministic", derandomize=True, print_blob=True)
hypothesis_settings.register_profile("explore", derandomize=False, print_blob=True)
hypothesis_settings.load_profile(os.environ.get("HYPOTHESIS_PROFILE", "deterministic"))


def _allow_audit_truncate(sender, connection, **kwargs):
    """PostgreSQL: let this test session's flushes TRUNCATE the audit table.

    pytest-django empties the tables after each transactional test with one TRUNCATE, which the
    audit trail's guard (migration 0008) refuses unless the session sets ``registry.audit_truncate``
    to ``allow``. Tests of the guard itself clear the setting in their own transaction.
    """
    if connection.vendor == "postgresql":
        with connection.cursor() as cur:
            cur.execute("SET registry.audit_truncate = 'allow'")


def pytest_configure(config):
    from django.db.backends.signals import connection_created

    connection_created.connect(_allow_audit_truncate, dispatch_uid="registry_tests_allow_audit_truncate")


def pytest_collection_modifyitems(config, items):
    """Mutation runs of the geodesy core (``REGISTRY_MUTATION_SCOPE=geodesy``, see DEVELOPERS.md,
    "Test strength") leave out the database tests: the core is pinned by tests/geodesy's plain tests,
    and the page/API tests would make each mutant take seconds instead of milliseconds."""
    if os.environ.get("REGISTRY_MUTATION_SCOPE", "") != "geodesy":
        return
    kept = [item for item in items if item.get_closest_marker("django_db") is None]
    dropped = [item for item in items if item.get_closest_marker("django_db") is not None]
    if dropped:
        config.hook.pytest_deselected(items=dropped)
        items[:] = kept


@pytest.fixture(autouse=True)
def _fresh_cache():
    """Empty Django's cache around each test, as the database is: the cached job screening
    (registry.services.screening_cache) is keyed on audit rows, which fixtures writing models
    directly do not make."""
    from django.core.cache import cache

    cache.clear()
    yield
    cache.clear()


@pytest.fixture(autouse=True)
def _tasks_run_immediately(settings):
    """Background tasks (document builds) run at once, in the test's own transaction."""
    settings.TASKS = {"default": {"BACKEND": "django_tasks.backends.immediate.ImmediateBackend"}}


@pytest.fixture
def roles(db):
    from registry.roles import ensure_roles

    ensure_roles()


def _make_user(django_user_model, username: str, role: str | None):
    from django.contrib.auth.models import Group

    user = django_user_model.objects.create_user(username=username, password="pw-" + username + "-123!")
    if role:
        user.groups.add(Group.objects.get(name=role))
    return user


@pytest.fixture
def make_user(roles, django_user_model):
    def factory(username: str, role: str | None = None):
        return _make_user(django_user_model, username, role)

    return factory


@pytest.fixture
def viewer(make_user):
    return make_user("vera", "viewer")


@pytest.fixture
def technician(make_user):
    return make_user("theo", "technician")


@pytest.fixture
def manager(make_user):
    return make_user("mona", "manager")


@pytest.fixture
def signatory(make_user):
    return make_user("sina", "signatory")


@pytest.fixture
def admin_user_role(make_user):
    return make_user("ada", "admin")


@pytest.fixture
def api_client_for():
    from rest_framework.test import APIClient

    def factory(user):
        client = APIClient()
        if user is not None:
            client.force_authenticate(user)
        return client

    return factory
