"""The cell JSON Schema, checked with the independent `jsonschema` validator."""

from __future__ import annotations

import json
from typing import Any

import jsonschema
import pytest

from posebridge.cell.model import CellFileError, validate_cell
from posebridge.cell.schema import cell_json_schema
from posebridge.resources import data_folder

DEMO = data_folder("robots") / "demo-cell.json"


@pytest.fixture(scope="module")
def validator() -> jsonschema.Draft202012Validator:
    schema = cell_json_schema()
    # jsonschema (reference library): the generated schema is itself a valid 2020-12 schema
    jsonschema.Draft202012Validator.check_schema(schema)
    return jsonschema.Draft202012Validator(schema)


def demo_data() -> dict[str, Any]:
    return json.loads(DEMO.read_text())


def test_schema_names_its_draft_and_version() -> None:
    schema = cell_json_schema()
    # our own contract
    assert schema["$schema"] == "https://json-schema.org/draft/2020-12/schema"
    assert schema["properties"]["schema_version"]["const"] == 1
    assert schema["additionalProperties"] is False


def test_demo_cell_validates_against_the_schema(validator: jsonschema.Draft202012Validator) -> None:
    # jsonschema (reference library) accepts the bundled demo cell
    assert list(validator.iter_errors(demo_data())) == []


def waypoint(**fields: Any) -> dict[str, Any]:
    data = demo_data()
    data["paths"][0]["waypoints"][0] = fields
    return data


@pytest.mark.parametrize(
    "mutate",
    [
        pytest.param(lambda d: d["fixtures"][1].update(size_mm=[1, 0, 1]), id="size-zero"),
        pytest.param(lambda d: d["fixtures"][1].update(size_mm=[1, 1]), id="size-two-values"),
        pytest.param(lambda d: d["fixtures"][1].update(shape="cone"), id="unknown-shape"),
        pytest.param(lambda d: d["fixtures"][1].update(colour="red"), id="extra-field"),
        pytest.param(lambda d: d["targets"][0].update(position_mm=[0, 0, 1e6]), id="far-away"),
        pytest.param(
            lambda d: d["targets"][0].update(branch={"elbow": "sideways"}), id="branch-word"
        ),
        pytest.param(
            lambda d: d.update(robot={"name": "pb-arm6", "file": "a.toml"}), id="two-robots"
        ),
        pytest.param(lambda d: d.update(robot={"file": "a.step"}), id="robot-suffix"),
        pytest.param(lambda d: d["base"].pop("pedestal_radius_mm"), id="pedestal-radius"),
        pytest.param(lambda d: d.update(schema_version=2), id="version"),
    ],
)
def test_schema_and_model_refuse_the_same_bad_fields(
    validator: jsonschema.Draft202012Validator, mutate: Any
) -> None:
    data = demo_data()
    mutate(data)
    # jsonschema (reference library) and our model agree that the file is invalid
    assert list(validator.iter_errors(data)) != []
    with pytest.raises(CellFileError):
        validate_cell(data)


@pytest.mark.parametrize(
    "data",
    [
        pytest.param(waypoint(motion="joint", speed_percent=10), id="no-kind"),
        pytest.param(
            waypoint(
                target="rack-low-1",
                pose={"position_mm": [0, 0, 0]},
                motion="joint",
                speed_percent=10,
            ),
            id="two-kinds",
        ),
        pytest.param(
            waypoint(target="rack-low-1", motion="linear", speed_percent=10), id="linear-percent"
        ),
        pytest.param(waypoint(target="rack-low-1", motion="joint", speed_mm_s=10), id="joint-mm-s"),
        pytest.param(waypoint(target="rack-low-1", motion="linear"), id="linear-no-speed"),
    ],
)
def test_schema_encodes_the_waypoint_rules(
    validator: jsonschema.Draft202012Validator, data: dict[str, Any]
) -> None:
    # jsonschema (reference library) and our model agree on the waypoint rules
    assert list(validator.iter_errors(data)) != []
    with pytest.raises(CellFileError):
        validate_cell(data)


def test_explicit_nulls_for_unused_waypoint_kinds_are_accepted(
    validator: jsonschema.Draft202012Validator,
) -> None:
    data = waypoint(
        target="rack-low-1",
        pose=None,
        joints_deg=None,
        motion="joint",
        speed_percent=10,
        speed_mm_s=None,
    )
    # our own contract: null means "not given", in the schema as in the model
    assert list(validator.iter_errors(data)) == []
    assert validate_cell(data).paths[0].waypoints[0].pose is None
