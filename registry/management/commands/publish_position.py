"""``python manage.py publish_position ID --as USER [--note TEXT] [--compared-with ID|none] [--json]``.

Publishes a proposed position through ``services.positions.position_publish`` — the same rules as the
page and the API: the acting user needs the manager role; the movement check is run again and stored
with the decision; against "possible movement" a note (the reason) is required; if the mark's published
position is not the one the proposal was compared with (``--compared-with``, by default the one of the
check made when it was proposed), nothing is published and the command says why. Prints the check.
"""

from __future__ import annotations

import json

from django.core.exceptions import ValidationError
from django.core.management.base import BaseCommand, CommandError

from registry.errors import RegistryError
from registry.management.commands.set_roles import actor_by_username
from registry.services.movement_checks import latest_check, stored_check_dict
from registry.services.positions import AS_PROPOSED, position_publish


class Command(BaseCommand):
    help = "Publish a proposed position (control managers; movement check stored; audited)."

    def add_arguments(self, parser):
        parser.add_argument("id", type=int, help="the proposed position")
        parser.add_argument("--as", dest="actor", required=True, help="control manager publishing it (recorded)")
        parser.add_argument("--note", default="", help="the reason; required against a possible movement")
        parser.add_argument(
            "--compared-with", help="the published position you compared it with ('none' if nothing was published)"
        )
        parser.add_argument("--json", action="store_true", help="print JSON")

    def handle(self, *args, **opts):
        actor = actor_by_username(opts["actor"])
        raw = opts["compared_with"]
        compared_with = AS_PROPOSED if raw is None else (None if raw.strip().lower() == "none" else raw)
        try:
            position = position_publish(
                actor=actor, position_id=opts["id"], note=opts["note"], compared_with=compared_with
            )
        except ValidationError as exc:
            raise CommandError(" ".join(exc.messages) + " Nothing was changed.") from None
        except RegistryError as exc:
            raise CommandError(exc.message + " Nothing was changed.") from None
        check = stored_check_dict(latest_check(position.pk, "published"))
        if opts["json"]:
            out = {
                "position": position.pk,
                "mark": position.mark.code,
                "state": position.state,
                "movement_check": check,
            }
            self.stdout.write(json.dumps(out, indent=2, ensure_ascii=False, default=str))
            return
        self.stdout.write(
            f"Position {position.pk} of {position.mark.code} is published (EPSG:{position.frame_epsg}). "
            f"Movement check: {check['verdict_words']}"
            + (f", T = {check['t_global']:.3f}, p = {check['p_value']:.4g}." if check["t_global"] is not None else ".")
        )
