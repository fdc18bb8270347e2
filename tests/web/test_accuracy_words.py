"""Issue 10, items 10–12: the accuracy page cites standards (no provenance remarks), the NSSDA style flags
blunders as the ASPRS style does, and σ in millimetres with a correlation is accepted.

Check values:
- FGDC-STD-007.2-1998 Part 2: r95 = K·σmax, K = 1.960790 + 0.004071·C + 0.114276·C² + 0.371625·C³
  (secondary transcription, as in registry/geodesy/accuracy.py); for σe = σn (C = 1) K = 2.450762, so σ = 10 mm → 24.51 mm.
- A correlated case is checked against numpy's eigenvalues of the 2×2 covariance (an independent
  computation of the error-ellipse axes), then the same K polynomial.
- The blunder rule (3 × the measured axis RMSE) of ASPRS Positional Accuracy Standards, Edition 2 (2023);
  the RMSE is recomputed here with numpy.
"""

from __future__ import annotations

import numpy as np
import pytest

from registry.geodesy.accuracy import covariance_from_sigmas_m2, nssda_evaluate
from registry.geodesy.statements import accuracy_report

URL = "/tools/accuracy/"


def _k(c):
    return 1.960790 + 0.004071 * c + 0.114276 * c**2 + 0.371625 * c**3


def _twenty_with_an_85_mm_outlier():
    rng = np.random.default_rng(7)
    de = rng.normal(0.0, 0.010, 20)
    dn = rng.normal(0.0, 0.010, 20)
    du = rng.normal(0.0, 0.015, 20)
    de[13] = 0.085  # the outlier of the issue: 85 mm east
    return de, dn, du


def test_nssda_flags_an_85_mm_outlier_as_asprs_does():
    de, dn, du = _twenty_with_an_85_mm_outlier()
    rmse_x = float(np.sqrt(np.mean(de**2)))
    assert 0.085 > 3 * rmse_x  # the residual is beyond 3 × RMSE_x (numpy)
    r = nssda_evaluate(de, dn, du)
    assert (13, "x") in r.blunders
    assert "blunders" in [f.code for f in r.findings]
    ids = [f"CP{i:02d}" for i in range(20)]
    from registry.geodesy.statements import ResidualTable

    table = ResidualTable(
        point_ids=tuple(ids), de_m=de, dn_m=dn, du_m=du, sigma_e_m=None, sigma_n_m=None, sigma_u_m=None
    )
    nssda = accuracy_report(style="nssda", residuals=table)
    asprs = accuracy_report(style="asprs2023", residuals=table)
    assert {(b["point_id"], b["axis"]) for b in nssda["blunders"]} == {
        (b["point_id"], b["axis"]) for b in asprs["blunders"]
    }
    assert ("CP13", "x") in {(b["point_id"], b["axis"]) for b in nssda["blunders"]}


def test_a_clean_set_has_no_blunder():
    rng = np.random.default_rng(3)
    r = nssda_evaluate(rng.uniform(-0.01, 0.01, 25), rng.uniform(-0.01, 0.01, 25))
    assert r.blunders == () and "blunders" not in [f.code for f in r.findings]


def test_no_provenance_remarks_reach_the_user():
    # a ratio outside 0.6 and a bias give the two findings that used to carry remarks
    de = np.array([0.030, 0.031, 0.029, 0.032] * 5)
    dn = np.array([0.001, -0.001, 0.002, -0.002] * 5)
    report = accuracy_report(style="nssda", residuals=_table(de, dn))
    codes = [f["code"] for f in report["findings"]]
    assert "nssda_ratio_outside" in codes and "bias" in codes
    text = " ".join(f["message"] for f in report["findings"]) + " ".join(report["statement_lines"])
    for word in ("memory", "unconfirmed", "recall"):
        assert word not in text.lower()
    assert "FGDC-STD-007.3-1998" in text


def _table(de, dn):
    from registry.geodesy.statements import ResidualTable

    return ResidualTable(
        point_ids=tuple(f"P{i}" for i in range(len(de))),
        de_m=de,
        dn_m=dn,
        du_m=None,
        sigma_e_m=None,
        sigma_n_m=None,
        sigma_u_m=None,
    )


