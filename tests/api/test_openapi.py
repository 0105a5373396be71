"""The OpenAPI document agrees with the server: schemathesis with every check.

schemathesis generates requests from the app's own OpenAPI document (in
process, no network), valid and invalid ones, and runs all of its checks on
every answer (``--checks all``): no server error, every status and header
documented, every body as documented, valid data accepted, invalid data
refused, If-Match enforced as documented, unsupported methods answered 405
with ``Allow``. Bounded and deterministic (seeded, a fixed number of
examples per operation). The app is a shared-style server (robot files by
path off) on a copy of the demo cell, answering to schemathesis's
``testserver`` name.
"""

from __future__ import annotations

import shutil
import tempfile
from pathlib import Path
from typing import Any

import httpx
import pytest
import schemathesis
from hypothesis import HealthCheck, settings
from schemathesis.checks import load_all_checks
from schemathesis.generation import GenerationMode

from posebridge.api.app import create_app
from posebridge.api.settings import Settings
from posebridge.resources import data_folder
from posebridge.robot.library import bundled_robots

load_all_checks()

_FOLDER = Path(tempfile.mkdtemp(prefix="posebridge-openapi-"))
_CELL = _FOLDER / "cell.json"
shutil.copy(data_folder("robots") / "demo-cell.json", _CELL)

schema = schemathesis.openapi.from_asgi(
    "/openapi.json",
    create_app(
        Settings(
            warm_up=False, cell_path=_CELL, robot_paths_allowed=False, host_names=("testserver",)
        )
    ),
    # reading the document can outlast the library's 10 s default on 2 busy cores; this cap
    # only ends a hung load
    timeout=300,
)
schema.config.generation.update(
    modes=[GenerationMode.POSITIVE, GenerationMode.NEGATIVE], deterministic=True
)
# Schema-valid requests the server still refuses, each documented on its operation: values
# that depend on the cell or the robot (joint counts, names, sizes of the work: 404, 413,
# 422), a version that is not the current one (412). JSON Schema cannot state them.
# A missing If-Match is 428 Precondition Required (RFC 6585 sec. 3), as documented
schema.config.checks.missing_required_header.expected_statuses = ["400", "422", "428"]
# the first numerical IK of an arm compiles its kernels (about a minute on 2 busy cores)
schema.config.update(request_timeout=300)
schema.config.checks.positive_data_acceptance.expected_statuses = [
    "2xx",
    "404",
    "409",
    "412",
    "413",
    "422",
    "429",
]


@schema.parametrize()
@settings(
    max_examples=12,
    derandomize=True,
    deadline=None,
    suppress_health_check=list(HealthCheck),
)
def test_api_conforms_to_its_openapi(case: schemathesis.Case) -> None:
    case.call_and_validate()


@pytest.mark.anyio
async def test_read_openapi_lists_every_route(client: httpx.AsyncClient) -> None:
    response = await client.get("/openapi.json")
    assert response.status_code == 200
    paths = response.json()["paths"]
    assert set(paths) == {
        "/api/health",
        "/api/robots",
        "/api/robots/model",
        "/api/robots/describe",
        "/api/robots/meshes",
        "/api/fk",
        "/api/ik",
        "/api/cell",
        "/api/cell/chain-choice",
        "/api/cell/targets/{name}",
        "/api/cell/fixtures/{name}",
        "/api/cell/turntables/{name}",
        "/api/cell/track",
        "/api/cell/base",
        "/api/cell/meshes",
        "/api/cell/meshes/{name}",
        "/api/maps/joint",
        "/api/maps/reach-section",
        "/api/cell/check",
        "/api/cell/paths/{name}/check",
        "/api/cell/paths/{name}/waypoints/{index}",
        "/api/cell/fk",
        "/api/cell/paths/{name}/waypoints",
        "/api/cell/paths/{name}/sequence",
        "/api/cell/paths/{name}/export.json",
        "/api/cell/paths/{name}/export.csv",
        "/api/cell/diagnose/pose",
        "/api/cell/diagnose/log",
        "/api/placement",
        "/api/jobs/{job_id}",
        "/api/jobs/{job_id}/cancel",
        "/api/jobs/{job_id}/image",
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


@pytest.mark.anyio
async def test_options_and_405_name_every_method(client: httpx.AsyncClient) -> None:
    # RFC 9110 sec. 9.3.7 (OPTIONS) and 15.5.6 (405 carries Allow); it said "Allow: GET" before
    options = await client.options("/api/cell")
    assert options.status_code == 204
    assert options.headers["allow"] == "GET, PUT"
    refused = await client.delete("/api/reviews/comments")
    assert refused.status_code == 405
    assert refused.headers["allow"] == "GET, POST"
    assert refused.json() == {
        "detail": "method DELETE not allowed on /api/reviews/comments; it takes GET, POST"
    }


@pytest.mark.anyio
async def test_if_match_documented_as_required(client: httpx.AsyncClient) -> None:
    document = (await client.get("/openapi.json")).json()
    for path, method in (
        ("/api/cell", "put"),
        ("/api/cell/targets/{name}", "patch"),
        ("/api/cell/fixtures/{name}", "patch"),
        ("/api/cell/turntables/{name}", "patch"),
        ("/api/cell/track", "patch"),
        ("/api/cell/paths/{name}/waypoints/{index}", "patch"),
        ("/api/cell/base", "patch"),
    ):
        operation = document["paths"][path][method]
        (header,) = [p for p in operation["parameters"] if p["in"] == "header"]
        assert header["name"] == "if-match"
        assert header["required"] is True
        assert {"412", "428"} <= set(operation["responses"])
    missing = await client.patch("/api/cell/base", json={"position_mm": [1, 0, 0]})
    assert missing.status_code == 428


@pytest.mark.anyio
async def test_integer_fields_take_whole_numbers(client: httpx.AsyncClient) -> None:
    # JSON Schema 2020-12 validation sec. 6.1.1: 65.0 is an integer; "65" and 65.5 are not
    body = {"count": 3.0, "yaw_count": 2.0, "half_width_mm": 100.0, "top": 2.0}
    assert (await client.post("/api/placement", json=body)).status_code == 202
    for bad in ("3", 3.5, True):
        refused = await client.post("/api/placement", json={**body, "count": bad})
        assert refused.status_code == 422, bad


@pytest.mark.anyio
async def test_robot_fields_list_the_served_robots(make_app: Any) -> None:
    app = make_app(robot_paths_allowed=False)
    document = app.openapi()
    names = sorted(robot.name for robot in bundled_robots())
    for model in ("FkRequest", "IkRequest"):
        assert document["components"]["schemas"][model]["properties"]["robot"]["enum"] == names
    (parameter,) = document["paths"]["/api/robots/model"]["get"]["parameters"]
    assert parameter["schema"]["enum"] == names
    local = make_app().openapi()["components"]["schemas"]["FkRequest"]["properties"]["robot"]
    assert local["anyOf"][0]["enum"] == names
    assert local["anyOf"][1]["pattern"] == r"(?i)\.(toml|urdf)/*$"
