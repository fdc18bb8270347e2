"""Sign-in throttling: failed passwords counted per account and per client address, audited.

Rules (settings ``REGISTRY_SIGNIN_*``, README "Settings"):

- **Per account**: after ``ACCOUNT_FAILURES`` (5) failed sign-ins within ``LOCK_MINUTES`` (15)
  the account is locked for ``LOCK_MINUTES``: every sign-in to it is refused, right password or
  not, without the password being checked.
- **Per address**: after ``ADDRESS_FAILURES`` (20) failed sign-ins from one client address within
  the same window (several accounts tried from one place) that address is locked likewise.
- A successful sign-in clears its account's count (not its address's).
- Every failed sign-in that was checked is audited (``signin_failed``: the user name as typed,
  the address, the count), and the moment a lock begins (``signin_locked``). Attempts refused
  during a lock are not checked and not audited one by one, so a flood of guesses cannot flood
  the audit trail either.
- An administrator lifts a lock early with :func:`signin_unlock` (``manage.py unlock_signin``),
  with a note, audited (``signin_unlock``).

Why our own and in the database (not django-axes, not the cache): the rules are a few lines and
speak our words, the audit rows go to our own trail, and the counts live in the one place every
gunicorn worker (and every application server) shares. Django's default cache is per process,
so a cache-based count would let each worker take its own guesses and would forget them on every
restart. The counts are read and written under a row lock (``SELECT ... FOR UPDATE``), so
concurrent guesses cannot slip past the limit. Locking an account on failed guesses lets
somebody who knows a user name lock that user out for a while; that is the usual trade-off, and
why administrators can unlock.
"""

from __future__ import annotations

import datetime as _dt
import ipaddress
import math
from dataclasses import dataclass

from django.conf import settings
from django.contrib.auth import get_user_model
from django.core.exceptions import ValidationError
from django.db import transaction
from django.db.models import Q
from django.utils import timezone

from registry.models import SigninThrottle
from registry.roles import Ability
from registry.services._input import parse_note
from registry.services.access import require_ability
from registry.services.audit import audit_record

ACCOUNT, ADDRESS = "account", "address"


def _limits() -> tuple[int, int, _dt.timedelta]:
    cfg = settings.REGISTRY
    return (
        int(cfg.get("SIGNIN_ACCOUNT_FAILURES", 5)),
        int(cfg.get("SIGNIN_ADDRESS_FAILURES", 20)),
        _dt.timedelta(minutes=float(cfg.get("SIGNIN_LOCK_MINUTES", 15))),
    )


def account_key(username: str) -> str:
    """Throttle key of an account; case-folded, so that "Mona" and "mona" share one count."""
    return f"{ACCOUNT}:{(username or '').strip().casefold()[:150]}"


def address_key(address: str) -> str:
    return f"{ADDRESS}:{address}"


def client_address(request) -> str:
    """The client's IP address: ``REGISTRY_CLIENT_IP_HEADER`` (set by the proxy) when it holds one, else
    the connection's address."""
    header = settings.REGISTRY.get("CLIENT_IP_HEADER", "")
    candidates = [request.META.get(header, "")] if header else []
    candidates.append(request.META.get("REMOTE_ADDR", ""))
    for value in candidates:
        value = (value or "").split(",")[0].strip()
        try:
            return str(ipaddress.ip_address(value))
        except ValueError:
            continue
    return "unknown"


@dataclass(frozen=True)
class SigninRefusal:
    """Why a sign-in is refused right now, and for how long."""

    scope: str  # ACCOUNT or ADDRESS
    until: _dt.datetime

    @property
    def wait_seconds(self) -> int:
        return max(1, math.ceil((self.until - timezone.now()).total_seconds()))

    @property
    def message(self) -> str:
        minutes = max(1, math.ceil(self.wait_seconds / 60))
        wait = f"{minutes} minute{'s' if minutes != 1 else ''}"
        if self.scope == ACCOUNT:
            return (
                f"Too many failed sign-ins for this account. Sign-in to it is paused: try again in {wait}, "
                "or ask the office administrator to unlock it."
            )
        return (
            f"Too many failed sign-ins from your network address. Sign-in from it is paused: try again in {wait}, "
            "or ask the office administrator."
        )


