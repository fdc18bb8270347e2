"""The job form's drawing map: what ``static/registry/sitedraw.js`` needs to open (as a JSON data block).

Drawing is one more way to give the site: the script writes the drawn outline (or point) as GeoJSON
into the form's site field, and the form and the job service read it as they read pasted GeoJSON
(the same parser and checks). Without JavaScript the drawing map stays hidden and the form works as
before. The map opens on the job's own site when it has one (the script reads the site field), else
on the registry's marks (:func:`registry.selectors.marks.marks_extent`), else on the whole world.
"""

from __future__ import annotations

from django.conf import settings

from registry.selectors.marks import marks_extent


def site_draw_data() -> dict:
    extent = marks_extent()
    reg = settings.REGISTRY
    return {
        "extent": None if extent is None else [[extent[0], extent[1]], [extent[2], extent[3]]],
        "basemap": (reg.get("BASEMAP_URL") or "").strip(),
        "attribution": (reg.get("BASEMAP_ATTRIBUTION") or "").strip(),
    }
