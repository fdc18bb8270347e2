"""Fixtures for the page tests (the scenario itself is in ``tests/web/scenario.py``)."""

from __future__ import annotations

import pytest

from tests.web.scenario import build_kestrel


@pytest.fixture(autouse=True)
def fast_password_hashing(settings):
    """The default PBKDF2 costs about 0.25 s per user; page tests do not test hashing."""
    settings.PASSWORD_HASHERS = ["django.contrib.auth.hashers.MD5PasswordHasher"]


@pytest.fixture
def signed_in(client):
    """``signed_in(user)`` → the test client with that user signed in (``None``: anonymous)."""

    def factory(user):
        client.logout()
        if user is not None:
            client.force_login(user)
        return client

    return factory


@pytest.fixture
def media_root(settings, tmp_path):
    settings.MEDIA_ROOT = tmp_path / "media"
    return settings.MEDIA_ROOT


@pytest.fixture
def kestrel(manager, technician, media_root):
    """Three marks with positions in every state, a visit, an occupation, a photo, a RINEX file and history."""
    return build_kestrel(manager, technician)


@pytest.fixture
def many_marks(roles):
    """``many_marks(n, prefix)`` inserts n bare marks ``{prefix}-0001``… (for pagination and query counts)."""
    from registry.models import Mark

    def factory(n: int, prefix: str = "PG", **fields):
        Mark.objects.bulk_create(
            [
                Mark(
                    code=f"{prefix}-{i:04d}",
                    name=f"Pager {i}",
                    keeper="Alder County Roads" if i % 2 else "",
                    **fields,
                )
                for i in range(1, n + 1)
            ]
        )
        # Written without the services, so without an audit row: empty the read cache as a write would.
        from django.core.cache import cache

        cache.clear()

    return factory
