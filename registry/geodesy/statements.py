"""Accuracy statements: the one place where their wording is produced, and the report behind them.

Pages, the API, the ``accuracy_statement`` command and (later) the PDF documents all call
:func:`accuracy_report` and print its ``statement`` and ``findings`` unchanged, so a figure reads the
same everywhere.

Wording
-------
* NSSDA (FGDC-STD-007.3-1998 §3.2.3): the standard's own sentences, "Tested ___ meters horizontal
  accuracy at 95% confidence level" and "Tested ___ meters vertical accuracy at 95% confidence level",
  with the value in metres to 3 decimals (the registry keeps coordinates to the millimetre; the
  standard asks for as many places as the coordinates have).
* FGDC-STD-007.2-1998 network accuracy from a covariance: our own sentence giving the 95 % value,
  the standard's number and its accuracy class.
* ASPRS Edition 2 (2023): our own sentence giving RMSE_H, RMSE_V and RMSE_3D. Edition 2 removed the
  95 % confidence level as an accuracy measure, so no 95 % wording appears in that style.

Residual CSV format (``parse_residuals_csv``)
---------------------------------------------
One header line, then one check point per line; lines starting with ``#`` are comments::

    point_id,de_m,dn_m,du_m,sigma_e_m,sigma_n_m,sigma_u_m
    CP01,-0.060,0.080,0.055,0.010,0.010,0.015

``de_m, dn_m, du_m`` are residuals dataset − check point (east, north, up; metres). ``point_id`` is
required; give ``de_m`` and ``dn_m`` together (horizontal), ``du_m`` (vertical), or all three. The
optional ``sigma_*_m`` columns are each check point's own survey standard error per axis (ASPRS
Edition 2 adds their RMS in quadrature). A column that is present needs a value on every line.

No Django import.
"""

from __future__ import annotations

import csv
import io
import math
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from registry.formatting import format_cm, format_m, format_mm
from registry.geodesy import accuracy as acc
from registry.geodesy.accuracy import ComputationInputError, Finding

if TYPE_CHECKING:
    from registry.geodesy.stats import CombinationResult

__all__ = [
    "CAUTIONS",
    "RESIDUAL_COLUMNS",
    "STANDARD_NAMES",
    "STYLES",
    "ResidualTable",
    "accuracy_report",
    "asprs2023_statement_lines",
    "combination_text",
    "fgdc_statement_lines",
    "finding_text",
    "nssda_statement_lines",
    "parse_residuals_csv",
    "report_as_json",
    "residual_table_from_rows",
]

STYLES = ("fgdc", "nssda", "asprs2023")
STANDARD_NAMES = {
    "fgdc": "FGDC-STD-007.2-1998, Part 2: Standards for Geodetic Networks",
    "nssda": "FGDC-STD-007.3-1998, Part 3: National Standard for Spatial Data Accuracy (NSSDA)",
    "asprs2023": "ASPRS Positional Accuracy Standards for Digital Geospatial Data, Edition 2 (2023)",
}
STANDARD_SHORT = {"fgdc": "FGDC-STD-007.2-1998", "nssda": "NSSDA", "asprs2023": "ASPRS Edition 2 (2023)"}

#: Shown with every report (pages, command, API, PDFs).
CAUTIONS = (
    "These figures describe only the data entered: the covariance or the check-point residuals. "
    "They are as good as the adjustment or the check survey behind them.",
    "Before staking or setting out from a mark, verify it in the field (a check shot to another trusted mark). "
    "Local codes and licensed practice govern; a licensed surveyor decides whether a figure is fit for a purpose.",
)
_FGDC_CAUTION = (
    "A figure is a network accuracy only when the covariance expresses the position with respect to the "
    "datum (for example from an adjustment constrained to continuously operating reference stations); "
    "a covariance relative to nearby marks gives a local accuracy."
)

