"""Reading configuration from the environment.

Kept apart from ``settings.py`` so that it can be tested and so that the rule
"a secret missing in production fails loudly" lives in one place.
"""

from __future__ import annotations

import os


class ConfigurationError(RuntimeError):
    """A required setting is missing or malformed."""


def env_bool(name: str, default: bool = False) -> bool:
    raw = os.environ.get(name)
    if raw is None or raw == "":
        return default
    value = raw.strip().lower()
    if value in {"1", "true", "yes", "on"}:
        return True
    if value in {"0", "false", "no", "off"}:
        return False
    raise ConfigurationError(f"{name} must be a boolean (1/0, true/false), got {raw!r}")


def env_list(name: str, default: list[str], *, required: bool = False) -> list[str]:
    """Return a comma-separated list from the environment.

    With ``required=True`` (used in production for the host names) an unset or
    empty value raises ``ConfigurationError`` instead of falling back to ``default``.
    """
    raw = os.environ.get(name)
    items = [item.strip() for item in (raw or "").split(",") if item.strip()]
    if items:
        return items
    if required:
        raise ConfigurationError(
            f"{name} is not set. It is required in production (REGISTRY_PRODUCTION=1); see deploy/README.md."
        )
    return list(default)


def env_secret(name: str, *, production: bool, dev_default: str) -> str:
    """Return a secret from the environment.

    In production mode a missing or empty value raises ``ConfigurationError``;
    in development the clearly marked ``dev_default`` is used instead.
    """
    value = os.environ.get(name, "")
    if value:
        return value
    if production:
        raise ConfigurationError(
            f"{name} is not set. It is required in production (REGISTRY_PRODUCTION=1); see deploy/README.md."
        )
    return dev_default
