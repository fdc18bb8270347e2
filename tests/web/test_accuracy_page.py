"""The accuracy statement page /tools/accuracy/: every role may use it, anonymous users are sent to sign in.

Check values: FGDC-STD-007.2-1998 K polynomial (secondary transcription: Geoscience Australia geodesy
package), and the ASPRS column example, PERS May 2014, p. 397, Table 3 (inputs; results recomputed
with NumPy by the FGDC-STD-007.3-1998 §3.2.1 formulas).
"""

from __future__ import annotations

from urllib.parse import quote

import pytest
from django.core.files.uploadedfile import SimpleUploadedFile
from django.urls import reverse

from tests.geodesy.test_statements import EX_A_CSV

ROLES = ["viewer", "technician", "manager", "signatory", "admin_user_role"]
URL = "/tools/accuracy/"


def test_url_name():
    assert reverse("web:accuracy") == URL


@pytest.mark.django_db
@pytest.mark.parametrize("role", ROLES)
def test_every_role_opens_and_computes(request, signed_in, role):
    client = signed_in(request.getfixturevalue(role))
    assert client.get(URL).status_code == 200
    response = client.post(URL, {"source": "covariance", "var_e_m2": "1e-2", "cov_en_m2": "0", "var_n_m2": "1e-2"})
    assert response.status_code == 200
    # K(1) = 2.450762 (FGDC-STD-007.2-1998 K polynomial at C = 1, secondary transcription) × σ = 100 mm = 245.08 mm;
    # σ is large enough that 2.4477 (the NSSDA circle factor, 244.77 mm) would show differently.
    assert "Horizontal network accuracy 0.245 m (245.1 mm)" in response.content.decode()


@pytest.mark.django_db
def test_anonymous_is_sent_to_sign_in(client):
    response = client.get(URL)
    assert response.status_code == 302
    assert response["Location"] == f"{reverse('web:login')}?next={quote(URL)}"
    assert client.post(URL, {"source": "covariance"}).status_code == 302


@pytest.mark.django_db
def test_user_without_role_is_refused(make_user, signed_in):
    response = signed_in(make_user("noel")).get(URL)
    assert response.status_code == 403


@pytest.mark.django_db
def test_uploaded_residuals_nssda(viewer, signed_in):
    upload = SimpleUploadedFile("cp.csv", EX_A_CSV.encode("utf-8"), content_type="text/csv")
    response = signed_in(viewer).post(URL, {"source": "residuals", "residuals_file": upload})
    html = response.content.decode()
    assert response.status_code == 200
    # PERS May 2014 p. 397 Table 3, recomputed
    assert "Tested 0.210 meters horizontal accuracy at 95% confidence level" in html
    assert "Tested 0.065 meters vertical accuracy at 95% confidence level" in html
    assert "too_few_checkpoints" not in html and "asks for at least 20" in html and "warning" in html
    assert '<td class="num">210.1</td>' in html  # mm, right-aligned cell


@pytest.mark.django_db
def test_pasted_residuals_asprs_has_no_95_in_the_result(viewer, signed_in):
    response = signed_in(viewer).post(URL, {"source": "residuals", "residuals_text": EX_A_CSV, "style": "asprs2023"})
    html = response.content.decode()
    result = html.split('<section class="accuracy-result"', 1)[1].split("</section>", 1)[0]
    assert "RMSE_H = 0.122 m (12.2 cm)" in result
    assert "95" not in result and "confidence" not in result


@pytest.mark.django_db
@pytest.mark.parametrize(
    "data,fragment",
    [
        ({"source": "covariance", "var_e_m2": "1e-4"}, "Needed for a covariance."),
        (
            {"source": "covariance", "var_e_m2": "1e-4", "cov_en_m2": "5e-4", "var_n_m2": "1e-4"},
            "not positive semi-definite",
        ),
        ({"source": "residuals"}, "Upload a residual CSV or paste it."),
        ({"source": "residuals", "residuals_text": "point_id,du_m\nA,x\n"}, "Line 2: du_m"),
        (
            {"source": "covariance", "var_e_m2": "1e-4", "cov_en_m2": "0", "var_n_m2": "1e-4", "style": "nssda"},
            "check-point residuals",
        ),
    ],
)
def test_bad_input_is_shown_on_the_form(viewer, signed_in, data, fragment):
    response = signed_in(viewer).post(URL, data)
    assert response.status_code == 400
    assert fragment in response.content.decode()
    assert 'class="accuracy-result"' not in response.content.decode()
