"""Forward kinematics and Jacobian throughput on the six-axis arm.

Baseline: a Python loop of per-call forward kinematics in pinocchio (``pin``)
on the same robot's URDF, measured in the same run, so the ratio survives a
noisy machine.
"""

from __future__ import annotations

import math

import numpy as np

from posebridge.bench.timing import best_seconds, median_seconds_per_call
from posebridge.kinematics.fk import fk_tool
from posebridge.kinematics.jacobian import jacobian_base
from posebridge.resources import data_folder
from posebridge.robot.library import load_robot

__all__ = ["bench_kinematics"]

ROBOT = "pb-arm6"


def _pin_loop_configs_per_s(q: np.ndarray) -> float:
    """Configurations/s of a Python loop of pinocchio FK of the flange, or NaN without pin."""
    try:
        import pinocchio as pin
    except ImportError:
        return math.nan
    urdf = (data_folder("robots") / f"{ROBOT}.urdf").read_text(encoding="utf-8")
    model = pin.buildModelFromXML(urdf)
    data = model.createData()
    frame = model.getFrameId("flange")

    def loop() -> None:
        for row in q:
            pin.framesForwardKinematics(model, data, row)
            data.oMf[frame].homogeneous  # noqa: B018 - read the pose like a caller would

    return q.shape[0] / best_seconds(loop, repeats=2)


PIN_MISSING = "pinocchio is not installed (pip install 'posebridge[bench]')"


def bench_kinematics(quick: bool) -> dict[str, float | str]:
    """FK configs/s (batch), its ratio to the pin loop, single-call FK latency, Jacobian configs/s.

    Without pinocchio the ratio is ``fk_ratio_vs_pin_loop_missing`` with the reason.
    """
    robot = load_robot(ROBOT)
    rng = np.random.default_rng(0)
    n_batch = 20_000 if quick else 100_000
    q = rng.uniform(robot.lower, robot.upper, size=(n_batch, robot.dof))
    fk_rate = n_batch / best_seconds(lambda: fk_tool(robot, q))
    jacobian_rate = n_batch / best_seconds(lambda: jacobian_base(robot, q))
    pin_rate = _pin_loop_configs_per_s(q[: 5_000 if quick else 20_000])
    single = q[:1].copy()
    single_us = 1e6 * median_seconds_per_call(lambda: fk_tool(robot, single), calls=2_000)
    ratio: dict[str, float | str] = (
        {"fk_ratio_vs_pin_loop_missing": PIN_MISSING}
        if math.isnan(pin_rate)
        else {"fk_ratio_vs_pin_loop": fk_rate / pin_rate}
    )
    return {
        "fk_configs_per_s": fk_rate,
        **ratio,
        "fk_single_call_us": single_us,
        "jacobian_configs_per_s": jacobian_rate,
    }
