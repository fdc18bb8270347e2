"""Migration 0013 on a registry that stored a position with a zero variance (allowed before the position rules
were written once, services.position_rules): the migration stops before its constraint with a message naming
the mark, frame and epoch, and changes nothing; the database stays at 0012. SQLite, or PostgreSQL + PostGIS
with ``DATABASE_URL``, in a fresh process against a fresh database.
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

SCRIPT = Path(__file__).with_name("_variance_migration_script.py")


def test_migration_0013_names_positions_without_a_real_uncertainty_and_changes_nothing(fresh_database_url):
    env = {k: v for k, v in os.environ.items() if not k.startswith(("REGISTRY_", "DJANGO_", "DATABASE_URL"))}
    env.update(
        DATABASE_URL=fresh_database_url, DJANGO_SETTINGS_MODULE="registry.settings", PYTHONPATH=str(settings.BASE_DIR)
    )
    proc = subprocess.run(
        [sys.executable, str(SCRIPT)], cwd=settings.BASE_DIR, env=env, capture_output=True, text=True, timeout=300
    )
    assert proc.returncode == 0, proc.stderr[-3000:]
    seen = json.loads(proc.stdout.strip().splitlines()[-1])
    assert seen["vendor"] == connection.vendor
    error = seen["error"]
    assert error is not None and error.startswith("RuntimeError: 1 stored position(s)")
    assert "VM-ZEROUP: frame EPSG 6319, epoch 2010.0000, published" in error
    assert "up 0 m²" in error and "VM-FINE" not in error
    assert "section 9" in error and "Nothing was changed" in error
    assert seen["after"] == {"has_0013": False, "rows": [["VM-FINE", 4e-5], ["VM-ZEROUP", 0.0]]}
