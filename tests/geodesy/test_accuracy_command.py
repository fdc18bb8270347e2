"""``manage.py accuracy_statement``: both inputs, the three styles, JSON keys, clear errors.

Check values: FGDC-STD-007.2-1998 K polynomial (secondary transcription); ASPRS column example, PERS May
2014, p. 397, Table 3 (inputs; results recomputed with NumPy); ASPRS Ed. 2 (2023) formulas (secondary
transcription); as in test_accuracy.py.
"""

from __future__ import annotations

import io
import json

import pytest
from django.core.management import CommandError, call_command

from tests.geodesy.test_statements import EX_A_CSV


def run(*args) -> str:
    out = io.StringIO()
    call_command("accuracy_statement", *args, stdout=out)
    return out.getvalue()


@pytest.fixture
def ex_a_file(tmp_path):
    path = tmp_path / "residuals.csv"
    path.write_text(EX_A_CSV, encoding="utf-8")
    return str(path)


def test_covariance_text_output():
    # σe = σn = 10 mm → 2.450762 × 10 mm = 24.5 mm (FGDC-STD-007.2-1998 K polynomial, secondary transcription, C = 1); σu = 20 mm → 39.2 mm.
    out = run("--cov-en", "1e-4", "0", "1e-4", "--var-u", "4e-4")
    assert "Horizontal network accuracy 0.025 m (24.5 mm) at the 95% confidence level" in out
    assert "class 5-Centimeter" in out
    assert "Ellipsoid height network accuracy 0.039 m (39.2 mm)" in out
    assert "licensed practice" in out


def test_covariance_json_keys():
    # Regression: argparse once read the negative covariance "-2e-5" as an option name.
    data = json.loads(run("--cov-en", "1e-4", "-2e-5", "4e-5", "--json"))
    for key in ("horizontal_95_m", "vertical_95_m", "horizontal_class", "vertical_class", "statement"):
        assert key in data
    assert data["style"] == "fgdc" and data["vertical_95_m"] is None and data["vertical_class"] is None
    assert data["horizontal_class"] in ("2-Centimeter", "5-Centimeter")


def test_residuals_nssda_json(ex_a_file):
    data = json.loads(run("--residuals", ex_a_file, "--json"))
    assert data["style"] == "nssda"
    assert data["horizontal_95_m"] == pytest.approx(0.2101, abs=1e-4)  # PERS 2014 p. 397 T. 3, recomputed
    assert data["vertical_95_m"] == pytest.approx(0.0650, abs=1e-4)
    assert data["horizontal_class"] is None and data["vertical_class"] is None  # NSSDA defines no classes
    assert data["statement"].splitlines()[0] == "Tested 0.210 meters horizontal accuracy at 95% confidence level"
    assert data["findings"][0]["code"] == "too_few_checkpoints"


def test_residuals_asprs2023_json_gives_rmse_keys_and_no_95(ex_a_file):
    data = json.loads(run("--residuals", ex_a_file, "--style", "asprs2023", "--json"))
    assert data["horizontal_95_m"] is None and data["vertical_95_m"] is None
    assert data["rmse_h_m"] == pytest.approx(0.1216, abs=1e-4)  # RMSE_r, PERS 2014 p. 397 T. 3, recomputed
    assert data["rmse_v_m"] == pytest.approx(0.0332, abs=1e-4)
    assert "95" not in data["statement"]
    text = run("--residuals", ex_a_file, "--style", "asprs2023")
    assert "95%" not in text and "confidence" not in text


@pytest.mark.parametrize(
    "args,fragment",
    [
        (["--residuals", "/nonexistent/r.csv"], "file_not_found"),
        (["--cov-en", "1e-4", "0", "1e-4", "--style", "nssda"], "style_needs_residuals"),
        (["--cov-en", "-1e-4", "0", "1e-4"], "negative_variance"),
        (["--cov-en", "1e-4", "5e-4", "1e-4"], "not_positive_semidefinite"),
        (["--cov-en", "1e-4", "0", "1e-4", "--var-u", "-1"], "negative_variance"),
    ],
)
def test_bad_input_gives_a_clear_error(args, fragment):
    with pytest.raises(CommandError) as err:
        run(*args)
    assert fragment in str(err.value)


def test_bad_csv_names_the_file_and_line(tmp_path):
    path = tmp_path / "bad.csv"
    path.write_text("point_id,du_m\nA,0.01\nB,oops\n", encoding="utf-8")
    with pytest.raises(CommandError) as err:
        run("--residuals", str(path))
    assert "Line 3" in str(err.value) and "residuals_bad_number" in str(err.value)


def test_fgdc_style_with_residuals_is_refused(ex_a_file):
    with pytest.raises(CommandError) as err:
        run("--residuals", ex_a_file, "--style", "fgdc")
    assert "style_needs_covariance" in str(err.value)


def test_var_u_with_residuals_is_refused(ex_a_file):
    with pytest.raises(CommandError) as err:
        run("--residuals", ex_a_file, "--var-u", "1e-4")
    assert "input_choice" in str(err.value)


def test_both_or_no_source_is_an_argument_error():
    with pytest.raises(CommandError):
        run("--json")
    with pytest.raises(CommandError):
        run("--cov-en", "1e-4", "0", "1e-4", "--residuals", "x.csv")
