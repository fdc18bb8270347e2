"""The conversion page (/tools/convert/): a form and the labelled result, viewer role and above.

A GET form (a read; the URL can be bookmarked or shared). The computation is the same function the
command and the API call (``registry.selectors.conversion.point_convert``).
"""

from __future__ import annotations

from django import forms
from django.http import HttpRequest, HttpResponse
from django.shortcuts import render

from registry.api.convert import convert_inputs
from registry.geodesy.convert import ConversionError, display_rows
from registry.roles import Ability
from registry.selectors.conversion import point_convert
from registry.selectors.grids import custom_grids
from registry.web.views import ability_required

#: Frames offered in the form's suggestion list (any geographic 3D EPSG code is accepted).
COMMON_FRAMES = (
    (7912, "ITRF2014"),
    (9989, "ITRF2020"),
    (6319, "NAD83(2011)"),
    (4979, "WGS 84 (ensemble, ~2 m)"),
)

INPUT_FORMS = (("geodetic", "latitude, longitude, height"), ("ecef", "ECEF X, Y, Z"), ("grid", "easting, northing"))


class ConvertForm(forms.Form):
    form = forms.ChoiceField(label="Input form", choices=INPUT_FORMS, initial="geodetic")
    lat = forms.CharField(label="Latitude", required=False, help_text="decimal degrees or DMS, e.g. 45 12 03.5 N")
    lon = forms.CharField(label="Longitude", required=False, help_text="decimal degrees or DMS, e.g. 110 36 00 W")
    h = forms.FloatField(label="Ellipsoidal height h (m)", required=False)
    x = forms.FloatField(label="ECEF X (m)", required=False)
    y = forms.FloatField(label="ECEF Y (m)", required=False)
    z = forms.FloatField(label="ECEF Z (m)", required=False)
    easting = forms.FloatField(label="Easting (m)", required=False)
    northing = forms.FloatField(label="Northing (m)", required=False)
    grid_in = forms.CharField(label="Grid of easting/northing (EPSG)", required=False)
    frame = forms.CharField(label="Frame (EPSG)", initial="7912", help_text="geographic 3D CRS, e.g. 7912 ITRF2014")
    epoch = forms.FloatField(label="Coordinate epoch (decimal year)", initial=2024.5)
    to_frame = forms.CharField(label="Target frame (EPSG)", required=False, help_text="empty: same frame")
    to_epoch = forms.FloatField(label="Target epoch (decimal year)", required=False, help_text="empty: same epoch")
    grid = forms.CharField(
        label="Output grid",
        required=False,
        initial="utm",
        help_text="'utm', an EPSG code, or the code of one of the office's custom grids",
    )
    plate = forms.ChoiceField(
        label="Plate motion (epoch change without a velocity)",
        required=False,
        choices=(),
        help_text="empty: the office's setting",
    )
    vel_e_mm_yr = forms.FloatField(label="Velocity east (mm/yr)", required=False)
    vel_n_mm_yr = forms.FloatField(label="Velocity north (mm/yr)", required=False)
    vel_u_mm_yr = forms.FloatField(
        label="Velocity up (mm/yr)", required=False, help_text="the point's own velocity, in the input frame"
    )

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        from registry.geodesy.platemotion import PLATES

        self.fields["plate"].choices = [
            ("", "the office's setting"),
            ("AUTO", "from the point's location"),
            *[(code, f"{p.name} ({code})") for code, p in sorted(PLATES.items())],
        ]

    def conversion_inputs(self) -> dict:
        data = dict(self.cleaned_data)
        chosen = data.pop("form")
        # Only the chosen input form counts; the other fields may hold leftovers.
        keep = {
            "geodetic": ("lat", "lon", "h"),
            "ecef": ("x", "y", "z"),
            "grid": ("easting", "northing", "grid_in", "h"),
        }
        for key in ("lat", "lon", "h", "x", "y", "z", "easting", "northing", "grid_in"):
            if key not in keep[chosen]:
                data[key] = None
        for key in ("lat", "lon", "grid_in", "to_frame", "grid", "plate"):
            if data.get(key) == "":
                data[key] = None
        if chosen == "geodetic" and (data["lat"] is None or data["lon"] is None or data["h"] is None):
            raise ConversionError(
                "Latitude, longitude and ellipsoidal height are all needed.", code="incomplete", field="lat"
            )
        return convert_inputs(data)


_FIELD_FOR = {
    "input": None,
    "xyz": "x",
    "en": "easting",
    "h": "h",
    "lat": "lat",
    "lon": "lon",
    "grid_in": "grid_in",
    "frame": "frame",
    "to_frame": "to_frame",
    "epoch": "epoch",
    "to_epoch": "to_epoch",
    "grid": "grid",
    "plate": "plate",
    "velocity": "vel_e_mm_yr",
}


@ability_required(Ability.VIEW)
def convert_page(request: HttpRequest) -> HttpResponse:
    submitted = "frame" in request.GET
    form = ConvertForm(request.GET if submitted else None)
    result = display = None
    if submitted and form.is_valid():
        try:
            result = point_convert(**form.conversion_inputs())
        except ConversionError as exc:
            form.add_error(_FIELD_FOR.get(exc.field or "", None), forms.ValidationError(str(exc), code=exc.code))
        else:
            display = display_rows(result)
    context = {
        "form": form,
        "result": result,
        "display": display,
        "common_frames": COMMON_FRAMES,
        "custom_grids": list(custom_grids()),
        "status": 200,
    }
    status = 400 if submitted and form.errors else 200
    return render(request, "registry/convert.html", context, status=status)
