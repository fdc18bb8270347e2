"""Benchmark: batch occupation results from CSV (registry.services.occupation_batch), rows per second.

    .venv/bin/python benchmarks/bench_occupation_import.py [--rows 1000] [--repeat 3]
        [--backend both|postgis|sqlite]
        [--pg-url postgres://postgres@127.0.0.1:5432/reg_rinex] [--sqlite-path var/bench/occupations.sqlite3]

Each backend runs in its own process against a separate benchmark database (SQLite: a file under
``var/bench/``; PostgreSQL: the given database, migrated here). It creates 200 invented marks once,
then, ``--repeat`` times, writes a CSV of ``--rows`` rows (every row with a result, so each row makes
a proposed position, an occupation and two audit rows) with start times not used before, and times
``occupation_batch_import`` end to end: a dry run (the preview page) and the real import. It prints the
median rows/s of each and checks the audit trail's hash chain afterwards (``audit_verify_chain``).
"""

from __future__ import annotations

import argparse
import datetime as dt
import json
import os
import statistics
import subprocess
import sys
import time
from pathlib import Path

from benchcommon import ensure_pg_database

ROOT = Path(__file__).resolve().parent.parent
MARKS = 200
HEADER = "mark,method,start_utc,end_utc,antenna_height_m,frame_epsg,epoch_yr,lat_deg,lon_deg,h_m,sigma_e_mm,sigma_n_mm,sigma_u_mm,source\n"


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--rows", type=int, default=1000)
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--backend", choices=["both", "postgis", "sqlite"], default="both")
    ap.add_argument("--pg-url", default="postgres://postgres@127.0.0.1:5432/reg_rinex")
    ap.add_argument("--sqlite-path", default=str(ROOT / "var" / "bench" / "occupations.sqlite3"))
    ap.add_argument("--worker", action="store_true", help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.worker:
        os.environ.setdefault("DJANGO_SETTINGS_MODULE", "registry.settings")
        sys.path.insert(0, str(ROOT))
        import django

        django.setup()
        from registry.services.imports import ImportRejected

        try:
            print(json.dumps(worker(args)))
        except ImportRejected as exc:
            sys.exit("\n".join(str(e) for e in exc.errors[:5]))
        return
    backends = ["sqlite", "postgis"] if args.backend == "both" else [args.backend]
    for backend in backends:
        env = dict(os.environ)
        if backend == "postgis":
            ensure_pg_database(args.pg_url)
            env["DATABASE_URL"] = args.pg_url
        else:
            Path(args.sqlite_path).parent.mkdir(parents=True, exist_ok=True)
            env["DATABASE_URL"] = f"sqlite:///{Path(args.sqlite_path).resolve()}"
        cmd = [sys.executable, __file__, "--worker", "--rows", str(args.rows), "--repeat", str(args.repeat)]
        out = subprocess.run(cmd, env=env, cwd=ROOT, check=True, capture_output=True, text=True)
        r = json.loads(out.stdout.strip().splitlines()[-1])
        print(
            f"{backend:8s} {args.rows} rows × {args.repeat}: preview (dry run) median {r['dry_rows_s']:.0f} rows/s, "
            f"import median {r['real_rows_s']:.0f} rows/s (runs: {', '.join(f'{v:.0f}' for v in r['real_all'])}); "
            f"audit chain intact over {r['audit_rows']} rows: {r['chain_ok']}; load average {r['load']}"
        )


def worker(args) -> dict:
    os.environ.setdefault("DJANGO_SETTINGS_MODULE", "registry.settings")
    sys.path.insert(0, str(ROOT))
    import django

    django.setup()
    from django.contrib.auth import get_user_model
    from django.contrib.auth.models import Group
    from django.core.management import call_command

    from registry.models import Mark, Occupation
    from registry.roles import ensure_roles
    from registry.selectors.audit import audit_verify_chain
    from registry.services.occupation_batch import occupation_batch_import

    call_command("migrate", verbosity=0)
    ensure_roles()
    User = get_user_model()
    user, created = User.objects.get_or_create(username="bench_technician")
    if created:
        user.groups.add(Group.objects.get(name="technician"))
    if Mark.objects.filter(code__startswith="BENCH-").count() < MARKS:
        Mark.objects.bulk_create(
            [Mark(code=f"BENCH-{i:04d}", name=f"Bench mark {i}") for i in range(MARKS)], ignore_conflicts=True
        )
    # start times never used before (10 minutes apart, after those of earlier runs)
    base = dt.datetime(2005, 1, 1, tzinfo=dt.UTC) + dt.timedelta(minutes=10 * Occupation.objects.count())

    def csv_text(offset_rows: int) -> bytes:
        lines = [HEADER]
        for i in range(args.rows):
            start = base + dt.timedelta(minutes=10 * (offset_rows + i))
            end = start + dt.timedelta(minutes=5)
            lat = 45.2 + (i % MARKS) * 0.001
            lines.append(
                f"BENCH-{i % MARKS:04d},rtk,{start:%Y-%m-%dT%H:%M:%SZ},{end:%Y-%m-%dT%H:%M:%SZ},1.800,6319,2024.5,"
                f"{lat:.9f},-110.600000000,1400.000,8,8,15,bench (invented)\n"
            )
        return "".join(lines).encode()

    dry, real = [], []
    for k in range(args.repeat):
        content = csv_text(offset_rows=k * args.rows)
        t0 = time.perf_counter()
        occupation_batch_import(actor=user, content=content, filename="bench.csv", dry_run=True)
        dry.append(args.rows / (time.perf_counter() - t0))
        t0 = time.perf_counter()
        occupation_batch_import(actor=user, content=content, filename="bench.csv")
        real.append(args.rows / (time.perf_counter() - t0))
    report = audit_verify_chain()
    return {
        "dry_rows_s": statistics.median(dry),
        "real_rows_s": statistics.median(real),
        "real_all": real,
        "chain_ok": report.intact and report.rows == report.total,
        "audit_rows": report.total,
        "load": " ".join(f"{v:.2f}" for v in os.getloadavg()),
    }


if __name__ == "__main__":
    main()
