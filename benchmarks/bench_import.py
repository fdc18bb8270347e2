"""Benchmark: the marks CSV import (rows per second), an absurd header, and a large file of bad rows.

    .venv/bin/python benchmarks/bench_import.py [--rows 5000] [--backend both|postgis|sqlite]
        [--sizes 1000,8000] [--runs 3] [--before-ref GIT_REF] [--before-sizes 1000] [--profile MARKS]
        [--pg-url postgres://postgres@127.0.0.1:5432/reg_infra_import]
        [--sqlite-path var/bench/import.sqlite3]

Each backend runs in its own process against a scratch database that is emptied of marks,
positions and audit rows first (never the working database). The file is invented: ``--rows``
new marks, each with one position in EPSG:7912 and a second one in EPSG:6319 on every fourth
mark (so some marks take two rows: 1,000 marks make 1,250 rows), written the way the export writes them.
It prints:

- for each of ``--sizes`` (marks per file), ``--runs`` imports of a new file each (medians): the
  service's time for the whole file (parse, checks, writes, audit) as wall-clock time and as this
  process's CPU time (the machine may be shared: CPU time is what the import itself costs; on
  PostgreSQL the server's work is in another process), rows per second of each, and the number
  of SQL statements (on PostgreSQL those through Django plus COPY streams; on SQLite every
  statement SQLite runs, transaction control included);
- with ``--profile MARKS``, one more import of that many marks under cProfile (to stderr: the
  functions by cumulative and by own time);
- with ``--before-ref``, the same measured with the code of that git commit (``git archive`` into a
  scratch folder; the same migrations) in the same run, and the ratios after/before;
- a second import of the same file with ``update`` (every row unchanged: the check path);
- that the audit hash chain still verifies (``verify_audit``);
- the time to refuse a header of 100,000 columns;
- for a file of ``--rows`` bad rows: the time to refuse it and the size of the import page's
  answer (first errors shown, the full list downloadable).
"""

from __future__ import annotations

import argparse
import io
import json
import os
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
HEADER = "code,name,monument,status,frame_epsg,epoch_yr,lat_deg,lon_deg,h_m,sigma_e_mm,sigma_n_mm,sigma_u_mm,source"


