"""The accuracy statement page (``/tools/accuracy/``, every role from viewer up).

A form takes a point's east/north standard deviations (mm) and correlation, or its covariance (m²,
optional up variance), or a CSV of check-point
residuals (upload or paste), and a style. The page shows exactly what
:func:`registry.geodesy.statements.accuracy_report` returns: the same function serves
``manage.py accuracy_statement`` and ``POST /api/accuracy/``. Nothing is stored.
"""

from __future__ import annotations

from django import forms
from django.core.exceptions import ValidationError
from django.http import HttpRequest, HttpResponse
from django.shortcuts import render

from registry.geodesy.accuracy import ComputationInputError, covariance_from_sigmas_m2
from registry.geodesy.statements import RESIDUAL_COLUMNS, STANDARD_NAMES, accuracy_report, parse_residuals_csv
from registry.roles import Ability
from registry.web.service_errors import add_service_error
from registry.web.uploads import within_size
from registry.web.views import ability_required

MAX_UPLOAD_BYTES = 5 * 1024 * 1024

STYLE_CHOICES = [("", "default for the input (FGDC for a covariance, NSSDA for residuals)")] + [
    (key, name) for key, name in STANDARD_NAMES.items()
]


class AccuracyForm(forms.Form):
    source = forms.ChoiceField(
        label="Input",
        choices=[
            ("sigmas", "a point's standard deviations (mm) and correlation"),
            ("covariance", "a point's covariance (m²)"),
            ("residuals", "check-point residuals"),
        ],
        widget=forms.RadioSelect,
        initial="sigmas",
    )
    sigma_e_mm = forms.FloatField(label="σ east (mm)", required=False, min_value=0.0)
    sigma_n_mm = forms.FloatField(label="σ north (mm)", required=False, min_value=0.0)
    corr_en = forms.FloatField(
        label="Correlation east–north (−1 to 1)", required=False, min_value=-1.0, max_value=1.0, initial=0.0
    )
    sigma_u_mm = forms.FloatField(label="σ up, ellipsoid height (mm, optional)", required=False, min_value=0.0)
    var_e_m2 = forms.FloatField(label="Variance east (m²)", required=False)
    cov_en_m2 = forms.FloatField(label="Covariance east–north (m²)", required=False)
    var_n_m2 = forms.FloatField(label="Variance north (m²)", required=False)
    var_u_m2 = forms.FloatField(label="Variance up, ellipsoid height (m², optional)", required=False)
    residuals_file = forms.FileField(label="Residual CSV file", required=False)
    residuals_text = forms.CharField(
        label="…or paste the CSV", required=False, widget=forms.Textarea(attrs={"rows": 8, "cols": 70, "class": "mono"})
    )
    style = forms.ChoiceField(label="Standard", choices=STYLE_CHOICES, required=False)

    def clean(self):
        data = super().clean()
        if self.errors:
            return data
        if data.get("source") == "sigmas":
            missing = [f for f in ("sigma_e_mm", "sigma_n_mm") if data.get(f) is None]
            for name in missing:
                self.add_error(name, ValidationError("Needed for standard deviations.", code="required"))
        elif data.get("source") == "covariance":
            missing = [f for f in ("var_e_m2", "cov_en_m2", "var_n_m2") if data.get(f) is None]
            for name in missing:
                self.add_error(name, ValidationError("Needed for a covariance.", code="required"))
        else:
            upload = data.get("residuals_file")
            text = data.get("residuals_text") or ""
            if upload is None and not text.strip():
                raise ValidationError("Upload a residual CSV or paste it.", code="residuals_missing")
            if upload is not None and text.strip():
                raise ValidationError("Upload a file or paste text, not both.", code="residuals_twice")
            if upload is not None:
                within_size(upload, MAX_UPLOAD_BYTES)
                try:
                    text = upload.read().decode("utf-8-sig")
                except UnicodeDecodeError:
                    raise ValidationError("The file is not UTF-8 text.", code="not_utf8") from None
            data["residuals_csv"] = text
        return data

    def report(self) -> dict:
        """Run the shared report; its input errors become form errors (with their codes)."""
        data = self.cleaned_data
        try:
            if data["source"] == "sigmas":
                cov = covariance_from_sigmas_m2(
                    data["sigma_e_mm"] / 1000.0, data["sigma_n_mm"] / 1000.0, data.get("corr_en") or 0.0
                )
                sigma_u = data.get("sigma_u_mm")
                return accuracy_report(
                    style=data.get("style") or None,
                    cov_en_m2=cov,
                    var_u_m2=None if sigma_u is None else (sigma_u / 1000.0) ** 2,
                )
            if data["source"] == "covariance":
                return accuracy_report(
                    style=data.get("style") or None,
                    cov_en_m2=(data["var_e_m2"], data["cov_en_m2"], data["var_n_m2"]),
                    var_u_m2=data.get("var_u_m2"),
                )
            return accuracy_report(
                style=data.get("style") or None, residuals=parse_residuals_csv(data["residuals_csv"])
            )
        except ComputationInputError as exc:
            add_service_error(self, exc)
            raise


#: Rows of the numbers table: (report key, label). Shown when the report has a value for the key.
NUMBER_ROWS = [
    ("sigma_max_m", "σmax, semi-major axis of the 1σ error ellipse"),
    ("sigma_min_m", "σmin, semi-minor axis"),
    ("sigma_u_m", "σ up (ellipsoid height)"),
    ("rmse_x_m", "RMSE x (east)"),
    ("rmse_y_m", "RMSE y (north)"),
    ("rmse_r_m", "RMSE r (radial)"),
    ("rmse_z_m", "RMSE z (up)"),
    ("rmse_h1_m", "RMSE_H1, product against check points"),
    ("rmse_h2_m", "RMSE_H2, check points' own survey"),
    ("rmse_h_m", "RMSE_H, horizontal"),
    ("rmse_v1_m", "RMSE_V1, product against check points"),
    ("rmse_v2_m", "RMSE_V2, check points' own survey"),
    ("rmse_v_m", "RMSE_V, vertical"),
    ("rmse_3d_m", "RMSE_3D"),
    ("horizontal_95_m", "horizontal accuracy at 95 %"),
    ("vertical_95_m", "vertical accuracy at 95 %"),
]


@ability_required(Ability.VIEW)
def accuracy_page(request: HttpRequest) -> HttpResponse:
    report = None
    status = 200
    if request.method == "POST":
        form = AccuracyForm(request.POST, request.FILES)
        if form.is_valid():
            try:
                report = form.report()
            except ComputationInputError:
                status = 400
        else:
            status = 400
    else:
        form = AccuracyForm()
    rows = []
    if report is not None:
        rows = [(label, report[key]) for key, label in NUMBER_ROWS if report.get(key) is not None]
    context = {"form": form, "report": report, "rows": rows, "columns": RESIDUAL_COLUMNS}
    return render(request, "registry/accuracy.html", context, status=status)
