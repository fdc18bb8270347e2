"""``python manage.py compare_position --mark CODE (--id POSITION | --lat --lon --h --frame --epoch --cov-enu ...) [--json]``.

Runs the movement check of ``registry.services.movement`` — the one the publish service, the pages, the
API and imports use — for a stored position of the mark (``--id``) or for coordinates given here, against
the mark's published position (same frame first, else the newest published in any frame). Nothing is
stored. The output names the difference (mm, east/north/up), the one global test (T, degrees of freedom,
p, level), the verdict, the smallest movement the check could have detected per axis, and how the
published position was brought to the compared frame and epoch.

Exit status 0 whatever the verdict; 1 with a message for bad input.
"""

from __future__ import annotations

import json

from django.core.exceptions import ValidationError
from django.core.management.base import BaseCommand, CommandError

from registry.models import Mark, Position
from registry.services.movement import comparison_target, movement_compare
from registry.services.positions import position_validate


class Command(BaseCommand):
    help = "Compare a position of a mark with its published position (movement check; nothing is stored)."

    def add_arguments(self, parser):
        parser.add_argument("--mark", required=True, help="the mark's code")
        parser.add_argument("--id", type=int, help="a stored position of the mark to compare")
        parser.add_argument("--lat", type=float, help="latitude, decimal degrees")
        parser.add_argument("--lon", type=float, help="longitude, decimal degrees")
        parser.add_argument("--h", type=float, help="ellipsoidal height, m")
        parser.add_argument("--frame", type=int, help="EPSG code of the geographic 3D frame")
        parser.add_argument("--epoch", type=float, help="coordinate epoch, decimal year")
        parser.add_argument(
            "--cov-enu",
            type=float,
            nargs="+",
            metavar="M2",
            help="covariance in m²: ee nn uu, or ee nn uu en eu nu",
        )
        parser.add_argument("--vel-enu", type=float, nargs=3, metavar="M_YR", help="velocity east north up, m/yr")
        parser.add_argument("--json", action="store_true", help="print JSON")

    def handle(self, *args, **opts):
        try:
            mark = Mark.objects.get(code=opts["mark"])
        except Mark.DoesNotExist:
            raise CommandError(f"No mark with code {opts['mark']!r}.") from None
        if opts["id"] is not None:
            try:
                position = Position.objects.get(pk=opts["id"], mark=mark)
            except Position.DoesNotExist:
                raise CommandError(f"Mark {mark.code} has no position {opts['id']}.") from None
        else:
            position = Position(mark=mark, **self._given(opts))
        outcome = movement_compare(position=position, published=comparison_target(position))
        data = {"mark": mark.code, "position": position.pk, **outcome.as_dict()}
        if opts["json"]:
            self.stdout.write(json.dumps(data, indent=2, ensure_ascii=False))
            return
        self._words(data)

    def _given(self, opts) -> dict:
        names = {"lat": "lat_deg", "lon": "lon_deg", "h": "h_m", "frame": "frame_epsg", "epoch": "epoch_yr"}
        missing = [f"--{k}" for k in (*names, "cov_enu") if opts[k] is None]
        if missing:
            raise CommandError(f"Give --id, or all of {', '.join(m.replace('_', '-') for m in missing)}.")
        cov = opts["cov_enu"]
        if len(cov) not in (3, 6):
            raise CommandError("--cov-enu takes 3 values (ee nn uu) or 6 (ee nn uu en eu nu), in m².")
        data = {v: opts[k] for k, v in names.items()}
        data.update(
            zip(("cov_ee_m2", "cov_nn_m2", "cov_uu_m2", "cov_en_m2", "cov_eu_m2", "cov_nu_m2"), cov, strict=False)
        )
        if opts["vel_enu"]:
            data.update(zip(("vel_e_m_yr", "vel_n_m_yr", "vel_u_m_yr"), opts["vel_enu"], strict=False))
        data["source"] = "compare_position"
        try:
            cleaned = position_validate(data)
        except ValidationError as exc:
            raise CommandError(" ".join(exc.messages)) from None
        cleaned.pop("note", None)
        return cleaned

    def _words(self, d: dict) -> None:
        w = self.stdout.write
        w(f"Mark {d['mark']}: {d['verdict_words']}.")
        if d["t_global"] is None:
            w(d["reason"])
            return
        w(f"Compared with published position {d['compared_with']}.")
        w(f"Difference east / north / up: {d['d_east_mm']:.1f} / {d['d_north_mm']:.1f} / {d['d_up_mm']:.1f} mm")
        w(
            f"One test of all three components: T = {d['t_global']:.3f} with {d['dof']} degrees of freedom, "
            f"p = {d['p_value']:.4g}, at the {100 * (1 - d['level']):g} % level (critical value {d['critical']:.3f})."
        )
        if d["verdict"] == "possible_movement":
            where = [n for n, k in (("horizontal", "moved_horizontal"), ("vertical", "moved_vertical")) if d[k]]
            w("Movement located: " + (" and ".join(where) if where else "not in one part alone") + ".")
        det = d["detectable_mm"]
        w(
            f"Smallest movement this check could detect ({100 * d['power']:g} % power): "
            f"{det['east']:.1f} east, {det['north']:.1f} north, {det['up']:.1f} up (mm)."
        )
        w("How the published position was brought to this frame and epoch:")
        for step in d["frame_chain"]:
            w(f"  - {step}")
        for warning in d["warnings"]:
            w(f"Caution: {warning}")