RESIDUAL_COLUMNS = ("point_id", "de_m", "dn_m", "du_m", "sigma_e_m", "sigma_n_m", "sigma_u_m")
_NUMBER_COLUMNS = RESIDUAL_COLUMNS[1:]
MAX_CHECKPOINTS = 100_000
_AXIS_NAMES = {"x": "east (x)", "y": "north (y)", "z": "up (z)"}
#: How the NSSDA horizontal figure was computed (``accuracy.nssda_horizontal_95_m`` method codes).
NSSDA_FORMULAS = {
    "equal": "1.7308 × RMSE_r (RMSE_x = RMSE_y)",
    "approximate": "2.4477 × 0.5 × (RMSE_x + RMSE_y) (RMSE_min/RMSE_max between 0.6 and 1)",
    "circular_error": (
        "K × RMSE_max, circular-error method of Greenwalt & Shultz (1968), the same K polynomial as "
        "FGDC-STD-007.2-1998 (RMSE_min/RMSE_max below 0.6)"
    ),
}


# --------------------------------------------------------------------------------------------------
# Statements
# --------------------------------------------------------------------------------------------------


def nssda_statement_lines(
    horizontal_95_m: float | None, vertical_95_m: float | None, *, decimals: int = 3, tested: bool = True
) -> list[str]:
    """The NSSDA reporting sentences (FGDC-STD-007.3-1998 §3.2.3), in metres.

    ``tested=False`` gives the "Compiled to meet" form, for data whose accuracy was established by
    other means than a test against an independent source of higher accuracy.

    Examples
    --------
    >>> nssda_statement_lines(0.2101, 0.0650)
    ['Tested 0.210 meters horizontal accuracy at 95% confidence level', 'Tested 0.065 meters vertical accuracy at 95% confidence level']
    """
    lead = "Tested" if tested else "Compiled to meet"
    lines = []
    for value, word in ((horizontal_95_m, "horizontal"), (vertical_95_m, "vertical")):
        if value is not None:
            lines.append(f"{lead} {format_m(value, decimals)} meters {word} accuracy at 95% confidence level")
    return lines


def fgdc_statement_lines(
    horizontal_95_m: float | None,
    horizontal_class: str | None,
    vertical_95_m: float | None = None,
    vertical_class: str | None = None,
    *,
    height_kind: str = "ellipsoid height",
    accuracy_kind: str = "network",
) -> list[str]:
    """Network (or local) accuracy sentences for FGDC-STD-007.2-1998 figures.

    Examples
    --------
    >>> fgdc_statement_lines(0.0137, "2-Centimeter")
    ['Horizontal network accuracy 0.014 m (13.7 mm) at the 95% confidence level: FGDC-STD-007.2-1998 class 2-Centimeter.']
    """
    lines = []
    if horizontal_95_m is not None:
        lines.append(
            f"Horizontal {accuracy_kind} accuracy {format_m(horizontal_95_m)} m ({format_mm(horizontal_95_m)} mm) "
            f"at the 95% confidence level: FGDC-STD-007.2-1998 class {_class_words(horizontal_class)}."
        )
    if vertical_95_m is not None:
        lines.append(
            f"{height_kind.capitalize()} {accuracy_kind} accuracy {format_m(vertical_95_m)} m ({format_mm(vertical_95_m)} mm) "
            f"at the 95% confidence level: FGDC-STD-007.2-1998 class {_class_words(vertical_class)}."
        )
    return lines


def _class_words(label: str | None) -> str:
    if label == acc.BEYOND_TABLE_CLASS:
        return "none, beyond the 10-Meter class at the end of the standard's table"
    return str(label)


def asprs2023_statement_lines(
    *, n: int, rmse_h_m: float | None, rmse_v_m: float | None, rmse_3d_m: float | None, survey_included: bool
) -> list[str]:
    """RMSE sentences for ASPRS Edition 2 (2023). No 95 % wording: Edition 2 removed it.

    Examples
    --------
    >>> asprs2023_statement_lines(n=30, rmse_h_m=0.044721, rmse_v_m=0.053852, rmse_3d_m=0.07, survey_included=True)[1]
    'Horizontal: RMSE_H = 0.045 m (4.5 cm).'
    """
    survey = "with" if survey_included else "without"
    lines = [
        f"Tested with {n} check points following the {STANDARD_NAMES['asprs2023']}; "
        f"root-mean-square errors {survey} the check points' own survey accuracy:"
    ]
    if rmse_h_m is not None:
        lines.append(f"Horizontal: RMSE_H = {format_m(rmse_h_m)} m ({format_cm(rmse_h_m)} cm).")
    if rmse_v_m is not None:
        lines.append(f"Vertical: RMSE_V = {format_m(rmse_v_m)} m ({format_cm(rmse_v_m)} cm).")
    if rmse_3d_m is not None:
        lines.append(f"Three-dimensional: RMSE_3D = {format_m(rmse_3d_m)} m ({format_cm(rmse_3d_m)} cm).")
    return lines