def test_covariance_from_sigmas():
    assert covariance_from_sigmas_m2(0.004, 0.003, 0.0) == pytest.approx((1.6e-5, 0.0, 9e-6))
    assert covariance_from_sigmas_m2(0.004, 0.003, -0.5) == pytest.approx((1.6e-5, -6e-6, 9e-6))
    from registry.geodesy.accuracy import ComputationInputError

    with pytest.raises(ComputationInputError):
        covariance_from_sigmas_m2(0.004, 0.003, 1.2)
    with pytest.raises(ComputationInputError):
        covariance_from_sigmas_m2(-0.004, 0.003, 0.0)


@pytest.mark.django_db
def test_the_page_takes_sigmas_in_mm(signed_in, viewer):
    client = signed_in(viewer)
    response = client.post(URL, {"source": "sigmas", "sigma_e_mm": "10", "sigma_n_mm": "10", "corr_en": "0"})
    assert response.status_code == 200
    r = response.context["report"]
    assert r["horizontal_95_m"] == pytest.approx(_k(1.0) * 0.010, rel=1e-9)  # 24.51 mm (FGDC Part 2 K, C = 1)
    page = response.content.decode()
    assert "24.5" in page
    # correlated: the ellipse axes from numpy's eigenvalues, then the K polynomial
    response = client.post(
        URL, {"source": "sigmas", "sigma_e_mm": "8", "sigma_n_mm": "5", "corr_en": "0.6", "sigma_u_mm": "12"}
    )
    assert response.status_code == 200
    r = response.context["report"]
    cov = np.array([[0.008**2, 0.6 * 0.008 * 0.005], [0.6 * 0.008 * 0.005, 0.005**2]])
    lo, hi = np.sqrt(np.linalg.eigvalsh(cov))
    assert r["horizontal_95_m"] == pytest.approx(_k(lo / hi) * hi, rel=1e-9)
    assert r["vertical_95_m"] == pytest.approx(1.96 * 0.012, rel=1e-9)  # 1.9600·σ (FGDC Part 2)
    # the same figures as the m² form
    same = client.post(
        URL,
        {
            "source": "covariance",
            "var_e_m2": str(0.008**2),
            "cov_en_m2": str(0.6 * 0.008 * 0.005),
            "var_n_m2": str(0.005**2),
        },
    ).context["report"]
    assert same["horizontal_95_m"] == pytest.approx(r["horizontal_95_m"], rel=1e-9)


@pytest.mark.django_db
@pytest.mark.parametrize(
    "data,text",
    [
        ({"source": "sigmas", "sigma_e_mm": "4"}, "Needed for standard deviations."),
        ({"source": "sigmas", "sigma_e_mm": "4", "sigma_n_mm": "3", "corr_en": "1.5"}, "less than or equal to 1"),
        ({"source": "sigmas", "sigma_e_mm": "-4", "sigma_n_mm": "3"}, "greater than or equal to 0"),
    ],
)
def test_the_page_refuses_bad_sigmas(signed_in, viewer, data, text):
    response = signed_in(viewer).post(URL, data)
    assert response.status_code == 400 and text in response.content.decode()
    assert response.context["report"] is None


@pytest.mark.django_db
def test_the_page_lists_nssda_blunders_without_codes(signed_in, viewer):
    de, dn, du = _twenty_with_an_85_mm_outlier()
    lines = ["point_id,de_m,dn_m,du_m"] + [f"CP{i:02d},{de[i]:.4f},{dn[i]:.4f},{du[i]:.4f}" for i in range(20)]
    response = signed_in(viewer).post(
        URL, {"source": "residuals", "residuals_text": "\n".join(lines), "style": "nssda"}
    )
    assert response.status_code == 200
    page = response.content.decode()
    assert "Check points to investigate" in page and "CP13" in page and "85.0" in page
    assert "nssda_ratio_outside" not in page and ">blunders<" not in page and "unconfirmed" not in page
