"""Run by tests/models/test_vocabulary_migration.py in a fresh process against a fresh database
(``DATABASE_URL``): migration 0006 forward, backward and forward again, on the rows a 0005 registry holds.

Prints one JSON line with what it saw; the test asserts on it. Marks are invented.
"""

from __future__ import annotations

import datetime as dt
import json

from django.core.management import call_command
from django.db import DatabaseError, connection, transaction
from django.db.migrations.executor import MigrationExecutor

BEFORE, AFTER = ("registry", "0005_position_history_triggers"), ("registry", "0006_own_vocabulary_and_suspect")
UTC = dt.UTC


def models_at(node):
    return MigrationExecutor(connection).loader.project_state(node).apps


def seed():
    apps = models_at(BEFORE)
    Mark, Position, Visit = (apps.get_model("registry", n) for n in ("Mark", "Position", "Visit"))
    cov = {"cov_ee_m2": 1e-5, "cov_nn_m2": 1e-5, "cov_uu_m2": 4e-5}

    def mark(code, status="active", **kw):
        return Mark.objects.create(
            code=code,
            status=status,
            monument_type="disk_rock",
            setting="bronze disk in outcrop",
            stamping=f"{code} 2009",
            to_reach="From the gate, 40 m north.",
            custodian="Ridge Survey Office (invented)",
            **kw,
        )

    def published(m, day):
        return Position.objects.create(
            mark=m,
            frame_epsg=6319,
            epoch_yr=2010.0,
            lat_deg=45.2,
            lon_deg=-110.6,
            h_m=1500.0,
            source="adjustment (invented)",
            state="published",
            decided_at=dt.datetime.combine(day, dt.time(12), tzinfo=UTC),
            **cov,
        )

    def visit(m, day, condition):
        Visit.objects.create(mark=m, visited_on=day, condition=condition)

    quiet = mark("MG-QUIET")  # good and poor visits only
    visit(quiet, dt.date(2021, 5, 1), "good")
    visit(quiet, dt.date(2022, 5, 1), "poor")
    old_news = mark("MG-OLDNEWS")  # disturbed before its newest publication
    published(old_news, dt.date(2020, 6, 1))
    visit(old_news, dt.date(2019, 6, 1), "disturbed")
    lost = mark("MG-LOST")  # not found after its publication, then a good visit: still suspect
    published(lost, dt.date(2020, 6, 1))
    visit(lost, dt.date(2021, 6, 1), "not_found")
    visit(lost, dt.date(2022, 6, 1), "good")
    same_day = mark("MG-SAMEDAY")  # disturbed on the publication day: suspect (on or after)
    published(same_day, dt.date(2020, 6, 1))
    visit(same_day, dt.date(2020, 6, 1), "disturbed")
    unpublished = mark("MG-NOPOS")  # no published position at all
    visit(unpublished, dt.date(2018, 1, 1), "disturbed")
    retired = mark("MG-RETIRED", status="retired")  # not changed by visits
    visit(retired, dt.date(2023, 1, 1), "not_found")


def refused(sql):
    try:
        with transaction.atomic(), connection.cursor() as cur:
            cur.execute(sql)
    except DatabaseError:
        return True
    return False


def snapshot():
    with connection.cursor() as cur:
        cur.execute("SELECT * FROM registry_mark WHERE 1 = 0")
        mark_columns = sorted(c[0] for c in cur.description)
        cur.execute("SELECT * FROM registry_visit WHERE 1 = 0")
        visit_columns = sorted(c[0] for c in cur.description)
        finding = "finding" if "finding" in visit_columns else "condition"
        cur.execute(f"SELECT {finding}, COUNT(*) FROM registry_visit GROUP BY {finding}")
        values = dict(cur.fetchall())
        cur.execute("SELECT code, status FROM registry_mark ORDER BY code")
        statuses = dict(cur.fetchall())
        reasons = {}
        if "suspect_reason" in mark_columns:
            cur.execute("SELECT code, suspect_since, suspect_reason FROM registry_mark WHERE status = 'suspect'")
            reasons = {code: [str(since), reason] for code, since, reason in cur.fetchall()}
        cur.execute("SELECT COUNT(*) FROM registry_auditevent WHERE action = 'mark_make_suspect'")
        (audited,) = cur.fetchone()
        marking = "marking" if "marking" in mark_columns else "stamping"
        cur.execute(f"SELECT {marking} FROM registry_mark WHERE code = 'MG-QUIET'")
        (stamp,) = cur.fetchone()
    guards = {
        "position_frozen": refused("UPDATE registry_position SET lat_deg = lat_deg + 1 WHERE state = 'published'"),
        "position_history_no_delete": refused("DELETE FROM registry_position WHERE state = 'published'"),
        "position_state_transition": refused("UPDATE registry_position SET state = 'proposed'"),
        "audit_append_only": refused("DELETE FROM registry_auditevent"),
    }
    return {
        "mark_columns": mark_columns,
        "visit_columns": visit_columns,
        "values": values,
        "statuses": statuses,
        "reasons": reasons,
        "audited": audited,
        "marking": stamp,
        "guards": guards,
    }


def main():
    call_command("migrate", *BEFORE, verbosity=0)
    seed()
    with connection.cursor() as cur:  # one audit row, so that the append-only guard has something to refuse
        cur.execute(
            "INSERT INTO registry_auditevent (at, action, object_type, object_id, object_repr, note) "
            "VALUES (CURRENT_TIMESTAMP, 'seed', 'test', '1', 'seed', '')"
        )
    call_command("migrate", *AFTER, verbosity=0)
    forward = snapshot()
    call_command("migrate", *BEFORE, verbosity=0)
    backward = snapshot()
    call_command("migrate", *AFTER, verbosity=0)
    again = snapshot()
    print(json.dumps({"vendor": connection.vendor, "forward": forward, "backward": backward, "again": again}))


if __name__ == "__main__":  # only in its own process (pytest imports this file for doctests)
    import django

    django.setup()
    main()
