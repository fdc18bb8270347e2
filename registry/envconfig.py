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


def env_list(name: str, default: list[str]) -> list[str]:
    raw = os.environ.get(name)
    if not raw:
        return list(default)
    return [item.strip() for item in raw.split(",") if item.strip()]


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
            f"{name} is not set. It is required in production "
            f"(REGISTRY_PRODUCTION=1); see deploy/README.md."
        )
    return dev_default
