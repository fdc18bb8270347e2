"""Content-Security-Policy (issue 11, "Edges" 2): a strict policy on every answer, and no inline
script or style left in the templates for it to block."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from registry.web.csp import policy
from registry.web.job_map import CLASS_COLOURS

pytestmark = pytest.mark.django_db
ROOT = Path(__file__).resolve().parents[2]
STRICT = {
    "default-src": "'self'",
    "script-src": "'self'",
    "style-src": "'self'",
    "object-src": "'none'",
    "base-uri": "'none'",
    "frame-ancestors": "'none'",
    "form-action": "'self'",
}


def _directives(header: str) -> dict[str, str]:
    return {part.split()[0]: " ".join(part.split()[1:]) for part in header.split(";") if part.strip()}


PAGES = [
    "/signin/",
    "/marks/",
    "/marks/near/",
    "/jobs/",
    "/tools/convert/",
    "/tools/accuracy/",
    "/tools/grids/",
    "/marks/import/",
    "/api/marks/",
    "/api/schema/",
    "/api/docs/",
    "/api/no-such-thing/",
    "/no-such-page/",
]


@pytest.mark.parametrize("url", PAGES)
def test_every_answer_carries_the_strict_policy(client, manager, url):
    client.force_login(manager)
    r = client.get(url)
    directives = _directives(r["Content-Security-Policy"])
    for name, value in STRICT.items():
        assert directives[name] == value, (url, name)
    assert "unsafe-inline" not in r["Content-Security-Policy"] and "unsafe-eval" not in r["Content-Security-Policy"]


def test_the_basemap_host_is_allowed_for_images_only(settings):
    settings.REGISTRY = {**settings.REGISTRY, "BASEMAP_URL": "https://tiles.example.org/{z}/{x}/{y}.png"}
    directives = _directives(policy())
    assert directives["img-src"] == "'self' data: https://tiles.example.org"
    assert "tiles.example.org" not in directives["script-src"] + directives["style-src"]


def test_no_inline_script_or_style_in_templates_or_generated_markup():
    offenders = []
    sources = list((ROOT / "templates").rglob("*.html")) + [ROOT / "registry/web/job_map.py"]
    for path in sources:
        text = path.read_text()
        for pattern in (r"<script(?![^>]*\bsrc=)[^>]*>", r"<style[\s>]", r"\sstyle=", r"\son[a-z]+="):
            for m in re.finditer(pattern, text):
                offenders.append(f"{path.relative_to(ROOT)}: {m.group(0).strip()}")
    assert offenders == []


def test_legend_swatch_colours_in_the_stylesheet_match_the_map():
    css = (ROOT / "registry/web/static/registry/registry.css").read_text()
    for i, colour in enumerate(CLASS_COLOURS):
        assert re.search(rf"\.swatch-{i} \{{ background-color:{colour}; \}}", css), (i, colour)
