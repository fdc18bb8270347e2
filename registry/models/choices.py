"""The base class of the registry's lists of choices, as the type checker should read it.

At run time ``TextChoices`` is Django's own. Django ships no type information and the project does not
use django-stubs, so to mypy ``models.TextChoices`` is ``Any`` and a member such as
``MarkStatus.DESTROYED = "destroyed", "destroyed"`` would read as a tuple. For the type checker only,
the class below says what Django makes of it: a ``str`` enum whose members carry a ``label``, with the
class-level ``values``, ``labels`` and ``choices`` lists.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

if TYPE_CHECKING:
    import enum
    from typing import ClassVar

    class TextChoices(str, enum.Enum):
        values: ClassVar[list[str]]
        labels: ClassVar[list[str]]
        choices: ClassVar[list[tuple[str, str]]]

        @property
        def label(self) -> str: ...

else:
    from django.db.models import TextChoices

__all__ = ["TextChoices"]