def finding_text(finding: Finding, *, style: str | None = None) -> str:
    """The sentence for a finding (warning) code. Every code used in ``accuracy`` has one."""
    p = finding.params
    code = finding.code
    if code == "too_few_checkpoints":
        name = STANDARD_SHORT.get(p.get("standard", style or ""), "the standard")
        return f"Only {p['n']} check points: {name} asks for at least {p['minimum']}. Treat the figures as indicative."
    if code == "nssda_ratio_outside":
        return (
            f"RMSE_min/RMSE_max = {p['ratio']:.3f} is below {p['limit']:g}, where the NSSDA approximation "
            "2.4477 × 0.5 × (RMSE_x + RMSE_y) no longer holds; the circular-error method of Greenwalt & Shultz "
            "(1968), the same K polynomial FGDC-STD-007.2-1998 uses (K × RMSE_max), is used instead "
            "(FGDC-STD-007.3-1998, Appendix 3-A)."
        )
        # Provenance (kept out of the sentence users read): that App. 3-A points to this method is from
        # memory, unconfirmed; see registry.geodesy.accuracy and tests/geodesy/test_accuracy.py.
    if code == "bias":
        axis = _AXIS_NAMES.get(p["axis"], p["axis"])
        if p.get("reference") == "target":
            compared = (
                f"{p['ratio'] * 100:.0f} % of the target RMSE ({p['target_rmse_m']:.4f} m), above the "
                f"{p['limit'] * 100:.0f} % limit of the ASPRS Positional Accuracy Standards, Edition 2 (2023)."
            )
        else:
            compared = (
                f"{p['ratio'] * 100:.0f} % of the measured RMSE ({p['rmse_m']:.4f} m), above {p['limit'] * 100:.0f} %. "
                "The standard compares the mean error with the target RMSE of the accuracy class; none was "
                "given, so the measured RMSE stands in."
            )
        return (
            f"Possible bias in {axis}: the mean error {p['mean_m']:+.4f} m is {compared} "
            "Look for a systematic cause (frame, epoch, geoid model, antenna height) before relying on the figures."
        )
    if code == "blunders":
        return (
            f"{p['count']} residual(s) exceed {p['factor']:g} × the RMSE of their axis. Investigate them; "
            "they were not removed."
        )
    if code == "survey_accuracy_not_given":
        return (
            f"The check points' own survey accuracy ({p['component']}) was not given and counts as zero, "
            "which understates the product's error."
        )
    if code == "checkpoints_not_twice_as_accurate":
        return (
            f"The check points' survey accuracy ({p['component']}, {p['survey_rmse_m']:.4f} m) is not at least twice "
            f"as good as the product's RMSE ({p['product_rmse_m']:.4f} m)."
        )
    if code == "beyond_table":
        return (
            f"The {p['component']} 95% value {p['value_m']:.3f} m is larger than the standard's last class (10 m); "
            "no class is assigned."
        )
    return code.replace("_", " ")


def combination_text(result: CombinationResult) -> str:
    """One line for a ``stats.CombinationResult``: which method and the spread test."""
    verdict = {
        "consistent": "the spread agrees with the stated sigmas",
        "too_large": "the spread is larger than the stated sigmas allow, so the sigmas are scaled by s0",
        "too_small": "the spread is smaller than the stated sigmas suggest (sigmas may be pessimistic)",
    }[result.spread]
    return (
        f"Weighted combination of {result.n} solutions (full covariance): s0 = {result.s0:.3f}, "
        f"vᵀWv = {result.omega:.4f} with {result.dof} degrees of freedom, two-sided {result.confidence * 100:g}% bounds "
        f"{result.chi2_lower:.4f} … {result.chi2_upper:.4f}: {verdict}."
    )


