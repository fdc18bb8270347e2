"""Custom grids: the list (viewer and above) and the form a manager stores one with (``/tools/grids/``).

The page only shows what ``registry.services.grids.custom_grid_create`` decided; the same service
serves ``POST /api/grids/``.
"""

from __future__ import annotations

from django import forms
from django.contrib import messages
from django.core.exceptions import ValidationError
from django.http import HttpRequest, HttpResponse
from django.shortcuts import redirect, render

from registry.geodesy.customgrid import proj_definition
from registry.models import GridMethod, GridUnit
from registry.roles import Ability, has_ability
from registry.selectors.grids import custom_grids, definition_of
from registry.services.grids import custom_grid_create
from registry.web.service_errors import add_service_error
from registry.web.views import ability_required


def _num(label: str, help_text: str = "") -> forms.CharField:
    return forms.CharField(label=label, required=False, help_text=help_text)


class CustomGridForm(forms.Form):
    code = forms.CharField(label="Code", help_text="capital letters, digits, '-', '_', '.', starting with a letter")
    name = forms.CharField(label="Name")
    frame_epsg = forms.CharField(
        label="Frame (EPSG code of a geographic 3D CRS)", help_text="the datum the grid projects, e.g. 6319"
    )
    method = forms.ChoiceField(label="Projection", choices=GridMethod.choices)
    unit = forms.ChoiceField(label="Grid unit", choices=GridUnit.choices, initial=GridUnit.METRE)
    lat0_deg = _num("Latitude of origin (°)", "transverse Mercator, stereographic; Lambert: the standard parallel")
    lon0_deg = _num("Longitude of origin (°)", "east positive")
    k0 = _num("Scale factor at the origin", "e.g. 1.00021 for a grid designed for ground at about 1340 m")
    false_easting = _num("False easting (grid unit)")
    false_northing = _num("False northing (grid unit)")
    utm_zone = _num("UTM zone (UTM scaled)")
    utm_south = forms.BooleanField(label="Southern hemisphere (UTM scaled)", required=False)
    anchor_lat_deg = _num("Scaling point latitude (°) (UTM scaled)")
    anchor_lon_deg = _num("Scaling point longitude (°) (UTM scaled)")
    scale = _num("Scale applied about the point (UTM scaled)", "ground coordinates: 1 / combined factor there")
    area_west_deg = _num("Area of use: west (°)")
    area_south_deg = _num("Area of use: south (°)")
    area_east_deg = _num("Area of use: east (°)")
    area_north_deg = _num("Area of use: north (°)")
    notes = forms.CharField(label="Design notes", required=False, widget=forms.Textarea(attrs={"rows": 3, "cols": 70}))


@ability_required(Ability.VIEW)
def grid_list(request: HttpRequest) -> HttpResponse:
    can_add = has_ability(request.user, Ability.MANAGE)
    form = None
    status = 200
    if request.method == "POST":
        if not can_add:
            from registry.web.views import forbidden

            return forbidden(request, ability=Ability.MANAGE)
        form = CustomGridForm(request.POST)
        if form.is_valid():
            data = {k: v for k, v in form.cleaned_data.items() if v not in ("", None) or k == "utm_south"}
            try:
                grid = custom_grid_create(actor=request.user, data=data)
            except ValidationError as exc:
                add_service_error(form, exc)
            else:
                messages.success(request, f"Custom grid {grid.code} stored.")
                return redirect("web:grid-list")
        status = 400
    elif can_add:
        form = CustomGridForm()
    rows = []
    for g in custom_grids():
        rows.append({"grid": g, "definition": proj_definition(definition_of(g))})
    return render(request, "registry/grid_list.html", {"rows": rows, "form": form, "can_add": can_add}, status=status)
