"""``python manage.py convert_point`` — one point in every form, in a target frame and epoch.

    python manage.py convert_point (--lat DEG --lon DEG --h M | --xyz X Y Z | --en E N --grid-in EPSG [--h M])
        --frame EPSG --epoch YEAR [--to-frame EPSG] [--to-epoch YEAR] [--grid EPSG|utm|CODE]
        [--plate AUTO|CODE | --velocity VE VN VU] [--json]

Latitude/longitude accept decimal degrees or DMS ("45 12 03.5 N", "-110:36:00"). The same
conversion is on the page /tools/convert/ and at /api/convert/ (same function, same JSON keys).
"""

from __future__ import annotations

import json

from django.core.management.base import BaseCommand, CommandError

from registry.geodesy.convert import JSON_KEYS, ConversionError, display_rows
from registry.selectors.conversion import point_convert


class Command(BaseCommand):
    help = (
        "Convert one point between geodetic, ECEF and grid forms, and to another frame and epoch, "
        "with scale, elevation and combined factors, convergence and orthometric height."
    )

    def add_arguments(self, parser):
        g = parser.add_argument_group("input (one form)")
        g.add_argument("--lat", help="latitude: decimal degrees or DMS, e.g. '45 12 03.5 N'")
        g.add_argument("--lon", help="longitude: decimal degrees or DMS, e.g. '110 36 00 W'")
        g.add_argument("--h", type=float, help="ellipsoidal height (m); also needed with --en")
        g.add_argument(
            "--xyz", nargs=3, type=float, metavar=("X", "Y", "Z"), help="ECEF (m) in the frame's geocentric form"
        )
        g.add_argument("--en", nargs=2, type=float, metavar=("E", "N"), help="grid easting and northing (m)")
        g.add_argument("--grid-in", dest="grid_in", help="EPSG code of the grid of --en")
        parser.add_argument("--frame", required=True, help="EPSG code of the input's geographic 3D frame, e.g. 7912")
        parser.add_argument("--epoch", required=True, type=float, help="coordinate epoch of the input (decimal year)")
        parser.add_argument("--to-frame", dest="to_frame", help="target frame (EPSG code); default: --frame")
        parser.add_argument(
            "--to-epoch", dest="to_epoch", type=float, help="target epoch (decimal year); default: --epoch"
        )
        parser.add_argument(
            "--grid", help="output grid: EPSG code of a projected CRS, 'utm' (default), or a custom grid's code"
        )
        motion = parser.add_mutually_exclusive_group()
        motion.add_argument(
            "--plate",
            help="plate motion for an epoch change without a velocity: AUTO (from the location) or an "
            "ITRF2020-PMM plate code (NOAM, EURA, AUST, ...); default: the office's setting",
        )
        motion.add_argument(
            "--velocity",
            nargs=3,
            type=float,
            metavar=("VE", "VN", "VU"),
            help="the point's own velocity east, north, up (mm/yr) in the input frame",
        )
        parser.add_argument("--json", action="store_true", help="print one JSON object instead of text")

    def handle(self, *args, **opts):
        lat, lon = opts["lat"], opts["lon"]
        xyz, en = opts["xyz"], opts["en"]
        forms = sum(v is not None for v in ((lat if lat is not None else lon), xyz, en))
        if forms != 1:
            raise CommandError("Give exactly one input: --lat/--lon/--h, or --xyz X Y Z, or --en E N --grid-in EPSG.")
        if (lat is None) != (lon is None) and xyz is None and en is None:
            raise CommandError("Give both --lat and --lon (and --h).")
        if xyz is not None and opts["h"] is not None:
            raise CommandError("--h does not go with --xyz (the height comes from X, Y, Z).")
        if opts["grid_in"] and en is None:
            raise CommandError("--grid-in goes with --en E N.")
        grid = opts["grid"]
        extra = {}
        if opts["plate"]:
            extra["plate"] = opts["plate"]
        if opts["velocity"] is not None:
            extra["velocity_enu_m_yr"] = tuple(v / 1000.0 for v in opts["velocity"])
        try:
            result = point_convert(
                **extra,
                frame_epsg=opts["frame"],
                epoch_yr=opts["epoch"],
                lat=lat,
                lon=lon,
                h_m=opts["h"],
                xyz_m=xyz,
                en_m=en,
                grid_in=opts["grid_in"],
                to_frame_epsg=opts["to_frame"],
                to_epoch_yr=opts["to_epoch"],
                grid=grid or "utm",
                grid_explicit=grid is not None,
            )
        except ConversionError as exc:
            where = f" [{exc.field}]" if exc.field else ""
            raise CommandError(f"{exc}{where}") from None
        if opts["json"]:
            data = result.as_json()
            assert all(k in data for k in JSON_KEYS)
            self.stdout.write(json.dumps(data, ensure_ascii=False, indent=2))
            return
        self.stdout.write(render_text(display_rows(result)))


def render_text(d: dict) -> str:
    width = max(len(label) for label, _, _ in d["rows"])
    vwidth = max(len(value) for _, value, _ in d["rows"])
    lines = [f"Input: {d['source']}", ""]
    for label, value, note in d["rows"]:
        lines.append(f"  {label:<{width}}  {value:>{vwidth}}  {note}".rstrip())
    lines += ["", "Chain of operations:"]
    lines += [f"  {i}. {text}" for i, text in enumerate(d["chain"], start=1)]
    if d["warnings"]:
        lines += ["", "Warnings:"]
        lines += [f"  ! {w}" for w in d["warnings"]]
    lines += ["", "Cautions:"]
    lines += [f"  - {c}" for c in d["cautions"]]
    return "\n".join(lines)
