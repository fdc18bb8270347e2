"""Benchmark: station description sheets, a 200-mark control report, PAdES signing.

    .venv/bin/python benchmarks/bench_documents.py [--repeat 40] [--marks 200]

In a throwaway SQLite database under ``var/bench/documents/`` (migrated, the invented demo district
loaded, plus ``--marks`` synthetic marks with published positions, visits and occupations around an
invented job site well away from the district; nothing is committed to the repository):

1. **Sheet**: ``selectors.sheets.sheet_content`` + ``reports.sheet.render_sheet`` for the demo's mark
   ASH-024 (three published frames, ten visits, six occupations), in process, without the photo decode
   (``include_photos=False``); median and 90th percentile of ``--repeat`` runs after a warm-up.
2. **200-mark report**: ``reports.control_report.build_report_pdf`` for the synthetic job with the appendix
   holding every usable candidate (``appendix="candidates"``, 200 sheets): screening, map, tables, the
   appendix sheets, layout. One cold run and one warm run.
3. **Signing**: ``reports.signing.sign_pdf`` of the sheet (appearance, PAdES CMS with ECDSA P-256 and
   SHA-256, incremental update) with a DEMO certificate; median of ``--repeat`` runs.

Targets (issue 8): sheet < 30 ms median, 200-mark report < 10 s, signing < 100 ms. Wall-clock figures
depend on what else runs on the machine; the CPU time of this process is printed beside them.
"""

from __future__ import annotations

import argparse
import datetime as dt
import os
import shutil
import statistics
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
BENCH_DIR = ROOT / "var" / "bench" / "documents"
#: The synthetic job site (invented; ~150 km from the demo district).
SITE_LAT, SITE_LON = 46.05, -111.90


def _setup_django() -> None:
    if BENCH_DIR.exists():
        shutil.rmtree(BENCH_DIR)
    BENCH_DIR.mkdir(parents=True)
    os.environ["REGISTRY_DATA_DIR"] = str(BENCH_DIR)
    os.environ.pop("DATABASE_URL", None)
    os.environ.setdefault("DJANGO_SETTINGS_MODULE", "registry.settings")
    os.environ["REGISTRY_OFFICE_NAME"] = "Benchmark office (invented)"
    sys.path.insert(0, str(ROOT))
    import django

    django.setup()
    from django.core.management import call_command

    call_command("migrate", verbosity=0)
    call_command("load_demo", stdout=open(os.devnull, "w"))  # noqa: SIM115


def _synthetic_marks(n: int) -> None:
    import numpy as np
    from django.utils import timezone

    from registry.models import Finding, Job, Mark, Occupation, Position, PositionState, Visit

    rng = np.random.default_rng(20261204)
    r_m = 6_000 * np.sqrt(rng.random(n))
    az = rng.random(n) * 2 * np.pi
    lat = SITE_LAT + r_m * np.cos(az) / 111_195.0
    lon = SITE_LON + r_m * np.sin(az) / (111_195.0 * np.cos(np.radians(SITE_LAT)))
    marks = Mark.objects.bulk_create(
        [
            Mark(
                code=f"BN-{i:04d}",
                name=f"Benchmark mark {i}",
                monument="disk_concrete",
                stability="moderate",
                sky_view="clear",
                access_directions="Invented access description for the benchmark.",
                search_lat_deg=float(lat[i]),
                search_lon_deg=float(lon[i]),
            )
            for i in range(n)
        ]
    )
    marks = list(Mark.objects.filter(code__startswith="BN-").order_by("code"))
    now = timezone.now()
    Position.objects.bulk_create(
        [
            Position(
                mark=m,
                frame_epsg=6319,
                epoch_yr=2010.0,
                lat_deg=float(lat[i]),
                lon_deg=float(lon[i]),
                h_m=1400.0 + 50 * rng.random(),
                cov_ee_m2=0.006**2,
                cov_nn_m2=0.007**2,
                cov_uu_m2=0.012**2,
                source="benchmark (invented)",
                state=PositionState.PUBLISHED,
                decided_at=now,
            )
            for i, m in enumerate(marks)
        ]
    )
    Visit.objects.bulk_create(
        [
            Visit(mark=m, visited_on=dt.date(2025, 5, 1) - dt.timedelta(days=k * 400), finding=Finding.INTACT)
            for m in marks
            for k in range(4)
        ]
    )
    Occupation.objects.bulk_create(
        [
            Occupation(
                mark=m,
                method="static_gnss",
                start_utc=dt.datetime(2024, 6, 1, 15, tzinfo=dt.UTC) - dt.timedelta(days=k * 500),
                end_utc=dt.datetime(2024, 6, 1, 21, tzinfo=dt.UTC) - dt.timedelta(days=k * 500),
                receiver="receiver R-01",
                antenna="antenna A-01",
                antenna_height_arp_m=1.5,
            )
            for m in marks
            for k in range(3)
        ]
    )
    Job.objects.create(
        code="BENCH-200",
        name="Benchmark job (invented)",
        site_geojson={"type": "Point", "coordinates": [SITE_LON, SITE_LAT]},
        frame_epsg=6319,
        epoch_yr=2010.0,
        tol_h_mm=30.0,
        tol_v_mm=50.0,
    )


