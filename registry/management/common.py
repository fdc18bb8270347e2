"""What the commands share: the acting user by name, an input file read whole, help printed as written.

(Not in ``commands/``: Django would take a module there for a command.)
"""

from __future__ import annotations

from argparse import RawDescriptionHelpFormatter
from pathlib import Path

from django.contrib.auth import get_user_model
from django.core.management.base import BaseCommand, CommandError


def actor_by_username(username: str):
    """The user named ``username`` (the ``--as`` option); a clear refusal when there is none."""
    User = get_user_model()
    try:
        return User.objects.get(username=username)
    except User.DoesNotExist:
        raise CommandError(f"no user named {username!r} (--as)") from None


def read_input_file(path: Path) -> bytes:
    """The whole file, or a refusal that names it and says why it could not be read."""
    try:
        return path.read_bytes()
    except OSError as exc:
        raise CommandError(f"cannot read {path}: {exc.strerror}") from None


class HelpAsWrittenCommand(BaseCommand):
    """A command whose ``--help`` keeps the help text's paragraphs and lists as written."""

    def create_parser(self, prog_name, subcommand, **kwargs):
        parser = super().create_parser(prog_name, subcommand, **kwargs)
        parser.formatter_class = RawDescriptionHelpFormatter
        return parser
