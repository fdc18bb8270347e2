"""The "Marks near a point" page: a GET form, the nearby selector, a table with distance and azimuth.

The search itself is :func:`registry.selectors.nearby.marks_near` (geodesic distances on
GRS80, PostGIS or the portable path); this page only parses the form (decimal or DMS
angles) and prints the result in the registry's display conventions.
"""

from __future__ import annotations

from django.http import HttpRequest, HttpResponse
from django.shortcuts import render

from registry.errors import InvalidInput
from registry.geodesy import dms
from registry.roles import Ability
from registry.selectors.fieldwork import latest_visits
from registry.selectors.nearby import CAUTIONS, SEARCH_LOCATION_NOTE, marks_near
from registry.web.fieldwork_forms import NearbyForm
from registry.web.views import ability_required


def _azimuth_dms(azimuth_deg: float | None) -> str | None:
    """Azimuth in DMS to 0.1″ in [0°, 360°) (a value that rounds up to 360° prints as 0°)."""
    if azimuth_deg is None:
        return None
    text = dms.format_dms(azimuth_deg, decimals=1)
    return "0°00′00.0″" if text.startswith("360°") else text


@ability_required(Ability.VIEW)
def marks_near_page(request: HttpRequest) -> HttpResponse:
    defaults = {"radius_km": "5", "limit": "50"}
    data = None
    if request.GET:
        # A link that gives only the point (e.g. ?lat=..&lon=..) searches with the form's defaults.
        data = request.GET.copy()
        for key, value in defaults.items():
            if not data.get(key):
                data[key] = value
    form = NearbyForm(data, initial=defaults)
    rows = None
    status = 200
    search = None
    if request.GET:
        if form.is_valid():
            args = form.search_args()
            try:
                found = marks_near(**args)
            except InvalidInput as exc:
                field = (exc.details or {}).get("field") if isinstance(exc.details, dict) else None
                form.add_error(field if field in form.fields else None, exc.message)
                status = 400
            else:
                visits = latest_visits(mark_ids=[n.mark.pk for n in found])
                rows = [
                    {
                        "mark": n.mark,
                        "distance_m": n.distance_m,
                        "azimuth": _azimuth_dms(n.azimuth_deg),
                        "visit": visits.get(n.mark.pk),
                    }
                    for n in found
                ]
                search = args
        else:
            status = 400
    context = {
        "form": form,
        "rows": rows,
        "search": search,
        "location_note": SEARCH_LOCATION_NOTE,
        "cautions": CAUTIONS,
    }
    return render(request, "registry/marks_near.html", context, status=status)