def good_csv(n: int, prefix: str = "IMP") -> str:
    lines = [HEADER]
    for i in range(n):
        lat = 44.0 + (i % 1000) * 0.001
        lon = -110.0 - (i // 1000) * 0.001
        code = f"{prefix}-{i:06d}"
        lines.append(
            f"{code},Invented mark {i},disk_concrete,active,7912,2021.5,{lat:.9f},{lon:.9f},{1500 + i % 300}.123,"
            "4,5,9,bench campaign"
        )
        if i % 4 == 0:
            lines.append(
                f"{code},Invented mark {i},disk_concrete,active,6319,2010.0,{lat + 1e-6:.9f},{lon - 1e-6:.9f},"
                f"{1499 + i % 300}.456,5,6,11,bench campaign"
            )
    return "\n".join(lines) + "\n"


def bad_csv(n: int) -> str:
    lines = [HEADER]
    for i in range(n):
        lines.append(f"BAD-{i:07d},{'x' * 150},disk_concrete,active,7912,2021.5,95.0,-500.0,1500,4,5,9,{'y' * 150}")
    return "\n".join(lines) + "\n"


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--rows", type=int, default=5000)
    ap.add_argument("--wide-columns", type=int, default=100_000, help="columns of the absurd header")
    ap.add_argument("--backend", choices=["both", "postgis", "sqlite"], default="both")
    ap.add_argument("--pg-url", default="postgres://postgres@127.0.0.1:5432/reg_infra_import")
    ap.add_argument("--sqlite-path", default=str(ROOT / "var" / "bench" / "import.sqlite3"))
    ap.add_argument("--sizes", default="1000,8000", help="marks per file, comma-separated (1,000 marks = 1,250 rows)")
    ap.add_argument("--runs", type=int, default=3, help="imports per size (medians)")
    ap.add_argument("--before-ref", default="", help="git commit whose code is measured too (before/after)")
    ap.add_argument("--before-sizes", default="1000", help="sizes measured with the --before-ref code")
    ap.add_argument("--before-runs", type=int, default=3)
    ap.add_argument("--profile", type=int, default=0, help="marks of one more import run under cProfile (stderr)")
    ap.add_argument("--code-root", default="", help=argparse.SUPPRESS)
    ap.add_argument("--timing-only", action="store_true", help=argparse.SUPPRESS)
    ap.add_argument("--worker", action="store_true", help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.worker:
        print(json.dumps(worker(args)))
        return
    results: dict[str, dict] = {}
    before_root = _extract(args.before_ref) if args.before_ref else None
    for backend in ["postgis", "sqlite"] if args.backend == "both" else [args.backend]:
        if before_root is not None:
            extra = ["--sizes", args.before_sizes, "--runs", str(args.before_runs), "--code-root", str(before_root)]
            results.setdefault("before", {})[backend] = _run(args, backend, extra + ["--timing-only"])
        results.setdefault("after", {})[backend] = _run(
            args, backend, ["--sizes", args.sizes, "--runs", str(args.runs), "--profile", str(args.profile)]
        )
    print()
    for backend, r in results["after"].items():
        print(
            f"{backend}: import of new marks, medians of {args.runs} runs (before: {args.before_ref or 'not measured'})"
        )
        print(f"  {'rows':>7} {'code':7} {'wall s':>8} {'rows/s':>8} {'CPU s':>8} {'rows/s':>8} {'SQL':>6}")
        before = results.get("before", {}).get(backend, {"timings": {}})
        for size, t in r["timings"].items():
            for label, m in (("before", before["timings"].get(size)), ("after", t)):
                if m is None:
                    continue
                print(
                    f"  {m['rows']:>7,} {label:7} {m['wall_s']:8.2f} {m['wall_rows_s']:8.0f} {m['cpu_s']:8.2f} "
                    f"{m['cpu_rows_s']:8.0f} {m['queries']:>6}"
                )
            b = before["timings"].get(size)
            if b is not None:
                print(
                    f"  {'':>7} {'ratio':7} {'':8} {t['wall_rows_s'] / b['wall_rows_s']:7.1f}× {'':8} "
                    f"{t['cpu_rows_s'] / b['cpu_rows_s']:7.1f}×"
                )
        print(
            f"  same file with update    {r['update_s']:8.2f} s  {r['update_rows_s']:8.0f} rows/s  {r['update_queries']:>7} queries"
        )
        print(f"  audit chain verifies     {r['audit_ok']}  ({r['audit_rows']:,} audit rows)")
        print(f"  {r['wide_columns']:,}-column header  {r['wide_header_s']:8.3f} s  refused: {r['wide_header_codes']}")
        print(
            f"  {r['bad_rows']:,} bad rows ({r['bad_file_bytes'] / 2**20:.1f} MB) {r['bad_s']:8.2f} s  {r['bad_errors']:,} errors; page "
            f"{r['bad_page_bytes'] / 1024:,.0f} KiB (HTTP {r['bad_page_status']})"
        )
        print(f"  1-minute load average {r['load_average_1min']:.1f} ({os.cpu_count()} CPUs)")
    print()
    print(json.dumps(results, indent=2))


def _extract(ref: str) -> Path:
    """The ``registry`` package of commit ``ref``, in a scratch folder (for the before measurement)."""
    import tempfile

    root = Path(tempfile.mkdtemp(prefix="bench-import-before-"))
    archive = subprocess.run(["git", "archive", ref, "registry"], cwd=ROOT, capture_output=True, check=True).stdout
    subprocess.run(["tar", "-x", "-C", str(root)], input=archive, check=True)
    return root


def _run(args, backend: str, extra: list[str]) -> dict:
    env = dict(os.environ)
    env.pop("REGISTRY_PRODUCTION", None)
    env["REGISTRY_TASK_BACKEND"] = "immediate"  # queued imports run at once in this process
    if backend == "postgis":
        import psycopg

        dbname = args.pg_url.rsplit("/", 1)[1]
        with psycopg.connect(args.pg_url.rsplit("/", 1)[0] + "/postgres", autocommit=True) as conn:
            conn.execute(f'DROP DATABASE IF EXISTS "{dbname}"')  # a scratch database, made anew
            conn.execute(f'CREATE DATABASE "{dbname}"')
        env["DATABASE_URL"] = args.pg_url
    else:
        Path(args.sqlite_path).parent.mkdir(parents=True, exist_ok=True)
        Path(args.sqlite_path).unlink(missing_ok=True)  # a scratch database, made anew
        env["DATABASE_URL"] = f"sqlite:///{Path(args.sqlite_path).resolve()}"
    cmd = [sys.executable, __file__, "--worker", "--backend", backend, "--rows", str(args.rows)]
    cmd += ["--wide-columns", str(args.wide_columns), *extra]
    out = subprocess.run(cmd, env=env, cwd=ROOT, capture_output=True, text=True)
    sys.stderr.write(out.stderr)
    if out.returncode:
        raise SystemExit(f"the {backend} run failed (exit {out.returncode})")
    return json.loads(out.stdout.strip().splitlines()[-1])


def _timings(args, user, mark_import, counter) -> dict:
    """Median wall and CPU time of ``--runs`` imports of a new file of each size."""
    import statistics

    out = {}
    for size in [int(x) for x in args.sizes.split(",") if x.strip()]:
        runs = []
        for k in range(args.runs):
            text = good_csv(size, prefix=f"S{size}R{k}")
            counter[0] = 0
            t0, c0 = time.perf_counter(), time.process_time()
            summary = mark_import(actor=user, content=text.encode(), filename=f"bench-{size}-{k}.csv")
            runs.append((time.perf_counter() - t0, time.process_time() - c0, counter[0]))
            assert len(summary.created) == size, summary
        rows = text.count("\n") - 1
        wall = statistics.median(r[0] for r in runs)
        cpu = statistics.median(r[1] for r in runs)
        out[str(size)] = {
            "rows": rows,
            "runs": len(runs),
            "wall_s": wall,
            "cpu_s": cpu,
            "wall_rows_s": rows / wall,
            "cpu_rows_s": rows / cpu,
            "queries": int(statistics.median(r[2] for r in runs)),
            "each_wall_s": [r[0] for r in runs],
            "each_cpu_s": [r[1] for r in runs],
        }
    return out


def worker(args) -> dict:
    os.environ.setdefault("DJANGO_SETTINGS_MODULE", "registry.settings")
    sys.path.insert(0, args.code_root or str(ROOT))
    import django

    django.setup()
    from django.contrib.auth import get_user_model
    from django.contrib.auth.models import Group
    from django.core.files.uploadedfile import SimpleUploadedFile
    from django.core.management import call_command
    from django.db import connection
    from django.test import Client

    from registry.models import AuditEvent, Mark
    from registry.roles import ensure_roles
    from registry.services.imports import ImportRejected, mark_import

    call_command("migrate", verbosity=0)
    ensure_roles()
    User = get_user_model()
    user, _ = User.objects.get_or_create(username="bench-manager")
    user.groups.set([Group.objects.get(name="manager")])

    counter = [0]
    if connection.vendor == "sqlite":
        # every statement SQLite runs (the batch insert uses sqlite3's cursor directly); not trigger steps
        def traced(sql: str) -> None:
            if not sql.lstrip().startswith("--"):
                counter[0] += 1

        connection.ensure_connection()
        connection.connection.set_trace_callback(traced)
    else:

        def count(execute, sql, params, many, context):
            counter[0] += 1
            return execute(sql, params, many, context)

        connection.execute_wrappers.append(count)  # every statement through Django, for the whole run
        import psycopg

        copy = psycopg.Cursor.copy

        def counted_copy(self, *a, **k):
            counter[0] += 1
            return copy(self, *a, **k)

        psycopg.Cursor.copy = counted_copy
    timings = _timings(args, user, mark_import, counter)
    if args.profile:
        import cProfile
        import pstats

        text = good_csv(args.profile, prefix="PROF")
        profile = cProfile.Profile()
        profile.runcall(mark_import, actor=user, content=text.encode(), filename="profile.csv")
        print(f"--- {connection.vendor}: profile of one import of {text.count(chr(10)) - 1:,} rows", file=sys.stderr)
        stats = pstats.Stats(profile, stream=sys.stderr)
        stats.sort_stats("cumulative").print_stats(30)
        stats.sort_stats("tottime").print_stats(20)
    if args.timing_only:
        return {"timings": timings, "load_average_1min": os.getloadavg()[0]}
    exported = _export_all()
    counter[0] = 0
    t0 = time.perf_counter()
    mark_import(actor=user, content=exported.encode(), filename="bench-again.csv", update=True)
    update_s = time.perf_counter() - t0
    update_queries = counter[0]
    n_rows = exported.count("\n") - 1

    out = io.StringIO()
    try:
        call_command("verify_audit", stdout=out, stderr=out)
        audit_ok = True
    except SystemExit as exc:
        audit_ok = exc.code == 0
    except Exception as exc:  # noqa: BLE001 - report, do not hide
        audit_ok = f"failed: {exc}"

    cols = args.wide_columns
    wide = ",".join(f"col{i}" for i in range(cols)) + "\n" + ",".join("x" for _ in range(cols)) + "\n"
    t0 = time.perf_counter()
    try:
        mark_import(actor=user, content=wide.encode(), filename="wide.csv")
        wide_codes = []
    except ImportRejected as exc:
        wide_codes = sorted({e.code for e in exc.errors})
    wide_s = time.perf_counter() - t0

    bad = bad_csv(args.rows * 10)
    t0 = time.perf_counter()
    try:
        mark_import(actor=user, content=bad.encode(), filename="bad.csv")
        bad_errors = 0
    except ImportRejected as exc:
        bad_errors = getattr(exc, "total", len(exc.errors))
    bad_s = time.perf_counter() - t0
    client = Client(HTTP_HOST="localhost")
    client.force_login(user)
    # A large file is queued for the task worker (here the immediate backend runs it at once) and the
    # page follows the run: measure the page the user ends on.
    resp = client.post(
        "/marks/import/",
        {"file": SimpleUploadedFile("bad.csv", bad.encode(), content_type="text/csv")},
        follow=True,
    )

    return {
        "timings": timings,
        "rows": n_rows,
        "update_s": update_s,
        "update_rows_s": n_rows / update_s,
        "update_queries": update_queries,
        "audit_ok": audit_ok,
        "audit_rows": AuditEvent.objects.count(),
        "wide_columns": cols,
        "wide_header_s": wide_s,
        "wide_header_codes": wide_codes,
        "bad_s": bad_s,
        "bad_errors": bad_errors,
        "bad_page_bytes": len(resp.content),
        "bad_page_status": resp.status_code,
        "bad_file_bytes": len(bad),
        "bad_rows": args.rows * 10,
        "marks_in_db": Mark.objects.count(),
        "load_average_1min": os.getloadavg()[0],
    }


def _export_all() -> str:
    from registry.io.export import export_marks_text

    return export_marks_text(fmt="csv")


if __name__ == "__main__":
    main()
