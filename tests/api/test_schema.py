"""The OpenAPI schema: served, valid, lists the marks and positions paths, no generator warnings for them."""

from __future__ import annotations

import pytest
from drf_spectacular.drainage import GENERATOR_STATS
from drf_spectacular.generators import SchemaGenerator
from drf_spectacular.validation import validate_schema

pytestmark = pytest.mark.django_db

OUR_PATHS = {
    "/api/marks/": {"get", "post"},
    "/api/marks/{code}/": {"get", "patch"},
    "/api/marks/{code}/status/": {"post"},
    "/api/marks/{code}/clear-suspect/": {"post"},
    "/api/marks/{code}/positions/": {"get", "post"},
    "/api/positions/{position_id}/": {"get"},
    "/api/positions/{position_id}/publish/": {"post"},
    "/api/positions/{position_id}/reject/": {"post"},
    "/api/positions/{position_id}/withdraw/": {"post"},
}
OUR_VIEWS = (
    "MarkListView",
    "MarkDetailView",
    "MarkStatusView",
    "MarkClearSuspectView",
    "MarkPositionsView",
    "PositionDetailView",
    "PositionPublishView",
    "PositionRejectView",
    "PositionWithdrawView",
    "registry/api/marks.py",
    "registry/api/positions.py",
    "registry/api/serializers.py",
)
METHODS = {"get", "post", "put", "patch", "delete"}
# Enumerations our serializers expose; a naming collision on them gives clients odd type names.
OUR_ENUM_FIELDS = ("status", "state", "monument", "stability", "sky_view", "finding")


def test_schema_endpoint_serves_our_paths(viewer, api_client_for):
    response = api_client_for(viewer).get("/api/schema/?format=json")
    assert response.status_code == 200
    schema = response.json()
    for path, methods in OUR_PATHS.items():
        assert path in schema["paths"], path
        assert set(schema["paths"][path]) & METHODS == methods, path


def test_docs_page_is_served(viewer, client):
    client.force_login(viewer)
    assert client.get("/api/docs/").status_code == 200


def test_schema_is_valid_and_has_no_warnings_for_our_views():
    GENERATOR_STATS.reset()
    schema = SchemaGenerator().get_schema(request=None, public=True)
    validate_schema(schema)  # raises on an invalid OpenAPI 3 document
    ours = [
        msg for msg in [*GENERATOR_STATS._warn_cache, *GENERATOR_STATS._error_cache] if any(v in msg for v in OUR_VIEWS)
    ]
    assert ours == []


def test_error_responses_are_documented_with_the_error_shape():
    schema = SchemaGenerator().get_schema(request=None, public=True)
    patch = schema["paths"]["/api/marks/{code}/"]["patch"]["responses"]
    assert set(patch) >= {"200", "400", "403", "404", "409"}
    ref = patch["409"]["content"]["application/json"]["schema"]["$ref"]
    error = schema["components"]["schemas"][ref.rsplit("/", 1)[-1]]
    assert set(error["properties"]) == {"error"}
    geojson = schema["paths"]["/api/marks/"]["get"]["responses"]["200"]["content"]["application/geo+json"]["schema"]
    assert geojson["$ref"].endswith("/MarkFeatureCollection")
