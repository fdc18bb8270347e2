"""``python manage.py set_active USERNAME --off|--on --as ADMIN --note TEXT``.

Deactivates (``--off``) or reactivates (``--on``) an account through the ``user_set_active`` service:
the acting user needs the admin role (or is a superuser), the note (the reason) is required, and the
change is one transaction leaving one ``user_set_active`` audit row. Refused for your own account and
when no active administrator would remain. Accounts are never deleted; a deactivated one keeps its
roles and cannot sign in or use its API token.
"""

from __future__ import annotations

from django.core.exceptions import ValidationError
from django.core.management.base import BaseCommand, CommandError

from registry.errors import RegistryError
from registry.management.commands.set_roles import actor_by_username
from registry.services.users import user_set_active


class Command(BaseCommand):
    help = "Deactivate (--off) or reactivate (--on) an account (admin only; audited; a note is required)."

    def add_arguments(self, parser):
        parser.add_argument("username", help="the account to change")
        state = parser.add_mutually_exclusive_group(required=True)
        state.add_argument("--off", dest="active", action="store_false", help="deactivate: the account cannot sign in")
        state.add_argument("--on", dest="active", action="store_true", help="reactivate the account")
        parser.add_argument(
            "--as", dest="actor", required=True, help="administrator making the change (recorded in the audit)"
        )
        parser.add_argument("--note", required=True, help="reason, stored with the audit row")

    def handle(self, *args, **opts):
        actor = actor_by_username(opts["actor"])
        try:
            user = user_set_active(actor=actor, username=opts["username"], active=opts["active"], note=opts["note"])
        except ValidationError as exc:
            raise CommandError(" ".join(exc.messages) + " Nothing was changed.") from None
        except RegistryError as exc:
            raise CommandError(exc.message + " Nothing was changed.") from None
        state = "active: can sign in" if user.is_active else "inactive: cannot sign in or use an API token"
        self.stdout.write(f"{user.username} is now {state} (recorded in the audit trail).")
