"""The job form's drawing map: what ``static/registry/sitedraw.js`` needs to open (as a JSON data block).

Drawing is one more way to give the site: the script writes the drawn outline (or point) as GeoJSON
into the form's site field, and the form and the job service read it as they read pasted GeoJSON
(the same parser and checks). Without JavaScript the drawing map stays hidden and the form works as
before. The map opens on the job's own site when it has one (the script reads the site field), else
on the registry's marks (:func:`registry.selectors.marks.marks_extent`), else on the whole world.

As the map moves, the script shows the registry's usable marks around the view (the nearby API with
``usable_only``, at most :data:`MARKS_LIMIT` within :data:`MARKS_RADIUS_MAX_KM`), so that the site can be
drawn where control is; their symbols are for orientation, and a click on one places a corner as
anywhere else.
"""

from __future__ import annotations

from django.conf import settings
from django.urls import reverse

from registry.selectors.marks import marks_extent

#: Widest circle around the view in which the drawing map shows marks, km (a view wider than this shows
#: the marks near its centre only).
MARKS_RADIUS_MAX_KM = 50.0
#: Most marks shown at once (the nearest to the view's centre).
MARKS_LIMIT = 200


def site_draw_data() -> dict:
    extent = marks_extent()
    reg = settings.REGISTRY
    return {
        "extent": None if extent is None else [[extent[0], extent[1]], [extent[2], extent[3]]],
        "basemap": (reg.get("BASEMAP_URL") or "").strip(),
        "attribution": (reg.get("BASEMAP_ATTRIBUTION") or "").strip(),
        # the registry's usable marks around the view, from the nearby API as the map moves
        "marks_url": reverse("api:marks-near"),
        "marks_radius_max_km": MARKS_RADIUS_MAX_KM,
        "marks_limit": MARKS_LIMIT,
    }
