"""Headless Chromium (Playwright, sync API) against pytest-django's live server.

The browser runs in the test thread; Playwright's sync API keeps an event loop there,
so Django's "async unsafe" guard is switched off for the test process.
"""

from __future__ import annotations

import os
from pathlib import Path

import pytest

os.environ.setdefault("DJANGO_ALLOW_ASYNC_UNSAFE", "true")

CHROMIUM = Path("/usr/bin/chromium")
DOCS_SCREENSHOTS = Path(__file__).resolve().parents[2] / "docs" / "screenshots"


@pytest.fixture(scope="module", autouse=True)
def audit_triggers_allow_flush(django_db_setup, django_db_blocker):
    """Let the live-server tests' database flush empty the append-only audit table.

    Tests with a live server commit for real, and pytest-django empties the tables after
    each one (on SQLite with DELETE, which the audit table's trigger refuses). The audit
    triggers are dropped for this module only and recreated, from migration 0003's own
    SQL, when it ends, so every other test still runs against them.
    """
    import importlib

    from django.db import connection

    triggers = importlib.import_module("registry.migrations.0003_integrity_triggers")
    history = importlib.import_module("registry.migrations.0005_position_history_triggers")
    if connection.vendor == "sqlite":
        # and the position history guard (migration 0005): the flush deletes published positions too
        drop = [sql for sql in triggers.SQLITE_BACKWARD if "audit_" in sql]
        drop.append("DROP TRIGGER IF EXISTS position_history_no_delete")
        create = [sql for sql in triggers.SQLITE_FORWARD if "registry_auditevent" in sql]
        create += [sql for sql in history.SQLITE_FORWARD if "CREATE TRIGGER position_history_no_delete" in sql]
    else:  # PostgreSQL empties tables with TRUNCATE, which row triggers do not see; kept symmetric anyway
        drop = [sql for sql in triggers.PG_BACKWARD if "audit_append_only ON" in sql]
        create = [sql for sql in triggers.PG_FORWARD if "CREATE TRIGGER audit_append_only" in sql]
    with django_db_blocker.unblock(), connection.cursor() as cur:
        for sql in drop:
            cur.execute(sql)
    yield
    with django_db_blocker.unblock(), connection.cursor() as cur:
        for sql in drop + create:
            cur.execute(sql)


@pytest.fixture(autouse=True)
def fast_password_hashing(settings):
    settings.PASSWORD_HASHERS = ["django.contrib.auth.hashers.MD5PasswordHasher"]


def _close_test_thread_connections():
    """Close the database connections used while Playwright's event loop was running.

    Django keeps connections per execution context. Database work done in the test
    thread while the sync Playwright loop runs (test code, and pytest-django's flush
    after each live-server test) can use a connection of its own that Django's final
    clean-up does not see; left open, it blocks dropping the PostgreSQL test database.
    """
    from django.db import connections

    connections.close_all()


@pytest.fixture(scope="session")
def chromium():
    if not CHROMIUM.exists():
        pytest.skip(f"{CHROMIUM} is missing: install Debian's chromium package to run the browser tests")
    from playwright.sync_api import sync_playwright

    with sync_playwright() as pw:
        browser = pw.chromium.launch(
            executable_path=str(CHROMIUM),
            headless=True,
            args=["--no-sandbox", "--disable-gpu", "--disable-background-networking"],
        )
        yield browser
        browser.close()
        _close_test_thread_connections()  # after the last test's flush, while Playwright's loop still runs


@pytest.fixture
def page(chromium, live_server):
    """A fresh browser context (own cookies) with a desktop-sized window; JavaScript stays on as a browser has it."""
    context = chromium.new_context(viewport={"width": 1280, "height": 900}, base_url=live_server.url)
    context.set_default_timeout(15_000)
    pg = context.new_page()
    yield pg
    context.close()


@pytest.fixture
def screenshot(tmp_path):
    """``screenshot(page, name)`` saves a full-page PNG.

    Into a temporary folder by default, so that a test run never changes tracked files;
    with ``REGISTRY_UPDATE_SCREENSHOTS=1`` into docs/screenshots/ (the README's pictures).
    """
    target = DOCS_SCREENSHOTS if os.environ.get("REGISTRY_UPDATE_SCREENSHOTS") == "1" else tmp_path

    def save(pg, name: str) -> Path:
        target.mkdir(parents=True, exist_ok=True)
        path = target / f"{name}.png"
        pg.screenshot(path=str(path), full_page=True)
        return path

    return save
