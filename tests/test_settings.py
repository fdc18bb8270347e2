"""Settings from the environment: envconfig rules, production hardening, the SQLite default.

Settings are read once per process, so every case that needs a different environment
runs Django in a child process with a clean environment (no ``REGISTRY_*``, no
``DATABASE_URL`` inherited from the shell that runs the tests).
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from registry.envconfig import ConfigurationError, env_bool, env_list, env_secret

BASE_DIR = Path(__file__).resolve().parent.parent
# A secret of the shape Django's own get_random_secret_key() returns (50 characters); invented.
GOOD_SECRET = "t3st-0nly-s3cret-kq9Vx2mZ7pL4wR8nB6yH1cJ5dF0gT-aE!uQ"
PROD = {
    "REGISTRY_PRODUCTION": "1",
    "REGISTRY_SECRET_KEY": GOOD_SECRET,
    "REGISTRY_ALLOWED_HOSTS": "registry.example.org",
    # documents (registry.E031, registry.W040): signing keys are encrypted with it; QR codes name the address
    "REGISTRY_SIGNING_KEY_SECRET": "test-only-signing-secret-" + "k" * 20,
    "REGISTRY_PUBLIC_URL": "https://registry.example.org",
}

SHOW_SETTINGS = """
import json, django
django.setup()
from django.conf import settings as s
db = s.DATABASES["default"]
print(json.dumps({
    "debug": s.DEBUG, "engine": db["ENGINE"], "name": str(db["NAME"]), "host": db.get("HOST", ""),
    "port": str(db.get("PORT", "")), "user": db.get("USER", ""), "hosts": s.ALLOWED_HOSTS,
    "media_root": str(s.MEDIA_ROOT), "static_root": str(s.STATIC_ROOT),
    "session_secure": getattr(s, "SESSION_COOKIE_SECURE", False),
    "csrf_secure": getattr(s, "CSRF_COOKIE_SECURE", False),
    "hsts": getattr(s, "SECURE_HSTS_SECONDS", 0), "ssl_redirect": getattr(s, "SECURE_SSL_REDIRECT", False),
    "proxy_header": getattr(s, "SECURE_PROXY_SSL_HEADER", None),
    "staticfiles": s.STORAGES["staticfiles"]["BACKEND"],
    "plate": s.REGISTRY["PLATE"],
}))
"""


def run_python(args: list[str], **env: str) -> subprocess.CompletedProcess:
    # Nothing of the test process's own configuration leaks in (e.g. DJANGO_ALLOW_ASYNC_UNSAFE,
    # which the browser tests set and which check --deploy rightly refuses).
    clean = {k: v for k, v in os.environ.items() if not k.startswith(("REGISTRY_", "DJANGO_", "DATABASE_URL"))}
    clean.update(env)
    clean["DJANGO_SETTINGS_MODULE"] = "registry.settings"
    return subprocess.run([sys.executable, *args], cwd=BASE_DIR, env=clean, capture_output=True, text=True, timeout=120)


def settings_with(**env: str) -> dict:
    proc = run_python(["-c", SHOW_SETTINGS], **env)
    assert proc.returncode == 0, proc.stderr
    return json.loads(proc.stdout.strip().splitlines()[-1])


# --- envconfig -------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("raw", "expected"),
    [("1", True), ("true", True), ("Yes", True), (" on ", True), ("0", False), ("FALSE", False), ("no", False)],
)
def test_env_bool_reads_the_usual_spellings(monkeypatch, raw, expected):
    monkeypatch.setenv("REGISTRY_T_FLAG", raw)
    assert env_bool("REGISTRY_T_FLAG", not expected) is expected


def test_env_bool_unset_or_empty_gives_default(monkeypatch):
    monkeypatch.delenv("REGISTRY_T_FLAG", raising=False)
    assert env_bool("REGISTRY_T_FLAG", True) is True
    monkeypatch.setenv("REGISTRY_T_FLAG", "")
    assert env_bool("REGISTRY_T_FLAG", False) is False


def test_env_bool_rejects_anything_else(monkeypatch):
    monkeypatch.setenv("REGISTRY_T_FLAG", "maybe")
    with pytest.raises(ConfigurationError, match="REGISTRY_T_FLAG must be a boolean"):
        env_bool("REGISTRY_T_FLAG")


def test_env_list_splits_strips_and_drops_empty_items(monkeypatch):
    monkeypatch.setenv("REGISTRY_T_LIST", " a.example.org, ,b.example.org ,")
    assert env_list("REGISTRY_T_LIST", ["x"]) == ["a.example.org", "b.example.org"]


def test_env_list_required_fails_when_unset_or_blank(monkeypatch):
    monkeypatch.delenv("REGISTRY_T_LIST", raising=False)
    assert env_list("REGISTRY_T_LIST", ["x"]) == ["x"]
    with pytest.raises(ConfigurationError, match="REGISTRY_T_LIST is not set"):
        env_list("REGISTRY_T_LIST", ["x"], required=True)
    monkeypatch.setenv("REGISTRY_T_LIST", " , ")
    with pytest.raises(ConfigurationError):
        env_list("REGISTRY_T_LIST", ["x"], required=True)


def test_env_secret_uses_dev_default_only_outside_production(monkeypatch):
    monkeypatch.delenv("REGISTRY_T_SECRET", raising=False)
    assert env_secret("REGISTRY_T_SECRET", production=False, dev_default="dev") == "dev"
    with pytest.raises(ConfigurationError, match="REGISTRY_T_SECRET is not set"):
        env_secret("REGISTRY_T_SECRET", production=True, dev_default="dev")
    monkeypatch.setenv("REGISTRY_T_SECRET", "from-env")
    assert env_secret("REGISTRY_T_SECRET", production=True, dev_default="dev") == "from-env"


# --- database selection ----------------------------------------------------------------------


def test_sqlite_is_the_default_database_in_var():
    s = settings_with()
    assert s["engine"] == "django.db.backends.sqlite3"
    assert Path(s["name"]) == BASE_DIR / "var" / "registry.sqlite3"
    assert Path(s["media_root"]) == BASE_DIR / "var" / "media"


def test_data_dir_moves_the_sqlite_file_media_and_static(tmp_path):
    s = settings_with(REGISTRY_DATA_DIR=str(tmp_path))
    assert s["engine"] == "django.db.backends.sqlite3"
    assert Path(s["name"]) == tmp_path / "registry.sqlite3"
    assert Path(s["media_root"]) == tmp_path / "media"
    assert Path(s["static_root"]) == tmp_path / "static"


def test_database_url_selects_postgresql():
    s = settings_with(DATABASE_URL="postgres://regapp@db.example.org:5433/officereg")
    assert s["engine"] == "django.db.backends.postgresql"
    assert (s["host"], s["port"], s["user"], s["name"]) == ("db.example.org", "5433", "regapp", "officereg")


# --- development and production modes --------------------------------------------------------


def test_development_mode_defaults():
    s = settings_with()
    assert s["debug"] is True
    assert s["plate"] == "AUTO"  # each point's plate from its location, development only
    assert "127.0.0.1" in s["hosts"]
    assert s["session_secure"] is False


def test_production_mode_hardens_cookies_tls_and_static():
    s = settings_with(**PROD)
    assert s["debug"] is False
    assert s["hosts"] == ["registry.example.org"]
    assert s["session_secure"] is True and s["csrf_secure"] is True
    assert s["ssl_redirect"] is True
    assert s["hsts"] >= 31536000  # one year: the usual HSTS preload minimum (common practice)
    assert s["proxy_header"] == ["HTTP_X_FORWARDED_PROTO", "https"]  # nginx sets it (deploy/nginx)
    assert s["staticfiles"] == "whitenoise.storage.CompressedManifestStaticFilesStorage"
    # No plate model unless the office names its plate: a wrong default would move ITRF positions by
    # centimetres a year (development keeps the demo district's NOAM).
    assert s["plate"] == ""
    assert settings_with(**PROD, REGISTRY_PLATE="eura")["plate"] == "EURA"


def test_check_deploy_passes_with_production_settings():
    proc = run_python(["manage.py", "check", "--deploy", "--fail-level", "WARNING"], **PROD)
    assert proc.returncode == 0, proc.stdout + proc.stderr
    assert "no issues" in proc.stdout


@pytest.mark.parametrize(
    ("secret", "why"),
    [
        ("short-secret", "it has 12 characters, at least 50 are needed"),
        ("x" * 50, "it has 1 different characters, at least 5 are needed"),  # the reviewer's example
        ("abcd" * 20, "it has 4 different characters, at least 5 are needed"),
        ("django-insecure-" + GOOD_SECRET, "starts with 'django-insecure-'"),
    ],
    ids=["short", "one-character", "four-characters", "insecure-prefix"],
)
def test_production_refuses_a_weak_secret_and_says_how_to_make_one(secret, why):
    # Before: check --deploy only warned (security.W009). Now the application does not start.
    proc = run_python(["manage.py", "check", "--deploy"], **{**PROD, "REGISTRY_SECRET_KEY": secret})
    assert proc.returncode != 0
    assert "ConfigurationError: REGISTRY_SECRET_KEY is too weak for production" in proc.stderr
    assert why in proc.stderr
    assert "secrets.token_urlsafe(50)" in proc.stderr
    assert secret not in proc.stderr  # the key itself is never printed


def test_our_weak_secret_rule_covers_djangos_w009():
    # The limits of Django's own check (django/core/checks/security/base.py, Django 5.2: 50
    # characters, 5 unique, prefix 'django-insecure-'): whatever W009 would flag, we refuse.
    from django.core.checks.security import base

    import registry.settings as ours  # noqa: F401  (the source of the numbers is settings.py)

    text = (BASE_DIR / "registry" / "settings.py").read_text(encoding="utf-8")
    assert f"min_length={base.SECRET_KEY_MIN_LENGTH}," in text
    assert f"min_unique={base.SECRET_KEY_MIN_UNIQUE_CHARACTERS}," in text
    assert f'forbidden_prefix="{base.SECRET_KEY_INSECURE_PREFIX}"' in text


def test_env_secret_strength_rules(monkeypatch):
    rules = {"min_length": 10, "min_unique": 3, "forbidden_prefix": "dev-"}
    monkeypatch.setenv("REGISTRY_T_SECRET", "aabbccddee")  # 10 characters, 5 different
    assert env_secret("REGISTRY_T_SECRET", production=True, dev_default="d", **rules) == "aabbccddee"
    for weak in ("aabbccdde", "ababababab", "dev-abcdefgh"):
        monkeypatch.setenv("REGISTRY_T_SECRET", weak)
        with pytest.raises(ConfigurationError, match="too weak for production"):
            env_secret("REGISTRY_T_SECRET", production=True, dev_default="d", **rules)
        # outside production the same value is accepted (development keys are not checked)
        assert env_secret("REGISTRY_T_SECRET", production=False, dev_default="d", **rules) == weak


def test_check_deploy_catches_debug_left_on_in_production():
    proc = run_python(["manage.py", "check", "--deploy", "--fail-level", "WARNING"], **{**PROD, "REGISTRY_DEBUG": "1"})
    assert proc.returncode != 0
    assert "security.W018" in proc.stdout + proc.stderr


@pytest.mark.parametrize("missing", ["REGISTRY_SECRET_KEY", "REGISTRY_ALLOWED_HOSTS"])
def test_production_without_a_required_variable_fails_loudly(missing):
    env = {k: v for k, v in PROD.items() if k != missing}
    proc = run_python(["manage.py", "check"], **env)
    assert proc.returncode != 0
    assert "ConfigurationError" in proc.stderr
    assert f"{missing} is not set" in proc.stderr


def test_a_malformed_production_flag_fails_loudly():
    proc = run_python(["manage.py", "check"], REGISTRY_PRODUCTION="maybe")
    assert proc.returncode != 0
    assert "REGISTRY_PRODUCTION must be a boolean" in proc.stderr