# --------------------------------------------------------------------------------------------------
# Residual tables (CSV and API rows)
# --------------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class ResidualTable:
    """Check-point residuals (dataset − check, m) and optional per-point survey sigmas (m)."""

    point_ids: tuple[str, ...]
    de_m: np.ndarray | None
    dn_m: np.ndarray | None
    du_m: np.ndarray | None
    sigma_e_m: np.ndarray | None = None
    sigma_n_m: np.ndarray | None = None
    sigma_u_m: np.ndarray | None = None

    @property
    def n(self) -> int:
        return len(self.point_ids)


def _err(message: str, code: str, **params: Any) -> ComputationInputError:
    return ComputationInputError(message, code=code, params=params)


def _build_table(columns: list[str], rows: list[tuple[int, dict[str, Any]]], where: str) -> ResidualTable:
    unknown = [c for c in columns if c not in RESIDUAL_COLUMNS]
    if unknown:
        raise _err(
            f"Unknown column(s) {', '.join(unknown)}; allowed: {', '.join(RESIDUAL_COLUMNS)}.",
            "residuals_unknown_column",
            columns=unknown,
        )
    if "point_id" not in columns:
        raise _err("The residuals need a point_id column.", "residuals_missing_column", column="point_id")
    if ("de_m" in columns) != ("dn_m" in columns):
        raise _err(
            "Give de_m and dn_m together (horizontal), or neither.", "residuals_missing_column", column="de_m/dn_m"
        )
    if "de_m" not in columns and "du_m" not in columns:
        raise _err(
            "The residuals need de_m and dn_m, or du_m, or all three.",
            "residuals_missing_column",
            column="de_m/dn_m/du_m",
        )
    if not rows:
        raise _err("No check points given.", "residuals_empty")
    if len(rows) > MAX_CHECKPOINTS:
        raise _err(f"At most {MAX_CHECKPOINTS} check points at a time.", "residuals_too_many", maximum=MAX_CHECKPOINTS)
    values: dict[str, list[float]] = {c: [] for c in columns if c != "point_id"}
    ids: list[str] = []
    seen: set[str] = set()
    for line, row in rows:
        pid = str(row.get("point_id") or "").strip()
        if not pid:
            raise _err(f"{where} {line}: point_id is empty.", "residuals_missing_value", line=line, column="point_id")
        if pid in seen:
            raise _err(
                f"{where} {line}: point_id {pid} appears twice.", "residuals_duplicate_point", line=line, point_id=pid
            )
        seen.add(pid)
        ids.append(pid)
        for col in values:
            raw = row.get(col)
            if raw is None or (isinstance(raw, str) and not raw.strip()):
                raise _err(f"{where} {line}: {col} is empty.", "residuals_missing_value", line=line, column=col)
            try:
                number = float(raw.strip()) if isinstance(raw, str) else float(raw)
            except (TypeError, ValueError):
                raise _err(
                    f"{where} {line}: {col} = {raw!r} is not a number.", "residuals_bad_number", line=line, column=col
                ) from None
            if not math.isfinite(number):
                raise _err(f"{where} {line}: {col} must be finite.", "residuals_bad_number", line=line, column=col)
            if col.startswith("sigma_") and number < 0.0:
                raise _err(f"{where} {line}: {col} cannot be negative.", "residuals_bad_number", line=line, column=col)
            values[col].append(number)
    arrays = {c: (np.array(values[c]) if c in values else None) for c in _NUMBER_COLUMNS}
    return ResidualTable(tuple(ids), **arrays)


