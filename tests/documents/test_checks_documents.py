"""System checks of the documents area (registry.E030–E032, W040)."""

from __future__ import annotations

from registry.checks import check_documents


def _ids(messages) -> set[str]:
    return {m.id for m in messages}


def test_defaults_pass(settings):
    settings.PRODUCTION = False
    assert check_documents() == []


def test_page_size(settings):
    settings.REGISTRY = {**settings.REGISTRY, "PAGE_SIZE": "A3"}
    assert "registry.E032" in _ids(check_documents())


def test_production_needs_a_signing_secret_and_https(settings):
    settings.PRODUCTION = True
    settings.REGISTRY = {**settings.REGISTRY, "SIGNING_KEY_SECRET": "short", "PUBLIC_URL": "http://x"}
    assert {"registry.E031", "registry.W040"} <= _ids(check_documents())
    settings.REGISTRY = {**settings.REGISTRY, "SIGNING_KEY_SECRET": "s" * 40, "PUBLIC_URL": "https://r.example.org"}
    assert check_documents() == []
