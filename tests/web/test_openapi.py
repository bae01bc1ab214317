"""The OpenAPI document served by the app, and the app checked against it by schemathesis."""

from __future__ import annotations

import pytest
import schemathesis
from hypothesis import HealthCheck, settings

from monitor.alerting.caution import CAUTION


def test_the_document_is_served_and_names_every_endpoint(client):
    doc = client.get("/api/v1/openapi.json").get_json()
    assert doc["openapi"].startswith("3.")
    assert CAUTION in doc["info"]["description"]
    paths = set(doc["paths"])
    for rule in client.application.url_map.iter_rules():
        path = rule.rule
        if path.startswith("/api/v1") and path != "/api/v1/openapi.json":
            shown = path.replace("<int:run_id>", "{run_id}").replace("<water_body_id>", "{water_body_id}")
            shown = shown.replace("<feed_name>", "{feed}")
            assert shown in paths, f"{path} is not documented"
    assert "bearer" in doc["components"]["securitySchemes"]


def test_other_blueprints_can_add_their_paths(app):
    app.extensions["bloomline"]["openapi_paths"]["/api/v1/extra"] = {"get": {"responses": {"200": {
        "description": "OK"}}}}
    assert "/api/v1/extra" in app.test_client().get("/api/v1/openapi.json").get_json()["paths"]


@pytest.fixture
def api_schema(app):
    return schemathesis.openapi.from_wsgi("/api/v1/openapi.json", app)


schema = schemathesis.pytest.from_fixture("api_schema")


@pytest.mark.slow
@schema.parametrize()
@settings(max_examples=20, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow,
                                 HealthCheck.filter_too_much])
def test_the_api_answers_as_its_document_says(case):
    # no server error, and every status, content type, header and body as documented
    case.call_and_validate()