def parse_residuals_csv(text: str) -> ResidualTable:
    """Parse the residual CSV described in the module docstring.

    Examples
    --------
    >>> t = parse_residuals_csv("point_id,du_m\\nA,0.01\\n# comment\\nB,-0.02\\n")
    >>> t.point_ids, t.du_m.tolist(), t.de_m
    (('A', 'B'), [0.01, -0.02], None)
    """
    if not isinstance(text, str):
        raise _err("The residuals must be text.", "residuals_empty")
    text = text.removeprefix("\ufeff")  # byte-order mark from spreadsheet exports
    lines = [
        (i, ln) for i, ln in enumerate(text.splitlines(), start=1) if ln.strip() and not ln.lstrip().startswith("#")
    ]
    if not lines:
        raise _err("The residual file is empty.", "residuals_empty")
    header_line, header = lines[0]
    columns = [c.strip() for c in next(csv.reader([header]))]
    if len(set(columns)) != len(columns):
        raise _err("A column name appears twice in the header.", "residuals_duplicate_column")
    rows: list[tuple[int, dict[str, Any]]] = []
    for line_no, ln in lines[1:]:
        cells = next(csv.reader(io.StringIO(ln)))
        if len(cells) != len(columns):
            raise _err(
                f"Line {line_no}: {len(cells)} values for {len(columns)} columns.", "residuals_bad_row", line=line_no
            )
        rows.append((line_no, dict(zip(columns, cells, strict=True))))
    return _build_table(columns, rows, "Line")


def residual_table_from_rows(rows: list[dict[str, Any]]) -> ResidualTable:
    """Build a table from a list of dicts (the API's ``residuals`` rows); same rules as the CSV."""
    if not isinstance(rows, list) or not all(isinstance(r, dict) for r in rows):
        raise _err("residuals must be a list of objects.", "residuals_bad_row")
    columns: list[str] = []
    for r in rows:
        for key, value in r.items():
            if key not in columns and value is not None:
                columns.append(key)
    return _build_table(columns, [(i, r) for i, r in enumerate(rows, start=1)], "Row")


# --------------------------------------------------------------------------------------------------
# The report (command, page, API)
# --------------------------------------------------------------------------------------------------


def _finding_dicts(findings: list[Finding], style: str) -> list[dict[str, Any]]:
    return [{"code": f.code, "message": finding_text(f, style=style), "params": dict(f.params)} for f in findings]


def _axes(result: acc.NssdaResult | acc.AsprsResult) -> dict[str, Any]:
    out = {}
    for name in ("x", "y", "z"):
        s = getattr(result, name)
        if s is not None:
            out[name] = {"n": s.n, "mean_m": s.mean_m, "std_m": s.std_m, "rmse_m": s.rmse_m, "max_abs_m": s.max_abs_m}
    return out


