"""Tests of posebridge.spaces.planar_boundary (exact reachable region of planar 2R/3R arms)."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import minimize
from scipy.spatial import cKDTree

from posebridge.kinematics.fk import fk_tool
from posebridge.robot.model import Robot
from posebridge.robot.toml_format import parse_robot_toml
from posebridge.spaces.errors import SpacesInputError
from posebridge.spaces.planar_boundary import (
    PlanarChain,
    planar_radius_range,
    planar_reachable,
    planar_region_area,
)
from posebridge.spaces.workspace import sample_workspace

JOINT = """
[[joint]]
name = "j{index}"
type = "revolute"
origin = {{ xyz_mm = [{x}, 0, 0], rpy_deg = [0, 0, 0] }}
axis = [0, 0, 1]
limits = {{ min_deg = {lo}, max_deg = {hi}, velocity_deg_s = 90, acceleration_deg_s2 = 360 }}
"""


def planar_robot(lengths_mm: list[float], limits_deg: list[tuple[float, float]]) -> Robot:
    """A planar arm with links along x and joints about z (invented test data)."""
    text = [
        'schema_version = 1\n[robot]\nname = "test-planar"\nkind = "planar"\nconvention = "origin_axis"\n'
    ]
    previous = 0.0
    for k, (lo, hi) in enumerate(limits_deg):
        text.append(JOINT.format(index=k + 1, x=previous, lo=lo, hi=hi))
        previous = lengths_mm[k]
    text.append(f"[flange]\nxyz_mm = [{lengths_mm[-1]}, 0, 0]\nrpy_deg = [0, 0, 0]\n")
    return parse_robot_toml("".join(text), "test-planar.toml")


def polar_points(radius: np.ndarray, angle: np.ndarray) -> np.ndarray:
    return np.stack([radius * np.cos(angle), radius * np.sin(angle)], axis=1)


def test_canonical_chain_of_bundled_planar_arms(robot) -> None:
    chain = PlanarChain.from_robot(robot("pb-planar2r"))
    # Link lengths 400 mm and 300 mm from robots/pb-planar2r.toml.
    np.testing.assert_allclose(chain.lengths, [0.4, 0.3], atol=1e-12)
    q = np.array([[0.3, -1.1], [2.0, 0.5]])
    # Closed form of the planar 2R arm: x = l1 cos q1 + l2 cos(q1 + q2), y likewise with sin.
    expected = np.stack(
        [
            0.4 * np.cos(q[:, 0]) + 0.3 * np.cos(q.sum(1)),
            0.4 * np.sin(q[:, 0]) + 0.3 * np.sin(q.sum(1)),
        ],
        axis=1,
    )
    np.testing.assert_allclose(chain.positions(q), expected, atol=1e-12)
    # Link lengths 350, 300, 150 mm from robots/pb-planar3r.toml.
    np.testing.assert_allclose(
        PlanarChain.from_robot(robot("pb-planar3r")).lengths, [0.35, 0.3, 0.15], atol=1e-12
    )


def test_non_planar_robot_is_refused(robot) -> None:
    with pytest.raises(SpacesInputError, match="expected a planar arm with 2 or 3 revolute joints"):
        PlanarChain.from_robot(robot("pb-arm6"))


def test_full_range_annulus_boundary_circles() -> None:
    chain = PlanarChain.from_robot(planar_robot([1000, 500], [(-180, 180), (-180, 180)]))
    angle = np.linspace(-np.pi, np.pi, 13)
    # Closed form: |l1 - l2| <= r <= l1 + l2 with l1 = 1 m, l2 = 0.5 m.
    for radius, inside in [(1.5, True), (0.5, True), (1.0, True), (1.5 * (1 + 1e-6), False)]:
        points = polar_points(np.full(angle.shape, radius), angle)
        assert np.all(planar_reachable(chain, points) == inside), radius
    assert not np.any(planar_reachable(chain, polar_points(np.full(13, 0.5 * (1 - 1e-6)), angle)))
    assert planar_radius_range(chain) == pytest.approx((0.5, 1.5), abs=1e-12)


def test_equal_links_reach_a_full_disk() -> None:
    chain = PlanarChain.from_robot(planar_robot([1000, 1000], [(-180, 180), (-180, 180)]))
    # Closed form: a full disk when l1 = l2, the base point included.
    assert planar_reachable(chain, [[0.0, 0.0], [1e-4, 0.0], [0.0, 2.0]]).all()


def test_reference_target_with_limited_ranges() -> None:
    # closed form: L1 = L2 = 1, target (0.366, 1.366) = (cos 30 + cos 120, sin 30 + sin 120) -> (30 deg, 90 deg) on one branch; the
    # other branch mirrors the elbow: (30 + 90, -90) = (120 deg, -90 deg) (common practice, no source).
    target = [[np.sqrt(3) / 2 - 0.5, np.sqrt(3) / 2 + 0.5]]  # exact form of (0.366, 1.366)
    cases = [
        ([(25, 35), (80, 100)], True),  # first branch inside
        ([(110, 130), (-100, -80)], True),  # second branch inside
        ([(40, 60), (-180, 180)], False),  # neither theta1 of 30 or 120 deg in range
        ([(25, 35), (-100, -80)], False),  # theta1 of one branch, theta2 of the other
        ([(-180, 180), (91, 180)], False),  # neither theta2 of +90 or -90 deg in range
    ]
    for limits, expected in cases:
        chain = PlanarChain.from_robot(planar_robot([1000, 1000], limits))
        assert planar_reachable(chain, target)[0] == expected, limits


def test_limited_elbow_narrows_the_radii(robot) -> None:
    chain = PlanarChain.from_robot(robot("pb-planar2r"))
    # Law of cosines: r(theta2)^2 = l1^2 + l2^2 + 2 l1 l2 cos(theta2); theta2 in [-150, 150] deg.
    r_min = np.sqrt(0.4**2 + 0.3**2 + 2 * 0.4 * 0.3 * np.cos(np.radians(150)))
    assert planar_radius_range(chain) == pytest.approx((r_min, 0.7), abs=1e-12)
    angle = np.linspace(-3, 3, 7)
    assert planar_reachable(chain, polar_points(np.full(7, r_min), angle)).all()
    assert not planar_reachable(chain, polar_points(np.full(7, r_min * (1 - 1e-6)), angle)).any()


@pytest.mark.parametrize("name", ["pb-planar2r", "pb-planar3r"])
def test_every_sampled_point_is_inside(robot, name: str) -> None:
    arm = robot(name)
    chain = PlanarChain.from_robot(arm)
    cloud = sample_workspace(arm, 20_000, rng_seed=3)
    # Definition of the reachable region: the image of the joint-range box (common practice,
    # no source), so every point of the sampled workspace cloud lies in it.
    assert planar_reachable(chain, cloud.position[:, :2]).all()
    np.testing.assert_allclose(cloud.position[:, 2], chain.height, atol=1e-12)


def test_points_beyond_the_stretched_arm_are_outside(robot) -> None:
    chain = PlanarChain.from_robot(robot("pb-planar3r"))
    angle = np.linspace(-np.pi, np.pi, 50)
    # Triangle inequality: |p| <= l1 + l2 + l3 = 0.8 m.
    assert not planar_reachable(chain, polar_points(np.full(50, 0.8 * (1 + 1e-6)), angle)).any()


def monte_carlo_area(chain: PlanarChain, half_side: float, samples: int) -> tuple[float, float]:
    """Area estimate of the region by uniform samples in a square, and its standard error."""
    rng = np.random.default_rng(11)
    points = rng.uniform(-half_side, half_side, size=(samples, 2))
    fraction = planar_reachable(chain, points).mean()
    square = (2 * half_side) ** 2
    return fraction * square, square * np.sqrt(fraction * (1 - fraction) / samples)


def test_area_of_annulus_with_limited_elbow(robot) -> None:
    chain = PlanarChain.from_robot(robot("pb-planar2r"))
    r_min = np.sqrt(0.4**2 + 0.3**2 + 2 * 0.4 * 0.3 * np.cos(np.radians(150)))
    # Closed form: theta1 spans a full turn, so the region is the annulus pi (r_max^2 - r_min^2).
    exact = np.pi * (0.7**2 - r_min**2)
    assert planar_region_area(chain) == pytest.approx(exact, rel=1e-8)
    estimate, error = monte_carlo_area(chain, 0.7, 400_000)
    assert abs(estimate - exact) < 4 * error


def test_area_of_one_branch_sector() -> None:
    chain = PlanarChain.from_robot(planar_robot([400, 300], [(-60, 45), (20, 120)]))
    # Change of variables: for theta2 in (0, pi) the map (theta1, theta2) -> p is one-to-one with
    # |det J| = l1 l2 sin(theta2) (Yoshikawa 1985, planar 2R closed form), so
    # A = span1 * l1 l2 (cos a - cos b).
    exact = np.radians(105) * 0.4 * 0.3 * (np.cos(np.radians(20)) - np.cos(np.radians(120)))
    assert planar_region_area(chain) == pytest.approx(exact, rel=1e-7)
    estimate, error = monte_carlo_area(chain, 0.7, 400_000)
    assert abs(estimate - exact) < 4 * error


def test_area_of_two_overlapping_branches_against_monte_carlo() -> None:
    arm = planar_robot([400, 300], [(-100, 70), (-130, 150)])
    chain = PlanarChain.from_robot(arm)
    rng = np.random.default_rng(5)
    q = rng.uniform(arm.lower, arm.upper, size=(400_000, 2))
    # Area of the FK image by occupied cells of a fine grid (a lower estimate that converges from
    # below as samples grow; common practice, no source), against the quadrature of the region.
    cell = 0.004
    occupied = np.unique(np.floor(fk_tool(arm, q)[:, :2, 3] / cell).astype(np.int64), axis=0)
    area_cells = occupied.shape[0] * cell * cell
    area = planar_region_area(chain)
    assert area_cells == pytest.approx(area, rel=0.03)
    estimate, error = monte_carlo_area(chain, 0.7, 400_000)
    assert abs(estimate - area) < 4 * error


def distance_to_image(arm: Robot, points: np.ndarray) -> np.ndarray:
    """Smallest TCP distance to each point over the joint-range box (scipy L-BFGS-B reference).

    Starts: the five nearest of a dense grid of configurations.
    """
    grid = np.stack(
        np.meshgrid(
            *[np.linspace(lo, hi, 48) for lo, hi in zip(arm.lower, arm.upper, strict=True)]
        ),
        axis=-1,
    ).reshape(-1, arm.dof)
    tree = cKDTree(fk_tool(arm, grid)[:, :2, 3])
    bounds = list(zip(arm.lower, arm.upper, strict=True))
    result = np.empty(points.shape[0])
    for i, point in enumerate(points):
        _, nearest = tree.query(point, k=5)
        best = np.inf
        for start in grid[nearest]:
            fit = minimize(
                lambda x, p=point: float(np.sum((fk_tool(arm, x[None])[0, :2, 3] - p) ** 2)),
                start,
                method="L-BFGS-B",
                bounds=bounds,
                options={"ftol": 1e-20, "gtol": 1e-14},
            )
            best = min(best, float(np.sqrt(fit.fun)))
        result[i] = best
    return result


def test_three_link_membership_against_optimisation() -> None:
    arm = planar_robot([350, 300, 150], [(-40, 100), (-30, 150), (-120, 60)])
    chain = PlanarChain.from_robot(arm)
    rng = np.random.default_rng(9)
    points = polar_points(rng.uniform(0.0, 0.8, 120), rng.uniform(-np.pi, np.pi, 120))
    inside = planar_reachable(chain, points)
    distance = distance_to_image(arm, points)
    # Reference: scipy L-BFGS-B minimum of |FK(q) - p| over the limit box. Points within
    # 1e-7 m count as reached; points between 1e-7 m and 1e-4 m of the image are too close to the
    # boundary for the optimiser to decide and are left out.
    decided = (distance < 1e-7) | (distance > 1e-4)
    assert decided.sum() > 100
    assert np.array_equal(inside[decided], distance[decided] < 1e-7)
    assert 0.1 < inside.mean() < 0.9
