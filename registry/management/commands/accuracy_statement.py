"""``manage.py accuracy_statement``: an accuracy statement from a covariance or from check-point residuals.

    python manage.py accuracy_statement (--cov-en VAR_E COV_EN VAR_N [--var-u VAR_U] | --residuals FILE.csv)
        [--style fgdc|nssda|asprs2023] [--json]

Variances and covariances are in m². The residual CSV format is described in
``registry.geodesy.statements`` (and in the README): ``point_id,de_m,dn_m,du_m`` plus optional
``sigma_e_m,sigma_n_m,sigma_u_m``. ``--residuals -`` reads the CSV from standard input.

The same function (:func:`registry.geodesy.statements.accuracy_report`) serves the page
``/tools/accuracy/`` and ``POST /api/accuracy/``; ``--json`` prints what the API returns.
"""

from __future__ import annotations

import json
import re
import sys
from pathlib import Path

from django.core.management.base import BaseCommand, CommandError

from registry.geodesy.accuracy import ComputationInputError
from registry.geodesy.statements import STYLES, accuracy_report, parse_residuals_csv, report_as_json

MAX_FILE_BYTES = 20 * 1024 * 1024
NEGATIVE_NUMBER = re.compile(r"^-(\d+\.?\d*|\.\d+)([eE][-+]?\d+)?$")


class Command(BaseCommand):
    help = (
        "Accuracy statement (FGDC-STD-007.2-1998 network accuracy, NSSDA, or ASPRS Edition 2 2023) from a point's "
        "east/north covariance (m²) or from a CSV of check-point residuals."
    )

    def add_arguments(self, parser):
        # argparse (Python 3.11) reads "-2e-05" as an option name: its negative-number pattern knows only
        # "-1" and "-0.5". Covariances are often negative and written in scientific notation, so widen it.
        parser._negative_number_matcher = NEGATIVE_NUMBER
        source = parser.add_mutually_exclusive_group(required=True)
        source.add_argument(
            "--cov-en",
            nargs=3,
            type=float,
            metavar=("VAR_E", "COV_EN", "VAR_N"),
            help="East variance, east-north covariance, north variance of the point (m²).",
        )
        source.add_argument(
            "--residuals",
            metavar="FILE.csv",
            help="CSV of check-point residuals dataset − check (m): point_id,de_m,dn_m,du_m[,sigma_e_m,sigma_n_m,sigma_u_m]; '-' reads standard input.",
        )
        parser.add_argument(
            "--var-u", type=float, metavar="VAR_U", help="Ellipsoid-height (up) variance (m²), with --cov-en."
        )
        parser.add_argument(
            "--style",
            choices=STYLES,
            help="fgdc (default with --cov-en), nssda (default with --residuals) or asprs2023.",
        )
        parser.add_argument("--json", action="store_true", help="Print the result as JSON (as the API returns it).")

    def handle(self, *args, **options):
        residuals = None
        if options["residuals"] is not None:
            residuals = self._read_residuals(options["residuals"])
        try:
            report = accuracy_report(
                style=options["style"],
                cov_en_m2=options["cov_en"],
                var_u_m2=options["var_u"],
                residuals=residuals,
            )
        except ComputationInputError as exc:
            raise CommandError(f"{exc.message} [{exc.code}]") from exc
        if options["json"]:
            self.stdout.write(json.dumps(report_as_json(report), indent=2, ensure_ascii=False))
            return
        self.stdout.write(self._text(report))

    def _read_residuals(self, name: str):
        if name == "-":
            text = sys.stdin.read()
        else:
            path = Path(name)
            if not path.is_file():
                raise CommandError(f"No such file: {name} [file_not_found]")
            if path.stat().st_size > MAX_FILE_BYTES:
                raise CommandError(f"{name} is larger than {MAX_FILE_BYTES // 2**20} MB [file_too_large]")
            try:
                text = path.read_text(encoding="utf-8-sig")
            except UnicodeDecodeError as exc:
                raise CommandError(f"{name} is not UTF-8 text [not_utf8]") from exc
        try:
            return parse_residuals_csv(text)
        except ComputationInputError as exc:
            raise CommandError(f"{name}: {exc.message} [{exc.code}]") from exc

    @staticmethod
    def _text(report: dict) -> str:
        from registry.formatting import format_mm

        out = [report["standard"], ""]
        out += report["statement_lines"]
        out.append("")
        rows: list[tuple[str, str]] = []
        if report["style"] == "fgdc":
            rows.append(
                ("σmax / σmin (mm)", f"{format_mm(report['sigma_max_m'])} / {format_mm(report['sigma_min_m'])}")
            )
            rows.append(("C = σmin/σmax, K", f"{report['c_ratio']:.4f}, {report['k_factor']:.6f}"))
            if report["sigma_u_m"] is not None:
                rows.append(("σ up (mm)", format_mm(report["sigma_u_m"])))
        else:
            rows.append(("check points", str(report["n_checkpoints"])))
            for key in (
                "rmse_x_m",
                "rmse_y_m",
                "rmse_r_m",
                "rmse_z_m",
                "rmse_h1_m",
                "rmse_h2_m",
                "rmse_h_m",
                "rmse_v1_m",
                "rmse_v2_m",
                "rmse_v_m",
                "rmse_3d_m",
            ):
                if report.get(key) is not None:
                    rows.append((key[:-2].upper() + " (mm)", format_mm(report[key])))
        for key, label in (("horizontal_95_m", "horizontal at 95% (mm)"), ("vertical_95_m", "vertical at 95% (mm)")):
            if report[key] is not None:
                rows.append((label, format_mm(report[key])))
        if report.get("horizontal_formula"):
            out.append(f"Horizontal figure: {report['horizontal_formula']}.")
        width = max(len(label) for label, _ in rows)
        vwidth = max(len(v) for _, v in rows)
        out += [f"  {label:<{width}}  {value:>{vwidth}}" for label, value in rows]
        if report["findings"]:
            out += ["", "Findings:"] + [f"  - {f['message']}" for f in report["findings"]]
        for b in report.get("blunders") or []:
            out.append(f"    {b['point_id']}: {b['axis']} residual {format_mm(b['residual_m'])} mm")
        out += ["", "Cautions:"] + [f"  - {c}" for c in report["cautions"]]
        return "\n".join(out)