def _stats(samples_ms: list[float], cpu_ms: list[float]) -> str:
    s = sorted(samples_ms)
    p90 = s[int(0.9 * (len(s) - 1))]
    return (
        f"median {statistics.median(s):.1f} ms, p90 {p90:.1f} ms (n = {len(s)}); "
        f"CPU time of this process: median {statistics.median(cpu_ms):.1f} ms"
    )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=40)
    parser.add_argument("--marks", type=int, default=200)
    args = parser.parse_args()
    t0 = time.perf_counter()
    _setup_django()
    _synthetic_marks(args.marks)
    print(f"setup (migrate, demo district, {args.marks} synthetic marks): {time.perf_counter() - t0:.1f} s")

    from django.contrib.auth import get_user_model

    from registry.models import Job, Mark, SigningCertificate
    from registry.reports import ca as ca_lib
    from registry.reports.control_report import build_report_pdf
    from registry.reports.sheet import render_sheet
    from registry.reports.signing import sign_pdf
    from registry.selectors.sheets import sheet_content
    from registry.services.certificates import key_secret

    mark = Mark.objects.get(code="ASH-024")

    def one_sheet():
        content = sheet_content(mark)
        return render_sheet(
            content,
            code="S-BNCH-0001",
            revision=1,
            issued=dt.date(2026, 12, 4),
            size_name="A4",
            office="Benchmark office (invented)",
            logo_path="",
            verify_url="http://127.0.0.1:8000/verify/S-BNCH-0001/",
            include_photos=False,
        )

    for _ in range(3):
        built = one_sheet()
    times, cpu = [], []
    for _ in range(args.repeat):
        t, c = time.perf_counter(), time.process_time()
        built = one_sheet()
        times.append((time.perf_counter() - t) * 1000)
        cpu.append((time.process_time() - c) * 1000)
    print(f"1. sheet of ASH-024 ({built.page_count} pages, {len(built.content)} bytes): {_stats(times, cpu)}")

    user = get_user_model().objects.get(username="demo_technician")
    job = Job.objects.get(code="BENCH-200")
    for label in ("cold", "warm"):
        t, c = time.perf_counter(), time.process_time()
        report, covered = build_report_pdf(
            job=job,
            actor=user,
            code="R-BNCH-0001",
            revision=1,
            options={"appendix": "candidates", "page_size": "A4", "statement_style": "nssda"},
            verify_url="http://127.0.0.1:8000/verify/R-BNCH-0001/",
        )
        print(
            f"2. control report, {label}: {time.perf_counter() - t:.2f} s (CPU {time.process_time() - c:.2f} s) for "
            f"{len(covered)} marks in the appendix, {report.page_count} pages, {len(report.content) / 1e6:.1f} MB"
        )

    cert = SigningCertificate.objects.select_related("authority", "user").get(user__username="demo_signatory")
    key = ca_lib.decrypt_key(cert.key_pem_encrypted, key_secret())

    def one_signature():
        return sign_pdf(
            built.content,
            certificate_pem=cert.certificate_pem,
            private_key=key,
            chain_pems=[cert.authority.certificate_pem],
            page=built.signature_page,
            box=built.signature_box,
            signer_name="Priya Vantongeren",
            licence_number="DEMO-0412",
            jurisdiction="Invented board (DEMO)",
            document_code="S-BNCH-0001",
            revision=1,
            signed_at=dt.datetime.now(dt.UTC),
            office="Benchmark office (invented)",
        )

    for _ in range(3):
        one_signature()
    times, cpu = [], []
    for _ in range(args.repeat):
        t, c = time.perf_counter(), time.process_time()
        one_signature()
        times.append((time.perf_counter() - t) * 1000)
        cpu.append((time.process_time() - c) * 1000)
    print(f"3. signing the sheet (PAdES, ECDSA P-256, SHA-256): {_stats(times, cpu)}")
    print(f"load average during the run: {os.getloadavg()[0]:.1f} (1 min) on {os.cpu_count()} CPUs")


if __name__ == "__main__":
    main()
