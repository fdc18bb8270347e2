"""Migration 0006 (own vocabulary, suspect marks) on the database the suite runs on: SQLite, or PostgreSQL +
PostGIS with ``DATABASE_URL``. Forward, backward and forward again, in a fresh process against a fresh
database (a migration cannot run inside the test's transaction on SQLite), on invented rows of a 0005
registry; afterwards the guards of migrations 0003 and 0005 must still refuse.

The expected suspects are worked out by hand from the rule (services.suspect): an active mark whose latest
disturbed / not-found visit is on or after the day of its newest publication, or that has no published
position.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest
from django.conf import settings
from django.db import connection

pytestmark = [pytest.mark.django_db, pytest.mark.slow]

SCRIPT = Path(__file__).with_name("_vocabulary_migration_script.py")
OLD_COLUMNS = {"monument_type", "setting", "stamping", "to_reach", "custodian"}
NEW_COLUMNS = {"monument", "monument_detail", "marking", "access_directions", "keeper"}
EXPECTED_SUSPECTS = {
    "MG-LOST": ["2021-06-01", "the visit of 2021-06-01 searched for it and did not find it"],
    "MG-SAMEDAY": ["2020-06-01", "the visit of 2020-06-01 found it disturbed"],
    "MG-NOPOS": ["2018-01-01", "the visit of 2018-01-01 found it disturbed"],
}


def test_migration_0006_forward_backward_forward(fresh_database_url):
    env = {k: v for k, v in os.environ.items() if not k.startswith(("REGISTRY_", "DJANGO_", "DATABASE_URL"))}
    env.update(
        DATABASE_URL=fresh_database_url, DJANGO_SETTINGS_MODULE="registry.settings", PYTHONPATH=str(settings.BASE_DIR)
    )
    proc = subprocess.run(
        [sys.executable, str(SCRIPT)],
        cwd=settings.BASE_DIR,
        env=env,
        capture_output=True,
        text=True,
        timeout=300,
    )
    assert proc.returncode == 0, proc.stderr[-3000:]
    seen = json.loads(proc.stdout.strip().splitlines()[-1])
    assert seen["vendor"] == connection.vendor
    forward, backward, again = seen["forward"], seen["backward"], seen["again"]

    # Forward: names, values, suspects with their reasons, one audit row each, guards in place.
    assert NEW_COLUMNS | {"suspect_since", "suspect_reason"} <= set(forward["mark_columns"])
    assert not OLD_COLUMNS & set(forward["mark_columns"])
    assert "finding" in forward["visit_columns"] and "condition" not in forward["visit_columns"]
    assert forward["values"] == {"intact": 2, "damaged": 1, "disturbed": 3, "searched_not_found": 2}
    assert forward["marking"] == "MG-QUIET 2009"  # data kept through the rename
    assert forward["reasons"] == EXPECTED_SUSPECTS
    assert forward["statuses"]["MG-RETIRED"] == "retired" and forward["statuses"]["MG-OLDNEWS"] == "active"
    assert forward["statuses"]["MG-QUIET"] == "active" and forward["audited"] == 3
    assert forward["guards"] == dict.fromkeys(forward["guards"], True)

    # Backward: the earlier names and values; suspect marks active again; audit rows stay (append-only).
    assert OLD_COLUMNS <= set(backward["mark_columns"]) and "suspect_since" not in backward["mark_columns"]
    assert "condition" in backward["visit_columns"]
    assert backward["values"] == {"good": 2, "poor": 1, "disturbed": 3, "not_found": 2}
    assert set(backward["statuses"].values()) == {"active", "retired"} and backward["marking"] == "MG-QUIET 2009"
    assert backward["audited"] == 3 and backward["guards"] == dict.fromkeys(backward["guards"], True)

    # Forward again: the same registry as the first time (and three more audit rows).
    assert again["reasons"] == EXPECTED_SUSPECTS and again["values"] == forward["values"]
    assert again["audited"] == 6 and again["guards"] == dict.fromkeys(again["guards"], True)