def signin_refusal(*, username: str, address: str) -> SigninRefusal | None:
    """The lock (account first, then address) that refuses a sign-in now, if any."""
    now = timezone.now()
    rows = {
        r.key: r
        for r in SigninThrottle.objects.filter(
            key__in=[account_key(username), address_key(address)], locked_until__gt=now
        )
    }
    for scope, key in ((ACCOUNT, account_key(username)), (ADDRESS, address_key(address))):
        if key in rows:
            return SigninRefusal(scope, rows[key].locked_until)
    return None


def _count(key: str, limit: int, window: _dt.timedelta, now: _dt.datetime) -> tuple[SigninThrottle, bool]:
    row, _ = SigninThrottle.objects.select_for_update().get_or_create(key=key, defaults={"window_started_at": now})
    if now - row.window_started_at > window or (row.locked_until is not None and row.locked_until <= now):
        row.failures, row.window_started_at, row.locked_until = 0, now, None
    row.failures += 1
    locked_now = row.failures >= limit and row.locked_until is None
    if locked_now:
        row.locked_until = now + window
    row.save()
    return row, locked_now


def signin_failed(*, username: str, address: str) -> int:
    """Count one failed sign-in (account and address), audit it; return the attempts left for the account."""
    account_limit, address_limit, window = _limits()
    now = timezone.now()
    typed = (username or "")[:150]
    user = get_user_model().objects.filter(username=typed.strip()).first()
    with transaction.atomic():
        account, account_locked = _count(account_key(typed), account_limit, window, now)
        addr, address_locked = _count(address_key(address), address_limit, window, now)
        obj = user if user is not None else account
        details = {
            "username": typed,
            "address": address,
            "account_failures": account.failures,
            "address_failures": addr.failures,
        }
        audit_record(actor=None, action="signin_failed", obj=obj, after=details, note="wrong user name or password")
        for locked, row, scope in ((account_locked, account, ACCOUNT), (address_locked, addr, ADDRESS)):
            if locked:
                audit_record(
                    actor=None,
                    action="signin_locked",
                    obj=obj if scope == ACCOUNT else row,
                    after={**details, "scope": scope, "locked_until": row.locked_until},
                    note=f"sign-in paused for this {scope} after {row.failures} failures",
                )
        # Old counts (a day past their window) are removed as we go.
        SigninThrottle.objects.filter(window_started_at__lt=now - window - _dt.timedelta(days=1)).delete()
    return max(0, account_limit - account.failures)


def signin_succeeded(*, username: str) -> None:
    """A successful sign-in clears its account's count."""
    SigninThrottle.objects.filter(
        Q(locked_until__isnull=True) | Q(locked_until__lte=timezone.now()), key=account_key(username)
    ).delete()


def signin_unlock(*, actor, username: str = "", address: str = "", note: str) -> list[str]:
    """Lift the sign-in pause of an account and/or an address (administrators; note required; audited).

    Returns the keys that were cleared (empty: nothing was counted for them).
    """
    require_ability(actor, Ability.ADMINISTER)
    note = parse_note(note, required=True, what="unlocking sign-in")
    keys = []
    if username and username.strip():
        keys.append(account_key(username))
    if address and address.strip():
        try:
            keys.append(address_key(str(ipaddress.ip_address(address.strip()))))
        except ValueError:
            raise ValidationError(
                {
                    "address": ValidationError(
                        "Not an IP address: %(value)s.", code="invalid_address", params={"value": address}
                    )
                }
            ) from None
    if not keys:
        raise ValidationError("Name the account or the address to unlock.", code="nothing_to_unlock")
    with transaction.atomic():
        rows = list(SigninThrottle.objects.select_for_update().filter(key__in=keys))
        for row in rows:
            audit_record(
                actor=actor,
                action="signin_unlock",
                obj=row,
                before={"key": row.key, "failures": row.failures, "locked_until": row.locked_until},
                after={"key": row.key, "failures": 0, "locked_until": None},
                note=note,
            )
            row.delete()
    return [row.key for row in rows]
