"""The "Marks near a point" page: a GET form, the nearby selector, a table with distance and azimuth.

The search itself is :func:`registry.selectors.nearby.marks_near` (geodesic distances on
GRS80, PostGIS or the portable path); this page only parses the form (decimal or DMS
angles) and prints the result in the registry's display conventions.
"""

from __future__ import annotations

from django.http import HttpRequest, HttpResponse
from django.shortcuts import render
from django.urls import reverse

from registry.errors import InvalidInput
from registry.roles import Ability
from registry.selectors.fieldwork import latest_visits
from registry.selectors.nearby import CAUTIONS, SEARCH_LOCATION_NOTE, marks_near
from registry.services.usability import assess
from registry.web.fieldwork_forms import NearbyForm
from registry.web.mark_map import MapPoint, build_map
from registry.web.views import ability_required


def _azimuth_finding(azimuth_deg: float | None) -> str | None:
    """Azimuth for finding a mark: degrees to 0.1° in [0°, 360°) (a value that rounds to 360° prints as 0.0°).

    Finding figures are given at finding precision (0.1 m, 0.1°); coordinates for work come from the mark page.
    """
    if azimuth_deg is None:
        return None
    value = round(float(azimuth_deg) % 360.0, 1)
    return f"{0.0 if value >= 360.0 else value:.1f}°"


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
    markmap = None
    hidden = 0
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
                rows = []
                hidden = found.left_out_not_usable  # the selector filtered before its limit
                for n in found:
                    visit = visits.get(n.mark.pk)
                    usability = assess(
                        n.mark.status, visit.finding if visit else None, suspect_reason=n.mark.suspect_reason
                    )
                    rows.append(
                        {
                            "mark": n.mark,
                            "distance_m": n.distance_m,
                            "azimuth": _azimuth_finding(n.azimuth_deg),
                            "visit": visit,
                            "usability": usability,
                        }
                    )
                search = args
                points = [
                    MapPoint(
                        code=r["mark"].code,
                        lat_deg=r["mark"].search_lat_deg,
                        lon_deg=r["mark"].search_lon_deg,
                        usable=r["usability"].usable,
                        label=r["usability"].label,
                        reason=r["usability"].reason,
                        url=reverse("web:mark-detail", args=[r["mark"].code]),
                    )
                    for r in rows
                    if r["mark"].search_lat_deg is not None
                ]
                markmap = build_map(points, centre=(args["lat_deg"], args["lon_deg"]), radius_m=args["radius_m"])
        else:
            status = 400
    context = {
        "form": form,
        "rows": rows,
        "search": search,
        "hidden": hidden,
        "markmap": markmap,
        "usable_only": form.is_bound and not form.errors and form.usable_only(),
        "location_note": SEARCH_LOCATION_NOTE,
        "cautions": CAUTIONS,
    }
    return render(request, "registry/marks_near.html", context, status=status)