def accuracy_report(
    *,
    style: str | None = None,
    cov_en_m2: tuple[float, float, float] | list[float] | None = None,
    var_u_m2: float | None = None,
    residuals: ResidualTable | None = None,
    target_rmse_xy_m: float | None = None,
    target_rmse_z_m: float | None = None,
) -> dict[str, Any]:
    """Compute and word an accuracy statement. The one function behind the command, the page and the API.

    Parameters
    ----------
    style : {"fgdc", "nssda", "asprs2023"}, optional
        Default: ``fgdc`` for a covariance, ``nssda`` for residuals. ``fgdc`` needs a covariance;
        ``nssda`` and ``asprs2023`` need check-point residuals.
    cov_en_m2 : (var_e, cov_en, var_n), m²
        East/north covariance of a point.
    var_u_m2 : float, optional
        Variance of the ellipsoid height (up), m²; gives the vertical figure.
    residuals : ResidualTable
        Check-point residuals.
    target_rmse_xy_m, target_rmse_z_m : float, optional
        asprs2023 only: the target (specified) RMSE per horizontal axis and vertical, m. When given,
        the bias check compares the mean error with 25 % of it; otherwise with the measured RMSE, and
        the finding says so.

    Returns
    -------
    dict
        Always: ``style``, ``standard``, ``input``, ``horizontal_95_m``, ``vertical_95_m``,
        ``horizontal_class``, ``vertical_class``, ``statement`` (lines joined by newlines),
        ``statement_lines``, ``findings`` (code, message, params), ``cautions``. Figures a style does
        not define are ``None`` (ASPRS 2023 has no 95 % figures; NSSDA and ASPRS have no classes).
        Style-specific keys: fgdc ``sigma_max_m``, ``sigma_min_m``, ``c_ratio``, ``k_factor``,
        ``sigma_u_m``, ``vertical_kind``; nssda ``n_checkpoints``, ``rmse_x_m``, ``rmse_y_m``,
        ``rmse_r_m``, ``rmse_z_m``, ``horizontal_method``, ``horizontal_formula``, ``axes``; asprs2023 ``n_checkpoints``,
        ``rmse_x_m``, ``rmse_y_m``, ``rmse_h1_m``, ``rmse_h2_m``, ``rmse_h_m``, ``rmse_v1_m``,
        ``rmse_v2_m``, ``rmse_v_m``, ``rmse_3d_m``, ``axes``, ``blunders``.

    Examples
    --------
    >>> r = accuracy_report(cov_en_m2=(0.004**2, 0.0, 0.003**2), var_u_m2=0.008**2)
    >>> r["horizontal_class"], r["vertical_class"], round(r["horizontal_95_m"], 4)
    ('1-Centimeter', '2-Centimeter', 0.0087)
    """
    if (cov_en_m2 is None) == (residuals is None):
        raise _err("Give either a covariance or check-point residuals (one of the two).", "input_choice")
    if cov_en_m2 is not None and style is None:
        style = "fgdc"
    if residuals is not None and style is None:
        style = "nssda"
    if style not in STYLES:
        raise _err(f"Unknown style {style!r}; choose one of {', '.join(STYLES)}.", "bad_style", style=style)
    if style == "fgdc" and cov_en_m2 is None:
        raise _err(
            "The fgdc style works from a covariance; check-point residuals need nssda or asprs2023.",
            "style_needs_covariance",
        )
    if style != "fgdc" and residuals is None:
        raise _err(f"The {style} style works from check-point residuals, not a covariance.", "style_needs_residuals")
    if var_u_m2 is not None and cov_en_m2 is None:
        raise _err("The up variance goes with a covariance input.", "input_choice")
    if style != "asprs2023" and (target_rmse_xy_m is not None or target_rmse_z_m is not None):
        raise _err("A target RMSE goes with the asprs2023 style.", "input_choice")

    report: dict[str, Any] = {
        "style": style,
        "standard": STANDARD_NAMES[style],
        "input": "covariance" if cov_en_m2 is not None else "residuals",
        "horizontal_95_m": None,
        "vertical_95_m": None,
        "horizontal_class": None,
        "vertical_class": None,
    }
    findings: list[Finding] = []
    cautions = list(CAUTIONS)

    if style == "fgdc":
        assert cov_en_m2 is not None  # checked above: this style needs a covariance
        try:
            var_e, cov_en, var_n = (float(v) for v in cov_en_m2)
        except (TypeError, ValueError):
            raise _err("The covariance is three numbers: var_e, cov_en, var_n (m²).", "bad_covariance_shape") from None
        sigma_max, sigma_min = acc.error_ellipse_sigmas_m(var_e, cov_en, var_n)
        horizontal = float(acc.fgdc_horizontal_95_m(var_e, cov_en, var_n))
        c_ratio = sigma_min / sigma_max if sigma_max > 0 else 1.0
        report.update(
            horizontal_95_m=horizontal,
            horizontal_class=acc.accuracy_class(horizontal),
            sigma_max_m=sigma_max,
            sigma_min_m=sigma_min,
            c_ratio=c_ratio,
            k_factor=float(acc.circular_k(c_ratio)),
            sigma_u_m=None,
            vertical_kind=None,
        )
        if var_u_m2 is not None:
            var_u = float(var_u_m2)
            if not math.isfinite(var_u) or var_u < 0.0:
                raise _err("The up variance must be a finite number ≥ 0 (m²).", "negative_variance")
            sigma_u = math.sqrt(var_u)
            vertical = float(acc.vertical_95_m(sigma_u))
            report.update(
                vertical_95_m=vertical,
                vertical_class=acc.accuracy_class(vertical),
                sigma_u_m=sigma_u,
                vertical_kind="ellipsoid height",
            )
        for component in ("horizontal", "vertical"):
            if report[f"{component}_class"] == acc.BEYOND_TABLE_CLASS:
                findings.append(
                    Finding("beyond_table", {"component": component, "value_m": report[f"{component}_95_m"]})
                )
        lines = fgdc_statement_lines(
            report["horizontal_95_m"], report["horizontal_class"], report["vertical_95_m"], report["vertical_class"]
        )
        cautions.append(_FGDC_CAUTION)

    elif style == "nssda":
        assert residuals is not None  # checked above: this style needs residuals
        r = acc.nssda_evaluate(residuals.de_m, residuals.dn_m, residuals.du_m)
        report.update(
            horizontal_95_m=r.horizontal_95_m,
            vertical_95_m=r.vertical_95_m,
            n_checkpoints=r.n,
            rmse_x_m=r.x.rmse_m if r.x else None,
            rmse_y_m=r.y.rmse_m if r.y else None,
            rmse_r_m=r.rmse_r_m,
            rmse_z_m=r.z.rmse_m if r.z else None,
            horizontal_method=r.horizontal_method,
            horizontal_formula=NSSDA_FORMULAS.get(r.horizontal_method) if r.horizontal_method else None,
            axes=_axes(r),
            blunders=[
                {"point_id": residuals.point_ids[i], "axis": axis, "residual_m": float(by_axis[axis][i])}
                for by_axis in (
                    {
                        k: v
                        for k, v in (("x", residuals.de_m), ("y", residuals.dn_m), ("z", residuals.du_m))
                        if v is not None
                    },
                )
                for i, axis in r.blunders
            ],
        )
        findings.extend(r.findings)
        lines = nssda_statement_lines(r.horizontal_95_m, r.vertical_95_m)

    else:  # asprs2023
        assert residuals is not None  # checked above: this style needs residuals
        ra = acc.asprs2023_evaluate(
            residuals.de_m,
            residuals.dn_m,
            residuals.du_m,
            survey_sigma_e_m=residuals.sigma_e_m,
            survey_sigma_n_m=residuals.sigma_n_m,
            survey_sigma_u_m=residuals.sigma_u_m,
            target_rmse_xy_m=target_rmse_xy_m,
            target_rmse_z_m=target_rmse_z_m,
        )
        arrays = {"x": residuals.de_m, "y": residuals.dn_m, "z": residuals.du_m}
        report.update(
            n_checkpoints=ra.n,
            rmse_x_m=ra.x.rmse_m if ra.x else None,
            rmse_y_m=ra.y.rmse_m if ra.y else None,
            rmse_h1_m=ra.rmse_h1_m,
            rmse_h2_m=ra.rmse_h2_m,
            rmse_h_m=ra.rmse_h_m,
            rmse_v1_m=ra.rmse_v1_m,
            rmse_v2_m=ra.rmse_v2_m,
            rmse_v_m=ra.rmse_v_m,
            rmse_3d_m=ra.rmse_3d_m,
            axes=_axes(ra),
            blunders=[
                {"point_id": residuals.point_ids[i], "axis": axis, "residual_m": float(arrays[axis][i])}  # type: ignore[index]  # an axis with a blunder has residuals
                for i, axis in ra.blunders
            ],
        )
        findings.extend(ra.findings)
        survey_included = not any(f.code == "survey_accuracy_not_given" for f in ra.findings)
        lines = asprs2023_statement_lines(
            n=ra.n, rmse_h_m=ra.rmse_h_m, rmse_v_m=ra.rmse_v_m, rmse_3d_m=ra.rmse_3d_m, survey_included=survey_included
        )

    report["statement_lines"] = lines
    report["statement"] = "\n".join(lines)
    report["findings"] = _finding_dicts(findings, style)
    report["cautions"] = cautions
    return report


def _plain_json(key: str, value: Any) -> Any:
    if isinstance(value, dict):
        return {k: _plain_json(k, v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_plain_json(key, v) for v in value]
    if isinstance(value, np.floating):
        return float(value)
    if isinstance(value, np.integer):
        return int(value)
    return value


def report_as_json(report: dict[str, Any]) -> dict[str, Any]:
    """The report as plain JSON values (command ``--json`` and the API alike), numbers UNROUNDED.

    Machine output keeps full double precision (metres, ratios and factors as computed) so that a
    program reading it can round once, where it presents the figure; the rounding of statements,
    pages and PDFs (millimetres to 0.1, classes decided on the unrounded values) is theirs alone.
    """
    return {k: _plain_json(k, v) for k, v in report.items()}
