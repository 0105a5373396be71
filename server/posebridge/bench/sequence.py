"""Solution-sequence optimisation and blended timing.

Figures
-------
``sequence_optimise_s``
    :func:`posebridge.planning.solution_sequence.optimise_sequence` end to end
    (IK candidates, static collision filter, edge costs, lazy collision checks
    along tentative optima, the current choice timed and checked) on a
    20-waypoint path of an invented six-axis arm whose joints 1-5 span ±180 deg
    and joint 6 ±540 deg, so every reachable pose has 8 branches x 3
    revolutions = 24 IK solutions. The path: a joint move to a start pose, then
    six times a joint move to an approach pose, a 100 mm linear move down along
    the tool axis and back up, and a joint move to an end pose (12 linear and 7
    joint moves), seeded random poses around the arm, a table and a pillar in the
    cell. Best of the timed repeats after a warm-up. Target: 0.5 s.
``sequence_optimise_ratio_vs_brute_force``
    Brute force on the first 6 waypoints of that path (24^6, about 1.9e8
    sequences before the collision filter): every edge costed and
    collision-checked (:func:`~posebridge.planning.solution_sequence.segment_costs`),
    then every sequence summed (numpy, in chunks), divided by
    ``optimise_sequence`` on the same 6 waypoints in the same run (a speed-up
    factor; both after an untimed warm-up run, which compiles the parallel
    collision kernel the eager checks need).
``sequence_candidates_per_waypoint``
    Mean candidates per waypoint of the 20-waypoint path after the static
    collision filter (at most 24).
``blended_timing_s``
    :func:`posebridge.planning.blended_timing.blended_cycle_time` of the demo
    cell's path with the most waypoints (robots/demo-cell.json; the path is
    sampled beforehand, not timed).

Quick mode keeps the key names and times one repeat each.
"""

from __future__ import annotations

import numpy as np

from posebridge.bench.timing import best_seconds
from posebridge.cell.files import load_cell
from posebridge.cell.model import validate_cell
from posebridge.cell.scene import Scene, resolve_scene
from posebridge.planning.blended_timing import blended_cycle_time
from posebridge.planning.path_sampling import sample_path
from posebridge.planning.solution_sequence import (
    ik_candidates,
    optimise_sequence,
    segment_costs,
)
from posebridge.resources import data_folder
from posebridge.transforms import (
    rotation_matrix_about_axis,
    rotation_matrix_about_z,
    rpy_from_rotation_matrix,
)
from posebridge.units import FloatArray, mm_from_m

__all__ = ["bench_sequence"]

SEED = 17
PICKS = 6
BRUTE_FORCE_WAYPOINTS = 6

ARM = """
schema_version = 1
[robot]
name = "bench-arm6-wide"
kind = "six_axis"
convention = "origin_axis"
home_deg = [0, -20, 20, 0, 60, 0]

[[joint]]
name = "j1"
type = "revolute"
origin = { xyz_mm = [0, 0, 220], rpy_deg = [0, 0, 0] }
axis = [0, 0, 1]
limits = { min_deg = -180, max_deg = 180, velocity_deg_s = 160, acceleration_deg_s2 = 550 }

[[joint]]
name = "j2"
type = "revolute"
origin = { xyz_mm = [140, 0, 240], rpy_deg = [0, 0, 0] }
axis = [0, 1, 0]
limits = { min_deg = -180, max_deg = 180, velocity_deg_s = 150, acceleration_deg_s2 = 500 }

[[joint]]
name = "j3"
type = "revolute"
origin = { xyz_mm = [0, 0, 600], rpy_deg = [0, 0, 0] }
axis = [0, 1, 0]
limits = { min_deg = -180, max_deg = 180, velocity_deg_s = 170, acceleration_deg_s2 = 600 }

[[joint]]
name = "j4"
type = "revolute"
origin = { xyz_mm = [290, 0, 100], rpy_deg = [0, 0, 0] }
axis = [1, 0, 0]
limits = { min_deg = -180, max_deg = 180, velocity_deg_s = 300, acceleration_deg_s2 = 1100 }

[[joint]]
name = "j5"
type = "revolute"
origin = { xyz_mm = [330, 0, 0], rpy_deg = [0, 0, 0] }
axis = [0, 1, 0]
limits = { min_deg = -180, max_deg = 180, velocity_deg_s = 300, acceleration_deg_s2 = 1100 }

[[joint]]
name = "j6"
type = "revolute"
origin = { xyz_mm = [95, 0, 0], rpy_deg = [0, 0, 0] }
axis = [1, 0, 0]
limits = { min_deg = -540, max_deg = 540, velocity_deg_s = 420, acceleration_deg_s2 = 1600 }

[flange]
xyz_mm = [0, 0, 0]
rpy_deg = [0, 90, 0]

[tool]
name = "gripper-150"
xyz_mm = [0, 0, 150]
rpy_deg = [0, 0, 0]

[[capsule]]
name = "upper-arm"
link = "j2"
start_mm = [0, 0, 0]
end_mm = [0, 0, 600]
radius_mm = 95

[[capsule]]
name = "forearm"
link = "j3"
start_mm = [-30, 0, 0]
end_mm = [290, 0, 100]
radius_mm = 80

[[capsule]]
name = "wrist"
link = "j5"
start_mm = [-20, 0, 0]
end_mm = [70, 0, 0]
radius_mm = 55
"""
"""An invented six-axis arm (ortho-parallel, spherical wrist) with wide joint ranges."""

