"""Local fixtures: a fast password hasher (users are created per test; PBKDF2 would dominate the run)."""

import pytest


@pytest.fixture(autouse=True)
def _fast_password_hasher(settings):
    settings.PASSWORD_HASHERS = ["django.contrib.auth.hashers.MD5PasswordHasher"]
