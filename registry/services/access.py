"""Gatekeepers: the few functions through which services and views reach an object.

``require_ability`` refuses a user who lacks an ability. The ``access_*`` functions
return the object or raise :class:`registry.errors.NotFound`; a user who lacks even
the VIEW ability gets the same ``NotFound`` whether the object exists or not, so the
answer never reveals what is in the registry. A user who may view but lacks the
requested ability gets :class:`registry.errors.PermissionDeniedError`.
"""

from __future__ import annotations

from typing import Any

from registry.errors import NotFound, PermissionDeniedError
from registry.models import Job, Mark, Position
from registry.roles import Ability, has_ability

# Primary keys are 64-bit (BigAutoField); a larger number cannot name a row.
_MAX_BIGINT = 2**63 - 1

_ABILITY_WORDS = {
    Ability.VIEW: "view the registry",
    Ability.RECORD: "record fieldwork",
    Ability.MANAGE: "manage marks and positions",
    Ability.SIGN: "sign documents",
    Ability.ADMINISTER: "administer the registry",
}


def require_ability(user, ability: Ability) -> None:
    """Raise ``PermissionDeniedError`` unless ``user`` holds ``ability``."""
    if not has_ability(user, ability):
        raise PermissionDeniedError(
            f"Your role does not allow you to {_ABILITY_WORDS.get(ability, ability.value)}.",
            details={"ability": ability.value},
        )


def _gate(user, ability: Ability, not_found: NotFound) -> None:
    if not has_ability(user, Ability.VIEW):
        raise not_found
    if ability != Ability.VIEW:
        require_ability(user, ability)


def access_mark_by_code(user, code: Any, *, ability: Ability = Ability.VIEW, for_update: bool = False) -> Mark:
    """The mark with ``code`` (exact, case-sensitive), if ``user`` may act on it with ``ability``.

    ``for_update=True`` locks the row (``SELECT ... FOR UPDATE``); call it inside a transaction.
    """
    not_found = NotFound(f"No mark with code {code!r}.", details={"code": str(code)})
    _gate(user, ability, not_found)
    if not isinstance(code, str) or not code or "\x00" in code:
        raise not_found
    qs = Mark.objects.select_for_update() if for_update else Mark.objects.all()
    try:
        return qs.get(code=code)
    except Mark.DoesNotExist:
        raise not_found from None


def access_position_by_id(
    user, position_id: Any, *, ability: Ability = Ability.VIEW, for_update: bool = False
) -> Position:
    """The position with primary key ``position_id`` (its mark selected too)."""
    not_found = NotFound(f"No position with id {position_id!r}.", details={"position_id": str(position_id)})
    _gate(user, ability, not_found)
    try:
        pk = int(position_id)
    except (TypeError, ValueError):
        raise not_found from None
    if not 1 <= pk <= _MAX_BIGINT:
        raise not_found
    qs = Position.objects.select_related("mark")
    if for_update:
        qs = qs.select_for_update(of=("self",))
    try:
        return qs.get(pk=pk)
    except Position.DoesNotExist:
        raise not_found from None


def access_job_by_code(user, code: Any, *, ability: Ability = Ability.VIEW) -> Job:
    """The job with ``code``, if ``user`` may act on it with ``ability``."""
    not_found = NotFound(f"No job with code {code!r}.", details={"code": str(code)})
    _gate(user, ability, not_found)
    if not isinstance(code, str) or not code or "\x00" in code:
        raise not_found
    try:
        return Job.objects.get(code=code)
    except Job.DoesNotExist:
        raise not_found from None
