"""URDF import (being written)."""

from pathlib import Path

from posebridge.robot.model import Robot


def load_robot_urdf(
    path: str | Path, base_link: str | None = None, tip_link: str | None = None
) -> Robot:
    raise NotImplementedError
