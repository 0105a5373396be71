"""The OpenAPI document: complete, and no generated request makes the server fail.

schemathesis generates requests from the app's own OpenAPI document (in
process, no network) and checks that none gets a 5xx answer and that every
answer matches its documented schema.
"""

from __future__ import annotations

import httpx
import pytest
import schemathesis
from hypothesis import HealthCheck, settings
from schemathesis.checks import not_a_server_error, response_schema_conformance

from posebridge.api.app import create_app
from posebridge.api.settings import Settings

schema = schemathesis.openapi.from_asgi(
    "/openapi.json",
    create_app(Settings(warm_up=False, robot_paths_allowed=False, host_names=("testserver",))),
)


@schema.parametrize()
@settings(
    max_examples=15,
    derandomize=True,
    deadline=None,
    suppress_health_check=list(HealthCheck),
)
def test_call_api_no_server_error(case: schemathesis.Case) -> None:
    response = case.call()
    case.validate_response(response, checks=[not_a_server_error, response_schema_conformance])
    assert response.status_code < 500


@pytest.mark.anyio
async def test_read_openapi_lists_every_route(client: httpx.AsyncClient) -> None:
    response = await client.get("/openapi.json")
    assert response.status_code == 200
    paths = response.json()["paths"]
    assert set(paths) == {
        "/api/health",
        "/api/robots",
        "/api/robots/model",
        "/api/fk",
        "/api/ik",
        "/api/cell",
        "/api/cell/targets/{name}",
        "/api/cell/fixtures/{name}",
        "/api/cell/base",
        "/api/maps/joint",
        "/api/maps/reach-section",
        "/api/cell/check",
        "/api/cell/paths/{name}/check",
        "/api/cell/paths/{name}/waypoints/{index}",
        "/api/cell/diagnose/pose",
        "/api/cell/diagnose/log",
        "/api/placement",
        "/api/jobs/{job_id}",
        "/api/jobs/{job_id}/cancel",
        "/api/reviews/access",
        "/api/reviews/session",
        "/api/reviews/comments",
        "/api/reviews/comments/{comment_id}",
    }
    for path, operations in paths.items():
        for operation in operations.values():
            assert {"200", "201", "202", "204"} & set(operation["responses"]), path
            if path != "/api/health" and path != "/api/robots":
                # error answers are documented with their body
                assert operation["responses"]["422"]["content"]["application/json"]["schema"] == {
                    "$ref": "#/components/schemas/ErrorMessage"
                }
