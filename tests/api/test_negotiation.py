"""The API's renderer choice, remembered per Accept header, is DRF's choice (registry/api/negotiation.py)."""

from __future__ import annotations

import pytest
from rest_framework.negotiation import DefaultContentNegotiation
from rest_framework.renderers import BrowsableAPIRenderer, JSONRenderer
from rest_framework.request import Request
from rest_framework.test import APIRequestFactory

from registry.api import negotiation
from registry.api.negotiation import RememberedContentNegotiation

HEADERS = [
    None,
    "*/*",
    "application/json",
    "text/html,application/json",
    "application/json; indent=4",
    "text/html;q=0.9, application/*;q=0.8",
    "text/html",
    "image/png, text/plain",
]


def _choice(negotiator, accept, renderers, query=""):
    extra = {} if accept is None else {"HTTP_ACCEPT": accept}
    request = Request(APIRequestFactory().get("/api/marks/" + query, **extra))
    try:
        renderer, media_type = negotiator.select_renderer(request, renderers)
    except Exception as exc:  # noqa: BLE001 - the refusal itself is compared
        return type(exc).__name__
    return renderers.index(renderer), media_type


@pytest.mark.parametrize("query", ["", "?format=json", "?format=api"])
def test_every_choice_is_drf_s_the_first_time_and_when_remembered(query):
    negotiation._choices.clear()
    drf, ours = DefaultContentNegotiation(), RememberedContentNegotiation()
    for renderers in (
        [JSONRenderer()],
        [JSONRenderer(), BrowsableAPIRenderer()],
        [BrowsableAPIRenderer(), JSONRenderer()],
    ):
        for _ in range(2):  # learnt, then remembered
            for accept in HEADERS:
                expected = _choice(drf, accept, renderers, query)
                assert _choice(ours, accept, renderers, query) == expected, (accept, renderers, query)


def test_an_html_only_client_is_refused_each_time(client, viewer):
    client.force_login(viewer)
    for _ in range(2):
        refused = client.get("/api/marks/near/?lat=45.2&lon=-110.6&radius_km=5", HTTP_ACCEPT="text/html")
        assert refused.status_code == 406 and refused.json()["error"]["code"]
    indented = client.get("/api/marks/near/?lat=45.2&lon=-110.6&radius_km=5", HTTP_ACCEPT="application/json; indent=2")
    assert indented.status_code == 200 and indented.content.startswith(b'{\n  "search"')


def test_the_remembered_choices_are_bounded():
    negotiation._choices.clear()
    ours = RememberedContentNegotiation()
    for i in range(negotiation.MAX_REMEMBERED + 10):
        _choice(ours, f"application/json; v={i}", [JSONRenderer()])
    assert len(negotiation._choices) <= negotiation.MAX_REMEMBERED
    _choice(ours, "application/json; " + "x" * negotiation.MAX_REMEMBERED_HEADER_CHARS, [JSONRenderer()])
    assert all(len(k[0] or "") <= negotiation.MAX_REMEMBERED_HEADER_CHARS for k in negotiation._choices)