FIXTURES = [
    {
        "name": "table",
        "shape": "box",
        "position_mm": [900.0, 0.0, 350.0],
        "rpy_deg": [0.0, 0.0, 0.0],
        "size_mm": [600.0, 1200.0, 700.0],
    },
    {
        "name": "pillar",
        "shape": "cylinder",
        "position_mm": [-700.0, 700.0, 800.0],
        "rpy_deg": [0.0, 0.0, 0.0],
        "radius_mm": 120.0,
        "height_mm": 1600.0,
    },
]


def _pose(T: FloatArray, **move: object) -> dict[str, object]:
    return {
        "pose": {
            "position_mm": mm_from_m(T[:3, 3]).tolist(),
            "rpy_deg": rpy_from_rotation_matrix(T[:3, :3], degrees=True).tolist(),
        },
        **move,
    }


def _bench_scene(waypoints: list[dict[str, object]] | None = None) -> Scene:
    data = {
        "robot": {"toml": ARM},
        "fixtures": FIXTURES,
        "paths": [] if waypoints is None else [{"name": "picks", "waypoints": waypoints}],
    }
    return resolve_scene(validate_cell(data))


def _picking_scene() -> Scene:
    """Return the 20-waypoint path of the module docstring (seeded, invented).

    Approach poses with the tool pointing down, tilted 6-23 deg, 0.55-0.8 m from
    the first axis all around the arm, 0.85-1.1 m above the floor, seeded random
    yaw; targets
    100 mm lower along the tool axis. Close enough that the mirrored shoulder
    reaches them too, so all 8 branches exist.
    """
    rng = np.random.default_rng(SEED)
    count = PICKS + 2
    angle = rng.uniform(-np.pi, np.pi, count)
    radius = rng.uniform(0.55, 0.8, count)
    T = np.tile(np.eye(4), (count, 1, 1))
    T[:, :3, 3] = np.stack(
        [radius * np.cos(angle), radius * np.sin(angle), rng.uniform(0.85, 1.1, count)], axis=1
    )
    yaw = rotation_matrix_about_z(rng.uniform(-np.pi, np.pi, count))
    tilt = rotation_matrix_about_axis([1.0, 0.0, 0.0], rng.uniform(0.1, 0.4, count))
    T[:, :3, :3] = yaw @ np.diag([1.0, -1.0, -1.0]) @ tilt
    down = np.eye(4)
    down[2, 3] = 0.1
    waypoints = [_pose(T[0], motion="joint", speed_percent=80.0, blend_mm=0.0)]
    for k in range(1, PICKS + 1):
        waypoints.append(_pose(T[k], motion="joint", speed_percent=100.0, blend_mm=50.0))
        waypoints.append(_pose(T[k] @ down, motion="linear", speed_mm_s=300.0, blend_mm=0.0))
        waypoints.append(_pose(T[k], motion="linear", speed_mm_s=600.0, blend_mm=30.0))
    waypoints.append(_pose(T[-1], motion="joint", speed_percent=80.0, blend_mm=0.0))
    return _bench_scene(waypoints)


def _brute_force(scene: Scene, path: int) -> float:
    """Every sequence's total from eagerly checked edge costs, the smallest (numpy, chunked)."""
    costs = segment_costs(scene, path)
    best = np.inf
    first = costs[0]
    for i in range(first.shape[0]):
        total = first[i]
        for cost in costs[1:]:
            total = total[..., None] + cost.reshape((1,) * (total.ndim - 1) + cost.shape)
        best = min(best, float(np.min(total)))
    return best


def _six_waypoints(scene: Scene) -> Scene:
    cell = scene.cell.model_dump()
    cell["paths"][0]["waypoints"] = cell["paths"][0]["waypoints"][:BRUTE_FORCE_WAYPOINTS]
    return resolve_scene(validate_cell(cell))


def _longest_demo_path() -> tuple[Scene, int]:
    file = data_folder("robots") / "demo-cell.json"
    scene = resolve_scene(load_cell(file), file)
    return scene, int(np.argmax([len(path.sources) for path in scene.paths]))


def bench_sequence(quick: bool) -> dict[str, float]:
    """Sequence optimisation time, its speed-up over brute force, blended timing (module docstring)."""
    repeats = 1 if quick else 3
    scene = _picking_scene()
    optimise = best_seconds(lambda: optimise_sequence(scene, 0), repeats=repeats)
    counts = [layer.q.shape[0] for layer in ik_candidates(scene, 0)]
    short = _six_waypoints(scene)
    optimise_short = best_seconds(lambda: optimise_sequence(short, 0), repeats=repeats)
    brute = best_seconds(lambda: _brute_force(short, 0), repeats=1)
    demo, index = _longest_demo_path()
    sampled = sample_path(demo, index)
    blended = best_seconds(lambda: blended_cycle_time(demo, sampled), repeats=repeats)
    return {
        "sequence_optimise_s": optimise,
        "sequence_optimise_ratio_vs_brute_force": brute / optimise_short,
        "sequence_candidates_per_waypoint": float(np.mean(counts)),
        "blended_timing_s": blended,
    }
