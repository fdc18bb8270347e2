"""Benchmark of a whole job screening (database reads + transforms + core + presenter) on the demo district.

    REGISTRY_DATA_DIR=/path/with/demo .venv/bin/python benchmarks/bench_job_screening.py [--repeat 7]

Needs a database holding the demo district (``manage.py load_demo``). For each demo job it runs the
uncached screening service ``--repeat`` times and prints the median and the minimum wall time, and the
process CPU time of the median run, with the machine's load average (the machine may be shared).
"""

from __future__ import annotations

import argparse
import datetime as dt
import os
import statistics
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
os.environ.setdefault("DJANGO_SETTINGS_MODULE", "registry.settings")

import django  # noqa: E402

django.setup()

from registry.models import Job  # noqa: E402


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=7)
    parser.add_argument("--as-of", default="2026-12-04")
    args = parser.parse_args()
    from registry.services.screening import run_screening, settings_from_job

    as_of = dt.date.fromisoformat(args.as_of)
    print(f"load average {os.getloadavg()[0]:.2f} (1 min), {os.cpu_count()} CPUs")
    for job in Job.objects.order_by("code"):
        s = settings_from_job(job)
        run_screening(s, as_of=as_of)  # warm-up
        wall, cpu = [], []
        for _ in range(args.repeat):
            t, c = time.perf_counter(), time.process_time()
            result = run_screening(s, as_of=as_of)
            wall.append(time.perf_counter() - t)
            cpu.append(time.process_time() - c)
        print(
            f"{job.code}: median {statistics.median(wall) * 1000:7.1f} ms wall, min {min(wall) * 1000:7.1f} ms, "
            f"median CPU {statistics.median(cpu) * 1000:7.1f} ms  ({len(result.candidates)} candidates, "
            f"{result.grid.e_m.size} site points)"
        )


if __name__ == "__main__":
    main()
