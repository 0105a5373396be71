"""Reach of planar arms: an area in their plane, against the closed-form annulus."""

from __future__ import annotations

import json
import math
from pathlib import Path

import pytest

from posebridge.cli import main
from posebridge.robot.toml_format import parse_robot_toml
from posebridge.spaces.planar_boundary import planar_reach


def planar_toml(lengths_mm: list[float], range_deg: float) -> str:
    """A planar arm about parallel z axes with the given link lengths and +-range on every joint."""
    text = (
        'schema_version = 1\n[robot]\nname = "test-planar"\nkind = "planar"\n'
        'convention = "origin_axis"\n'
    )
    offset = 0.0
    for k, _ in enumerate(lengths_mm):
        text += (
            f'[[joint]]\nname = "j{k + 1}"\ntype = "revolute"\n'
            f"origin = {{ xyz_mm = [{offset}, 0, 0], rpy_deg = [0, 0, 0] }}\naxis = [0, 0, 1]\n"
            f"limits = {{ min_deg = {-range_deg}, max_deg = {range_deg}, velocity_deg_s = 90, "
            "acceleration_deg_s2 = 360 }\n"
        )
        offset = lengths_mm[k]
    return text + f"[flange]\nxyz_mm = [{lengths_mm[-1]}, 0, 0]\nrpy_deg = [0, 0, 0]\n"


def test_two_link_arm_with_full_turns_reaches_the_annulus(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    path = tmp_path / "arm.toml"
    path.write_text(planar_toml([400.0, 300.0], 180.0), encoding="utf-8")
    assert main(["reach", str(path), "--json"]) == 0
    summary = json.loads(capsys.readouterr().out)
    # closed form (REFERENCES.md, planar 2R): |l1 - l2| <= r <= l1 + l2, area
    # pi ((l1 + l2)^2 - (l1 - l2)^2) = pi (0.7^2 - 0.1^2) m^2, in the base x-y plane
    assert summary["planar"] is True
    assert summary["plane_z_mm"] == 0.0
    assert summary["inner_radius_mm"] == pytest.approx(100.0, abs=1e-9)
    assert summary["outer_radius_mm"] == pytest.approx(700.0, abs=1e-9)
    assert summary["area_m2"] == pytest.approx(math.pi * (0.7**2 - 0.1**2), rel=1e-9)
    assert summary["full_turns"] is True
    assert "volume_any_direction_m3" not in summary


def test_limited_elbow_sweeps_a_narrower_annulus(robot) -> None:
    reach = planar_reach(robot("pb-planar2r"))
    assert reach is not None
    # closed form (law of cosines): robots/pb-planar2r.toml has l1 = 400 mm, l2 = 300 mm,
    # j1 a full turn and j2 within +-150 deg, so the inner radius is
    # sqrt(l1^2 + l2^2 + 2 l1 l2 cos 150 deg) and every circle between it and l1 + l2 is
    # reached all round: area pi (r_max^2 - r_min^2)
    r_min = math.sqrt(0.4**2 + 0.3**2 + 2 * 0.4 * 0.3 * math.cos(math.radians(150.0)))
    assert reach.inner_radius_m == pytest.approx(r_min, abs=1e-12)
    assert reach.outer_radius_m == pytest.approx(0.7, abs=1e-12)
    assert reach.area_m2 == pytest.approx(math.pi * (0.7**2 - r_min**2), rel=1e-9)


def test_three_link_area_on_its_grid() -> None:
    arm = parse_robot_toml(planar_toml([400.0, 300.0, 100.0], 180.0), "arm3.toml")
    reach = planar_reach(arm, grid_m=0.005)
    assert reach is not None
    # closed form: with full turns the 3R arm reaches the disc of radius l1 + l2 + l3 = 0.8 m
    # (l1 <= l2 + l3, so no hole); the 5 mm grid counts cells whose centre is inside, within
    # about one perimeter strip of half a cell: 2 pi 0.8 m x 2.5 mm
    assert reach.area_m2 == pytest.approx(math.pi * 0.8**2, abs=2 * math.pi * 0.8 * 0.0025)


def test_other_robots_are_not_planar(robot) -> None:
    # pb-arm6 has six joints (robots/pb-arm6.toml): no planar region
    assert planar_reach(robot("pb-arm6")) is None
