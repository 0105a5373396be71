"""A cell whose URDF robot has several leaf links and no to_link: the way out through the API.

The URDF is invented here: a two-joint arm whose last link carries two fingers (leaves).
Behaviour checked is our own contract (posebridge.api.routes.cells).
"""

from __future__ import annotations

import json
from collections.abc import AsyncIterator
from pathlib import Path

import httpx
import pytest

from posebridge.api.app import create_app
from posebridge.api.settings import Settings

pytestmark = pytest.mark.anyio

URDF = """<robot name="forked">
<link name="base"/><link name="arm"/><link name="hand"/><link name="left"/><link name="right"/>
<joint name="j1" type="revolute"><parent link="base"/><child link="arm"/>
<origin xyz="0 0 0.2"/><axis xyz="0 0 1"/><limit lower="-2" upper="2" velocity="1"/></joint>
<joint name="j2" type="revolute"><parent link="arm"/><child link="hand"/>
<origin xyz="0.3 0 0"/><axis xyz="0 1 0"/><limit lower="-2" upper="2" velocity="1"/></joint>
<joint name="left_fix" type="fixed"><parent link="hand"/><child link="left"/>
<origin xyz="0.1 0.02 0"/></joint>
<joint name="right_fix" type="fixed"><parent link="hand"/><child link="right"/>
<origin xyz="0.1 -0.02 0"/></joint>
</robot>
"""


@pytest.fixture
def cell_file(tmp_path: Path) -> Path:
    (tmp_path / "forked.urdf").write_text(URDF, encoding="utf-8")
    cell = tmp_path / "cell.json"
    data = {"schema_version": 1, "robot": {"file": "forked.urdf"}}
    cell.write_text(json.dumps(data), encoding="utf-8")
    return cell


@pytest.fixture
async def owner(cell_file: Path) -> AsyncIterator[httpx.AsyncClient]:
    app = create_app(Settings(warm_up=False, cell_path=cell_file))
    transport = httpx.ASGITransport(app=app, client=("127.0.0.1", 5000))
    async with httpx.AsyncClient(transport=transport, base_url="http://127.0.0.1:8000") as c:
        yield c


async def test_leaves_are_listed_and_the_choice_is_saved(
    owner: httpx.AsyncClient, cell_file: Path
) -> None:
    refused = await owner.get("/api/cell")
    assert refused.status_code == 422
    assert "choose the to_link" in refused.json()["detail"]
    choice = await owner.get("/api/cell/chain-choice")
    assert choice.status_code == 200
    body = choice.json()
    assert body["leaves"] == ["left", "right"]  # the two fixed fingers below "hand"
    assert body["robot_file"] == "forked.urdf"
    assert body["from_link"] is None
    assert "choose the to_link" in body["detail"]
    stale = await owner.put(
        "/api/cell/chain-choice", json={"to_link": "left"}, headers={"If-Match": '"0000"'}
    )
    assert stale.status_code == 412
    saved = await owner.put(
        "/api/cell/chain-choice", json={"to_link": "left"}, headers={"If-Match": body["etag"]}
    )
    assert saved.status_code == 200, saved.text
    assert json.loads(cell_file.read_text())["robot"]["to_link"] == "left"
    assert (await owner.get("/api/cell")).status_code == 200
    assert (await owner.get("/api/cell/chain-choice")).status_code == 404  # nothing to choose


async def test_a_wrong_leaf_is_refused_and_nothing_is_written(
    owner: httpx.AsyncClient, cell_file: Path
) -> None:
    before = cell_file.read_bytes()
    etag = (await owner.get("/api/cell/chain-choice")).json()["etag"]
    answer = await owner.put(
        "/api/cell/chain-choice", json={"to_link": "thumb"}, headers={"If-Match": etag}
    )
    assert answer.status_code == 422
    assert "unknown link 'thumb'" in answer.json()["detail"]
    assert cell_file.read_bytes() == before
