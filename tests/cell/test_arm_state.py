"""The arm state the page shows: limit excess, contacts with capsule and depth, singularity.

References: robots/pb-arm6.toml read with tomllib (limits: closed-form margins); python-fcl
with pinocchio placements (``fcl_cell``, conftest.py) for per-object distances and the
closest capsule; the demo log's row 90 (read with the csv module), whose gripper runs into
the right press column.
"""

from __future__ import annotations

import csv
import tomllib

import numpy as np
import pytest

from posebridge.cell.arm_state import arm_state
from posebridge.cell.thresholds import QualityThresholds
from posebridge.resources import data_folder
from posebridge.results.arm_state import arm_state_result

ROBOTS = data_folder("robots")
FCL_TOLERANCE_MM = 0.6  # python-fcl overestimates capsule distances by up to 0.5 mm


@pytest.fixture(scope="module")
def log_row_90() -> np.ndarray:
    """Joint values (deg) of data row 90 of the demo log, read with the csv module."""
    with (ROBOTS / "demo-log.csv").open(newline="") as handle:
        rows = list(csv.reader(handle))
    return np.array(rows[1 + 90][1:], dtype=float)


def test_limit_excess_in_degrees(demo_scene) -> None:
    with (ROBOTS / "pb-arm6.toml").open("rb") as handle:
        joints = tomllib.load(handle)["joint"]
    upper = joints[0]["limits"]["max_deg"]
    q = np.zeros(6)
    q[0] = upper + 6.0
    q[4] = 30.0
    state = arm_state_result(arm_state(demo_scene, np.radians(q)))
    # closed form: 6 deg beyond the upper limit of j1 is a margin of -6 deg
    assert state.limits[0].margin == pytest.approx(-6.0, abs=1e-9)
    assert state.limits[0].nearer_limit == "upper"
    assert state.limits[0].upper == pytest.approx(upper, abs=1e-9)
    assert not state.within_limits
    assert state.joints_deg == pytest.approx(q.tolist())


def test_contacts_match_python_fcl(demo_scene, fcl_cell, log_row_90) -> None:
    q = np.radians(log_row_90)
    state = arm_state_result(arm_state(demo_scene, q))
    threshold = QualityThresholds().clearance_mm
    table = fcl_cell.obstacle_distances(q)
    per_object: dict[str, tuple[float, str]] = {}
    for (capsule, name), distance in table.items():
        per_object[name] = min(per_object.get(name, (np.inf, "")), (distance * 1000.0, capsule))
    listed = {c.other: c for c in state.contacts if c.other_kind != "self"}
    # python-fcl (reference library): every object clearly inside the threshold is listed,
    # none clearly outside
    for name, (distance, _) in per_object.items():
        if distance < threshold - FCL_TOLERANCE_MM:
            assert name in listed, name
        if distance > threshold + FCL_TOLERANCE_MM:
            assert name not in listed, name
    for name, contact in listed.items():
        distance, capsule = per_object[name]
        if contact.distance_mm >= 0.0:
            # python-fcl distance and closest capsule of the same object (stated tolerance)
            assert contact.distance_mm == pytest.approx(distance, abs=FCL_TOLERANCE_MM)
            assert contact.capsule == capsule
        else:
            # in penetration python-fcl reports no separation for the named pair
            assert table[(contact.capsule, name)] <= 0.0
    distances = [c.distance_mm for c in state.contacts]
    assert distances == sorted(distances)
