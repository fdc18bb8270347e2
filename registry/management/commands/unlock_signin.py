"""``python manage.py unlock_signin [USERNAME] [--address IP] --as ADMIN --note TEXT``.

Lifts the pause on signing in that too many failed passwords put on an account (and/or on a
client address) before it ends by itself, through the ``signin_unlock`` service: the acting user
needs the admin role (or is a superuser), the note is required, and each cleared count leaves a
``signin_unlock`` audit row. ``--list`` shows the accounts and addresses paused now.
"""

from __future__ import annotations

from django.core.exceptions import ValidationError
from django.core.management.base import BaseCommand, CommandError
from django.utils import timezone

from registry.errors import RegistryError
from registry.management.commands.set_roles import actor_by_username
from registry.models import SigninThrottle
from registry.services.signin import signin_unlock


class Command(BaseCommand):
    help = "Unlock sign-in for an account or a client address paused after failed passwords (admin; audited)."

    def add_arguments(self, parser):
        parser.add_argument("username", nargs="?", default="", help="the account to unlock")
        parser.add_argument("--address", default="", help="a client IP address to unlock")
        parser.add_argument("--list", action="store_true", help="list what is paused now, change nothing")
        parser.add_argument("--as", dest="actor", help="administrator unlocking (recorded in the audit)")
        parser.add_argument("--note", default="", help="reason, stored with the audit row")

    def handle(self, *args, **opts):
        if opts["list"]:
            now = timezone.now()
            rows = SigninThrottle.objects.filter(locked_until__gt=now).order_by("key")
            if not rows:
                self.stdout.write("Nothing is paused.")
            for row in rows:
                scope, _, name = row.key.partition(":")
                minutes = (row.locked_until - now).total_seconds() / 60
                self.stdout.write(
                    f"{scope} {name}: paused after {row.failures} failed sign-ins, {minutes:.0f} more minutes"
                )
            return
        if not opts["actor"]:
            raise CommandError("--as ADMIN is required (who unlocks is recorded in the audit trail).")
        actor = actor_by_username(opts["actor"])
        try:
            cleared = signin_unlock(actor=actor, username=opts["username"], address=opts["address"], note=opts["note"])
        except ValidationError as exc:
            raise CommandError(" ".join(exc.messages) + " Nothing was changed.") from None
        except RegistryError as exc:
            raise CommandError(exc.message + " Nothing was changed.") from None
        if not cleared:
            self.stdout.write("No failed sign-ins were counted for that; nothing to unlock.")
            return
        for key in cleared:
            scope, _, name = key.partition(":")
            self.stdout.write(f"Unlocked {scope} {name} (recorded in the audit trail).")
