"""POST /api/accuracy/: same report as the command; viewer allowed, anonymous refused; one error shape.

Check values: FGDC-STD-007.2-1998 K polynomial (secondary transcription: Geoscience Australia geodesy
package); ASPRS column example, PERS May 2014, p. 397, Table 3 (inputs; results recomputed with NumPy);
ASPRS Positional Accuracy Standards Ed. 2 (2023), secondary transcription (section numbers indicative).
"""

from __future__ import annotations

import io
import json

import pytest
from django.core.management import call_command
from django.urls import reverse

from tests.geodesy.test_statements import EX_A_CSV

URL = "/api/accuracy/"


def test_url_name():
    assert reverse("api:accuracy") == URL


@pytest.mark.django_db
@pytest.mark.parametrize("role", ["viewer", "technician", "manager", "signatory", "admin_user_role"])
def test_every_role_may_compute(request, api_client_for, role):
    response = api_client_for(request.getfixturevalue(role)).post(URL, {"cov_en_m2": [1e-4, 0.0, 1e-4]}, format="json")
    assert response.status_code == 200
    # K(1) = 1.960790 + 0.004071 + 0.114276 + 0.371625 = 2.450762 (FGDC-STD-007.2-1998 K polynomial, secondary
    # transcription) × σ = 10 mm. Unrounded JSON: 2.4477 × 10 mm (the NSSDA circle factor) would be 0.024477.
    k1 = 1.960790 + 0.004071 + 0.114276 + 0.371625
    assert response.json()["horizontal_95_m"] == pytest.approx(k1 * 0.01, rel=1e-9)


@pytest.mark.django_db
def test_anonymous_and_roleless_are_refused(api_client_for, make_user):
    response = api_client_for(None).post(URL, {"cov_en_m2": [1e-4, 0.0, 1e-4]}, format="json")
    assert response.status_code in (401, 403)
    assert "error" in response.json()
    response = api_client_for(make_user("noel")).post(URL, {"cov_en_m2": [1e-4, 0.0, 1e-4]}, format="json")
    assert response.status_code == 403


@pytest.mark.django_db
def test_api_returns_what_the_command_prints(viewer, api_client_for, tmp_path):
    path = tmp_path / "r.csv"
    path.write_text(EX_A_CSV, encoding="utf-8")
    out = io.StringIO()
    call_command("accuracy_statement", "--residuals", str(path), "--style", "asprs2023", "--json", stdout=out)
    response = api_client_for(viewer).post(URL, {"residuals_csv": EX_A_CSV, "style": "asprs2023"}, format="json")
    assert response.status_code == 200
    assert response.json() == json.loads(out.getvalue())
    assert response.json()["horizontal_95_m"] is None and "95" not in response.json()["statement"]


@pytest.mark.django_db
def test_residual_rows_nssda(viewer, api_client_for):
    rows = [
        {"point_id": f"CP{i}", "de_m": e, "dn_m": n, "du_m": h}
        for i, (e, n, h) in enumerate(
            zip(
                [-0.060, 0.100, -0.060, -0.112, -0.120, -0.100, -0.060],
                [0.080, -0.045, 0.080, 0.007, 0.150, -0.045, 0.080],
                [0.055, -0.006, -0.017, 0.042, -0.011, 0.013, 0.048],
                strict=True,
            )
        )
    ]
    data = api_client_for(viewer).post(URL, {"residuals": rows}, format="json").json()
    assert data["horizontal_95_m"] == pytest.approx(0.2101, abs=1e-4)  # PERS 2014 p. 397 T. 3, recomputed
    assert data["vertical_95_m"] == pytest.approx(0.0650, abs=1e-4)
    assert data["horizontal_method"] == "approximate"


@pytest.mark.django_db
@pytest.mark.parametrize(
    "body,code,detail",
    [
        ({}, "invalid", ("non_field_errors", "input_choice")),
        ({"cov_en_m2": [1e-4, 0.0, 1e-4], "residuals_csv": "x"}, "invalid", ("non_field_errors", "input_choice")),
        ({"cov_en_m2": [1e-4, 5e-4, 1e-4]}, "not_positive_semidefinite", None),
        ({"cov_en_m2": [1e-4, 0.0, 1e-4], "style": "nssda"}, "style_needs_residuals", None),
        ({"residuals_csv": "point_id,du_m\nA,x\n"}, "residuals_bad_number", None),
        (
            {"residuals": [{"point_id": "A", "du_m": 0.1}, {"point_id": "A", "du_m": 0.2}]},
            "residuals_duplicate_point",
            None,
        ),
        ({"residuals_csv": EX_A_CSV, "var_u_m2": 1e-4}, "input_choice", None),
    ],
)
def test_bad_input_is_a_400_in_the_one_error_shape(viewer, api_client_for, body, code, detail):
    response = api_client_for(viewer).post(URL, body, format="json")
    assert response.status_code == 400
    error = response.json()["error"]
    assert set(error) == {"code", "message", "details"}
    assert error["code"] == code
    if detail is not None:
        field, detail_code = detail
        assert [d["code"] for d in error["details"][field]] == [detail_code]
