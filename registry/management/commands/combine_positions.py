"""``python manage.py combine_positions --mark CODE --ids ID ID ... --as USER [--velocity] [--json]``.

Proposes one position from repeat solutions of a mark through ``services.combination``: their weighted
mean with full covariance and the variance-of-unit-weight test (solutions at one epoch), or with
``--velocity`` the position and velocity fitted to at least 3 solutions spanning at least 2.5 years. The
proposal gets the usual movement check; a manager publishes it as any other. Audited.
"""

from __future__ import annotations

import json

from django.core.exceptions import ValidationError
from django.core.management.base import BaseCommand, CommandError

from registry.errors import RegistryError
from registry.management.commands.set_roles import actor_by_username
from registry.services.combination import positions_combine, positions_velocity


class Command(BaseCommand):
    help = "Propose the combination (or velocity fit) of repeat solutions of a mark (control managers; audited)."

    def add_arguments(self, parser):
        parser.add_argument("--mark", required=True, help="the mark's code")
        parser.add_argument("--ids", type=int, nargs="+", required=True, help="the positions to use")
        parser.add_argument("--as", dest="actor", required=True, help="control manager (recorded)")
        parser.add_argument("--velocity", action="store_true", help="fit a velocity instead of a mean")
        parser.add_argument("--json", action="store_true", help="print JSON")

    def handle(self, *args, **opts):
        actor = actor_by_username(opts["actor"])
        service = positions_velocity if opts["velocity"] else positions_combine
        try:
            proposal, _ = service(actor=actor, mark_code=opts["mark"], position_ids=opts["ids"])
        except ValidationError as exc:
            raise CommandError(" ".join(exc.messages) + " Nothing was changed.") from None
        except RegistryError as exc:
            raise CommandError(exc.message + " Nothing was changed.") from None
        check = proposal.movement_checks.order_by("-created_at", "-id").first()
        if opts["json"]:
            out = {
                "position": proposal.pk,
                "mark": proposal.mark.code,
                "frame_epsg": proposal.frame_epsg,
                "epoch_yr": proposal.epoch_yr,
                "lat_deg": proposal.lat_deg,
                "lon_deg": proposal.lon_deg,
                "h_m": proposal.h_m,
                "velocity_m_yr": [proposal.vel_e_m_yr, proposal.vel_n_m_yr, proposal.vel_u_m_yr],
                "statement": proposal.note,
                "movement_verdict": check.verdict if check else None,
            }
            self.stdout.write(json.dumps(out, indent=2, ensure_ascii=False))
            return
        self.stdout.write(f"Position {proposal.pk} of {proposal.mark.code} proposed. {proposal.note}")
