"""Import/export tests create users per test; hash their passwords quickly (hashing is not under test here)."""

import pytest


@pytest.fixture(autouse=True)
def _fast_password_hashing(settings):
    settings.PASSWORD_HASHERS = ["django.contrib.auth.hashers.MD5PasswordHasher"]
