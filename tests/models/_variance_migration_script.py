"""Run by tests/models/test_variance_migration.py in a fresh process against a fresh database
(``DATABASE_URL``): a 0012 registry holding a published position with a zero up-variance, then migration 0013.

Prints one JSON line with what it saw; the test asserts on it. Marks are invented.
"""

from __future__ import annotations

import datetime as dt
import json

from django.core.management import call_command
from django.db import connection
from django.db.migrations.executor import MigrationExecutor
from django.db.migrations.recorder import MigrationRecorder

BEFORE, AFTER = ("registry", "0012_job_field_date_rover_rates_and_heights"), ("registry", "0013_movement_checks")


def seed():
    apps = MigrationExecutor(connection).loader.project_state(BEFORE).apps
    Mark, Position = (apps.get_model("registry", n) for n in ("Mark", "Position"))
    for code, cov_uu_m2 in (("VM-FINE", 4e-5), ("VM-ZEROUP", 0.0)):
        Position.objects.create(
            mark=Mark.objects.create(code=code),
            frame_epsg=6319,
            epoch_yr=2010.0,
            lat_deg=45.2,
            lon_deg=-110.6,
            h_m=1500.0,
            cov_ee_m2=1e-5,
            cov_nn_m2=1e-5,
            cov_uu_m2=cov_uu_m2,
            source="adjustment (invented)",
            state="published",
            decided_at=dt.datetime(2020, 6, 1, 12, tzinfo=dt.UTC),
        )


def state():
    applied = {name for app, name in MigrationRecorder(connection).applied_migrations() if app == "registry"}
    with connection.cursor() as cur:
        cur.execute(
            "SELECT m.code, p.cov_uu_m2 FROM registry_position p JOIN registry_mark m ON m.id = p.mark_id ORDER BY 1"
        )
        rows = [list(r) for r in cur.fetchall()]
    return {"has_0013": AFTER[1] in applied, "rows": rows}


def main():
    call_command("migrate", *BEFORE, verbosity=0)
    seed()
    try:
        call_command("migrate", *AFTER, verbosity=0)
        error = None
    except Exception as exc:  # noqa: BLE001 - the message is what the test reads
        error = f"{type(exc).__name__}: {exc}"
    print(json.dumps({"vendor": connection.vendor, "error": error, "after": state()}))


if __name__ == "__main__":  # only in its own process (pytest imports this file for doctests)
    import django

    django.setup()
    main()
