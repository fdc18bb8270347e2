"""``python manage.py set_roles USERNAME ROLE [ROLE ...] --as ADMIN [--note TEXT]`` (or ``--none``).

Replaces a user's roles through the ``user_set_roles`` service: the acting user needs the admin
role (or is a superuser), the change is one transaction and leaves one ``user_set_roles`` audit row
with the roles before and after. Roles: viewer, technician, manager, signatory, admin.
"""

from __future__ import annotations

from django.core.exceptions import ValidationError
from django.core.management.base import BaseCommand, CommandError

from registry.errors import RegistryError
from registry.management.common import actor_by_username
from registry.roles import Role
from registry.services.users import user_set_roles


class Command(BaseCommand):
    help = "Replace a user's roles (admin only; audited). Roles: " + ", ".join(r.value for r in Role) + "."

    def add_arguments(self, parser):
        parser.add_argument("username", help="the account to change")
        parser.add_argument("roles", nargs="*", metavar="ROLE", help="the roles the account will have")
        parser.add_argument("--none", action="store_true", help="take every role away (the account stays)")
        parser.add_argument(
            "--as", dest="actor", required=True, help="administrator making the change (recorded in the audit)"
        )
        parser.add_argument("--note", default="", help="reason, stored with the audit row")

    def handle(self, *args, **opts):
        if opts["none"] == bool(opts["roles"]):
            raise CommandError("give one or more roles, or --none to take every role away (not both)")
        actor = actor_by_username(opts["actor"])
        try:
            user = user_set_roles(actor=actor, username=opts["username"], roles=opts["roles"], note=opts["note"])
        except ValidationError as exc:
            raise CommandError(" ".join(exc.messages) + " Nothing was changed.") from None
        except RegistryError as exc:
            raise CommandError(exc.message + " Nothing was changed.") from None
        roles = ", ".join(r for r in opts["roles"]) if opts["roles"] else "no roles"
        self.stdout.write(f"{user.username} now has: {roles.lower()} (recorded in the audit trail).")
