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


GENERATE_SECRET_HINT = 'python3 -c "import secrets; print(secrets.token_urlsafe(50))"'


def env_secret(
    name: str,
    *,
    production: bool,
    dev_default: str,
    min_length: int = 0,
    min_unique: int = 0,
    forbidden_prefix: str = "",
) -> str:
    """Return a secret from the environment.

    In production mode a missing or empty value raises ``ConfigurationError``; so does a weak one:
    shorter than ``min_length`` characters, with fewer than ``min_unique`` distinct characters, or
    starting with ``forbidden_prefix``. The message says how to generate a good one. In development
    the clearly marked ``dev_default`` is used when the variable is unset.
    """
    value = os.environ.get(name, "")
    if value:
        if production:
            _refuse_weak_secret(name, value, min_length, min_unique, forbidden_prefix)
        return value
    if production:
        raise ConfigurationError(
            f"{name} is not set. It is required in production (REGISTRY_PRODUCTION=1); see deploy/README.md."
        )
    return dev_default


def _refuse_weak_secret(name: str, value: str, min_length: int, min_unique: int, forbidden_prefix: str) -> None:
    problems = []
    if len(value) < min_length:
        problems.append(f"it has {len(value)} characters, at least {min_length} are needed")
    if len(set(value)) < min_unique:
        problems.append(f"it has {len(set(value))} different characters, at least {min_unique} are needed")
    if forbidden_prefix and value.startswith(forbidden_prefix):
        problems.append(f"it starts with {forbidden_prefix!r}, the mark of a generated development key")
    if problems:
        # The value itself is never printed.
        raise ConfigurationError(
            f"{name} is too weak for production: {'; '.join(problems)}. Generate one with "
            f"{GENERATE_SECRET_HINT} and put it in the environment file (deploy/README.md, step 4)."
        )
