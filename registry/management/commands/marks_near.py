"""``manage.py marks_near``: marks within a radius of a point, nearest first.

    python manage.py marks_near LAT LON --radius-km R [--limit N] [--json]
        [--status active ...] [--stability high ...] [--frame-epsg 7912]
        [--intact-visit-within-yr 5] [--accuracy-max-m 0.02] [--path auto|postgis|portable]

LAT and LON are decimal degrees (a negative longitude is fine: ``45.2 -110.6``). The same
selector (:func:`registry.selectors.nearby.marks_near`) serves ``GET /api/marks/near/``;
``--json`` prints ``{"search": ..., "marks": [{"code", "distance_m", "azimuth_deg", ...}],
"cautions": [...]}`` nearest first.
"""

from __future__ import annotations

import json

from django.core.management.base import BaseCommand, CommandError

from registry.errors import RegistryError
from registry.models import MarkStatus, Stability
from registry.selectors.nearby import CAUTIONS, PATHS, SEARCH_LOCATION_NOTE, marks_near


class Command(BaseCommand):
    help = "Marks within a radius of a point, nearest first (geodesic distances on GRS80)."

    def add_arguments(self, parser):
        parser.add_argument("lat", type=float, metavar="LAT", help="Latitude of the search point, decimal degrees.")
        parser.add_argument("lon", type=float, metavar="LON", help="Longitude of the search point, decimal degrees.")
        parser.add_argument("--radius-km", type=float, required=True, help="Search radius, km.")
        parser.add_argument("--limit", type=int, help="At most this many marks (the nearest).")
        parser.add_argument("--status", nargs="+", choices=MarkStatus.values, help="Only marks with these statuses.")
        parser.add_argument("--stability", nargs="+", choices=Stability.values, help="Only these monument stabilities.")
        parser.add_argument("--frame-epsg", type=int, help="Only marks with a published position in this frame.")
        parser.add_argument(
            "--intact-visit-within-yr",
            "--good-visit-within-yr",  # the earlier name, accepted for one more release
            dest="intact_visit_within_yr",
            type=float,
            help="Only marks a visit found intact within this many years.",
        )
        parser.add_argument(
            "--accuracy-max-m",
            type=float,
            help="Only marks with a published position (in --frame-epsg, if given) whose FGDC horizontal 95 %% "
            "accuracy is at most this many metres.",
        )
        parser.add_argument("--path", choices=PATHS, default="auto", help="Candidate search (default: auto).")
        parser.add_argument("--json", action="store_true", help="Print JSON instead of a table.")

    def handle(self, *args, **options):
        radius_km = options["radius_km"]
        try:
            found = marks_near(
                lat_deg=options["lat"],
                lon_deg=options["lon"],
                radius_m=radius_km * 1000.0,
                limit=options["limit"],
                status=options["status"],
                stability=options["stability"],
                frame_epsg=options["frame_epsg"],
                intact_visit_within_yr=options["intact_visit_within_yr"],
                accuracy_class_max_m=options["accuracy_max_m"],
                path=options["path"],
            )
        except RegistryError as exc:
            raise CommandError(f"{exc.message} ({exc.code})") from None
        if options["json"]:
            payload = {
                "search": {
                    "lat_deg": round(options["lat"], 9),
                    "lon_deg": round(options["lon"], 9),
                    "radius_m": round(radius_km * 1000.0, 3),
                    "limit": options["limit"],
                    "ellipsoid": "GRS80",
                    "location_note": SEARCH_LOCATION_NOTE,
                },
                "marks": [m.as_dict() for m in found],
                "cautions": list(CAUTIONS),
            }
            self.stdout.write(json.dumps(payload, indent=2, ensure_ascii=False))
            return
        self.stdout.write(self._table(found, options))

    @staticmethod
    def _table(found, options) -> str:
        lines = [
            f"Marks within {options['radius_km']:.3f} km of latitude {options['lat']:.9f}°, "
            f"longitude {options['lon']:.9f}°: {len(found)} found"
            + (f" (limit {options['limit']})" if options["limit"] else ""),
            SEARCH_LOCATION_NOTE,
            "",
        ]
        header = ("#", "code", "status", "stability", "distance m", "azimuth °", "latitude °", "longitude °")
        rows = [
            (
                str(i),
                m.code,
                m.mark.status,
                m.mark.stability,
                f"{m.distance_m:.3f}",
                "—" if m.azimuth_deg is None else f"{m.azimuth_deg:.4f}",
                f"{m.lat_deg:.9f}",
                f"{m.lon_deg:.9f}",
            )
            for i, m in enumerate(found, start=1)
        ]
        widths = [max(len(r[c]) for r in [header, *rows]) for c in range(len(header))]
        left = {1, 2, 3}  # words left-aligned, numbers right-aligned

        def fmt(row):
            return "  ".join(
                cell.ljust(w) if c in left else cell.rjust(w)
                for c, (cell, w) in enumerate(zip(row, widths, strict=True))
            )

        lines.append(fmt(header))
        lines.extend(fmt(r) for r in rows)
        lines.append("")
        lines.extend(f"Caution: {c}" for c in CAUTIONS)
        return "\n".join(lines) + "\n"
