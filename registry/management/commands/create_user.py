"""``python manage.py create_user USERNAME --role ROLE [--role ROLE ...] --as ADMIN [--email ...]``.

Creates an account through the ``user_create`` service (admin only; one ``user_create`` audit row).
The account has no usable password until one is set with Django's own command
``python manage.py changepassword USERNAME`` (a password is never given on the command line, where it
would stay in the shell history).
"""

from __future__ import annotations

from django.core.exceptions import ValidationError
from django.core.management.base import BaseCommand, CommandError

from registry.errors import RegistryError
from registry.management.commands.set_roles import actor_by_username
from registry.roles import Role
from registry.services.users import user_create


class Command(BaseCommand):
    help = "Create a user with roles (admin only; audited); then set a password with changepassword."

    def add_arguments(self, parser):
        parser.add_argument("username")
        parser.add_argument(
            "--role",
            dest="roles",
            action="append",
            default=[],
            choices=[r.value for r in Role],
            help="a role of the new account (repeat for several)",
        )
        parser.add_argument("--as", dest="actor", required=True, help="administrator creating the account")
        parser.add_argument("--email", default="")
        parser.add_argument("--first-name", default="")
        parser.add_argument("--last-name", default="")

    def handle(self, *args, **opts):
        actor = actor_by_username(opts["actor"])
        try:
            user = user_create(
                actor=actor,
                username=opts["username"],
                roles=opts["roles"],
                email=opts["email"],
                first_name=opts["first_name"],
                last_name=opts["last_name"],
            )
        except ValidationError as exc:
            raise CommandError(" ".join(exc.messages) + " Nothing was changed.") from None
        except RegistryError as exc:
            raise CommandError(exc.message + " Nothing was changed.") from None
        roles = ", ".join(opts["roles"]) or "no roles"
        self.stdout.write(
            f"Created {user.username} ({roles}). Set a password with: python manage.py changepassword {user.username}"
        )
