"""Cartesian workspace: sampled point clouds, voxel reach maps and their sections.

Point cloud
    Forward kinematics of configurations drawn uniformly (seeded) from the
    joint-range box, the joint space of a serial arm with independent limits.

Reach map (a voxel "reachability map", Zacharias, Borst, Hirzinger 2007,
"Capturing robot workspace structure: representing robot capabilities", IROS)
    A regular grid of voxels, axis-aligned in the world frame. At every voxel
    centre the tool is asked to point its z axis along each of a set of
    directions in the world, by default the 26 directions of
    :func:`tool_directions`; a direction counts as reachable when
    :func:`posebridge.kinematics.ik.solve_ik_all` finds a valid solution
    inside the joint limits (its solver is chosen once per map with
    :func:`posebridge.kinematics.ik.ik_solver` and sent with every chunk).
    The map holds the number of reachable directions per voxel, which ones
    (bit mask), and the best Yoshikawa manipulability of the TCP's
    translational Jacobian rows over all those solutions
    (:func:`translational_manipulability`).

Roll about the tool axis
    A direction fixes the tool z axis only. Its roll is sampled at ``rolls``
    equal steps from a reference frame (x axis = the world axis least
    aligned with the direction, made orthogonal to it); the direction counts
    as reachable when any roll is. The default is one roll: for arms whose
    TCP lies on the last joint's axis and whose last joint spans a full turn
    (pb-arm6: TCP on axis 6, ±355°) the roll moves only that joint, so reach
    does not depend on it. Give more rolls for other arms.

Voxels out of reach are skipped without IK
    A voxel centre farther than ``R`` from axis 1's origin (the joint-1
    frame origin) cannot be reached, where ``R`` is the largest TCP distance
    from that point over the joint-range box (sampled, then refined by
    bounded L-BFGS-B, Byrd, Lu, Nocedal, Zhu 1995) plus a margin of one
    voxel half-diagonal and 1 % of ``R``. The default grid is the cube of
    half side ``R`` about that point.

Chunks
    Voxels are cut into fixed chunks of :data:`CHUNK_VOXELS` (fixed by the
    grid alone) run by an executor from :mod:`posebridge.compute`; each
    chunk's result depends only on its voxels, so the map is identical
    whichever executor runs it.
"""

from __future__ import annotations

import itertools
import threading
from dataclasses import dataclass
from typing import Literal

import numpy as np
import numpy.typing as npt
from scipy.optimize import minimize

from posebridge.compute import Executor, ProgressCallback, SerialExecutor, split_range
from posebridge.kinematics.fk import fk_tool
from posebridge.kinematics.ik import IkSolver, ik_solver
from posebridge.kinematics.jacobian import jacobian_base
from posebridge.kinematics.metrics import jacobian_rows, manipulability_yoshikawa
from posebridge.robot.model import Robot
from posebridge.spaces.errors import SpacesInputError
from posebridge.transforms import check_transform, invert_transform
from posebridge.units import FloatArray

__all__ = [
    "CHUNK_VOXELS",
    "MAX_VOXELS",
    "ReachMap",
    "ReachSection",
    "WorkspaceCloud",
    "reach_map",
    "reach_section",
    "sample_workspace",
    "tcp_distance_bound",
    "tool_directions",
    "tool_rotations",
    "translational_manipulability",
]

MAX_VOXELS = 2_097_152
"""Largest number of voxels of a reach map (128³)."""
CHUNK_VOXELS = 1024
"""Voxels per executor chunk (about 0.1 to 0.3 s of IK on one core with 26 directions)."""
_DISTANCE_SAMPLES = 20_000
_DISTANCE_REFINE = 4

Uint32Array = npt.NDArray[np.uint32]
Int16Array = npt.NDArray[np.int16]


def tool_directions() -> FloatArray:
    """Return the 26 unit directions from a cube's centre to its 6 faces, 12 edges and 8 corners.

    Returns
    -------
    directions : array, shape (26, 3)
        Faces first (``±x, ±y, ±z``), then edges, then corners, each group in
        lexicographic order of the signs; unit length.
    """
    steps = np.array(list(itertools.product((-1, 0, 1), repeat=3)), dtype=np.float64)
    nonzero = np.count_nonzero(steps, axis=1)
    order = np.lexsort((np.arange(27), nonzero))
    steps = steps[order][nonzero[order] > 0]
    return steps / np.linalg.norm(steps, axis=1, keepdims=True)


def tool_rotations(directions: npt.ArrayLike, rolls: int = 1) -> FloatArray:
    """Tool orientations whose z axis points along each direction, at ``rolls`` roll angles.

    Reference frame per direction ``z``: ``x`` is the world axis with the
    smallest ``|e · z|`` (first of x, y, z on ties) made orthogonal to ``z``,
    ``y = z × x``. Roll ``k`` turns it about ``z`` by ``2 π k / rolls``.

    Parameters
    ----------
    directions : array-like, shape (D, 3)
        Unit vectors in the world frame.
    rolls : int
        Roll angles per direction, >= 1.

    Returns
    -------
    R_world_tool : array, shape (D, rolls, 3, 3)
    """
    z = np.asarray(directions, dtype=np.float64)
    if z.ndim != 2 or z.shape[1] != 3 or not np.allclose(np.linalg.norm(z, axis=1), 1.0):
        raise SpacesInputError(f"directions: expected unit vectors of shape (D, 3), got {z.shape}")
    if isinstance(rolls, bool) or not isinstance(rolls, int) or rolls < 1:
        raise SpacesInputError(f"rolls: expected an integer >= 1, got {rolls!r}")
    e = np.eye(3)[np.argmin(np.abs(z), axis=1)]
    x = e - np.sum(e * z, axis=1, keepdims=True) * z
    x /= np.linalg.norm(x, axis=1, keepdims=True)
    y = np.cross(z, x)
    angle = 2.0 * np.pi * np.arange(rolls) / rolls
    c = np.cos(angle)[None, :, None]
    s = np.sin(angle)[None, :, None]
    x_rolled = c * x[:, None, :] + s * y[:, None, :]
    y_rolled = -s * x[:, None, :] + c * y[:, None, :]
    z_rolled = np.broadcast_to(z[:, None, :], x_rolled.shape)
    return np.stack([x_rolled, y_rolled, z_rolled], axis=-1)


@dataclass(frozen=True, eq=False)
class WorkspaceCloud:
    """TCP positions of configurations sampled in the joint-range box.

    Attributes
    ----------
    q : array, shape (N, n)
        Joint values, rad or m.
    position : array, shape (N, 3)
        TCP positions in the world, m.
    """

    q: FloatArray
    position: FloatArray


def _tail(robot: Robot, T_flange_tool: npt.ArrayLike | None) -> FloatArray:
    if T_flange_tool is None:
        return robot.T_flange_tool
    return check_transform(T_flange_tool).reshape(4, 4)


def _world_base(T_world_base: npt.ArrayLike | None) -> FloatArray:
    return np.eye(4) if T_world_base is None else check_transform(T_world_base).reshape(4, 4)


def sample_workspace(
    robot: Robot,
    count: int,
    *,
    T_world_base: npt.ArrayLike | None = None,
    T_flange_tool: npt.ArrayLike | None = None,
    rng_seed: int = 0,
) -> WorkspaceCloud:
    """Point cloud of the TCP over the joint-range box (uniform samples, seeded).

    Parameters
    ----------
    robot : Robot
    count : int
        Number of configurations, 1..10 000 000.
    T_world_base : array-like, shape (4, 4), optional
        Robot base in the world; identity (base frame) if omitted.
    T_flange_tool : array-like, shape (4, 4), optional
        Tool in the flange frame; the robot's default tool if omitted.
    rng_seed : int, keyword-only
        Seed of ``numpy.random.default_rng``.

    Returns
    -------
    WorkspaceCloud
    """
    if isinstance(count, bool) or not isinstance(count, int) or not 1 <= count <= 10_000_000:
        raise SpacesInputError(f"count: expected an integer in 1..10000000, got {count!r}")
    rng = np.random.default_rng(rng_seed)
    q = rng.uniform(robot.lower, robot.upper, size=(count, robot.dof))
    T = _world_base(T_world_base) @ fk_tool(robot, q, _tail(robot, T_flange_tool))
    return WorkspaceCloud(q=q, position=T[:, :3, 3].copy())


def tcp_distance_bound(
    robot: Robot,
    point: npt.ArrayLike,
    *,
    T_flange_tool: npt.ArrayLike | None = None,
    rng_seed: int = 0,
) -> float:
    """Largest distance of the TCP from a base-frame point over the joint-range box, m.

    Method: uniform samples of the box (seeded), then the farthest ones
    refined by bounded quasi-Newton maximisation (L-BFGS-B, Byrd, Lu,
    Nocedal, Zhu 1995). The value is a tight lower bound of the maximum;
    callers add a margin.

    Parameters
    ----------
    robot : Robot
    point : array-like, shape (3,)
        m, base frame.
    T_flange_tool : array-like, shape (4, 4), optional
    rng_seed : int, keyword-only

    Returns
    -------
    distance : float
    """
    centre = np.asarray(point, dtype=np.float64)
    tail = _tail(robot, T_flange_tool)
    rng = np.random.default_rng(rng_seed)
    q = rng.uniform(robot.lower, robot.upper, size=(_DISTANCE_SAMPLES, robot.dof))
    distance = np.linalg.norm(fk_tool(robot, q, tail)[:, :3, 3] - centre, axis=1)
    best = float(distance.max())
    bounds = list(zip(robot.lower, robot.upper, strict=True))
    for start in q[np.argsort(distance)[-_DISTANCE_REFINE:]]:
        result = minimize(
            lambda x: -float(np.linalg.norm(fk_tool(robot, x[None, :], tail)[0, :3, 3] - centre)),
            start,
            method="L-BFGS-B",
            bounds=bounds,
        )
        best = max(best, -float(result.fun))
    return best


@dataclass(frozen=True, eq=False)
class ReachMap:
    """Reachable tool directions per voxel (SI, world frame).

    Grid arrays have shape ``G = (X, Y, Z)``; voxel ``(i, j, k)`` has its
    centre at ``(x[i], y[j], z[k])``.

    Attributes
    ----------
    x, y, z : array, shapes (X,), (Y,), (Z,)
        Voxel-centre coordinates in the world, m.
    voxel_size : float
        Voxel edge, m.
    directions : array, shape (D, 3)
        Tool z directions in the world (unit vectors).
    rolls : int
        Roll angles tried per direction.
    count : array of int16, shape G
        Number of reachable directions, 0..D.
    direction_mask : array of uint32, shape G
        Bit ``d`` set where direction ``d`` is reachable.
    best_manipulability : array, shape G
        Largest Yoshikawa manipulability of the TCP translation over every
        in-limit solution at the voxel (m³ per rad³ for a six-axis arm);
        NaN where nothing is reachable.
    centre : array, shape (3,)
        Axis 1's origin in the world, m.
    radius_bound : float
        Voxels farther than this from ``centre`` were skipped (module docstring), m.
    """

    x: FloatArray
    y: FloatArray
    z: FloatArray
    voxel_size: float
    directions: FloatArray
    rolls: int
    count: Int16Array
    direction_mask: Uint32Array
    best_manipulability: FloatArray
    centre: FloatArray
    radius_bound: float

    @property
    def shape(self) -> tuple[int, int, int]:
        """Grid shape ``(X, Y, Z)``."""
        return (self.x.shape[0], self.y.shape[0], self.z.shape[0])

    def centres(self) -> FloatArray:
        """Voxel centres, shape (X, Y, Z, 3), m."""
        return np.stack(np.meshgrid(self.x, self.y, self.z, indexing="ij"), axis=-1)


def _grid_axes(
    lower: FloatArray, upper: FloatArray, voxel_size: float
) -> tuple[FloatArray, FloatArray, FloatArray]:
    """Voxel-centre coordinates covering ``[lower, upper]`` (last voxel may overhang)."""
    counts = np.maximum(np.ceil((upper - lower) / voxel_size - 1e-9).astype(np.int64), 1)
    total = int(np.prod(counts))
    if total > MAX_VOXELS:
        raise SpacesInputError(
            f"voxel_size: {voxel_size:g} m gives {counts.tolist()} = {total} voxels; "
            f"at most {MAX_VOXELS} allowed, use larger voxels or a smaller box"
        )
    x, y, z = (lower[k] + (np.arange(counts[k]) + 0.5) * voxel_size for k in range(3))
    return x, y, z


def translational_manipulability(
    robot: Robot, q: FloatArray, T_flange_tool: FloatArray
) -> FloatArray:
    """Yoshikawa manipulability of the TCP's translational Jacobian rows ``J_v``, shape (N,).

    ``w = sqrt(det(J_v J_v^T))`` (Yoshikawa 1985, "Manipulability of robotic
    mechanisms") with the symmetric 3x3 Gram matrix's determinant expanded
    by cofactors: about four
    times faster than the QR form of
    :func:`posebridge.kinematics.metrics.manipulability_yoshikawa`, which
    keeps near-zero values accurate; a reach map needs the largest values.
    Arms with fewer than three joints use that function (its ``n < m`` case).

    Parameters
    ----------
    robot : Robot
    q : array, shape (N, n)
    T_flange_tool : array, shape (4, 4)
    """
    J = jacobian_rows(jacobian_base(robot, q, T_flange_tool), "position")
    if robot.dof < 3:
        return manipulability_yoshikawa(J)
    x, y, z = J[:, 0], J[:, 1], J[:, 2]
    xx = (x * x).sum(axis=1)
    yy = (y * y).sum(axis=1)
    zz = (z * z).sum(axis=1)
    xy = (x * y).sum(axis=1)
    xz = (x * z).sum(axis=1)
    yz = (y * z).sum(axis=1)
    det = xx * (yy * zz - yz * yz) - xy * (xy * zz - yz * xz) + xz * (xy * yz - yy * xz)
    return np.sqrt(np.maximum(det, 0.0))


def _reach_chunk(
    solver: IkSolver,
    T_base_world: FloatArray,
    T_flange_tool: FloatArray,
    rotations: FloatArray,
    axes: tuple[FloatArray, FloatArray, FloatArray],
    centre: FloatArray,
    radius_bound: float,
    start: int,
    stop: int,
) -> tuple[Uint32Array, FloatArray]:
    """Direction masks and best manipulability of the voxels ``start..stop`` (one chunk).

    ``rotations`` has shape (D, rolls, 3, 3). Returns arrays of shape (C,).
    """
    shape = tuple(axis.shape[0] for axis in axes)
    index = np.unravel_index(np.arange(start, stop), shape)
    points = np.stack([axes[k][index[k]] for k in range(3)], axis=1)
    mask = np.zeros(stop - start, dtype=np.uint32)
    best = np.full(stop - start, np.nan)
    active = np.flatnonzero(np.linalg.norm(points - centre, axis=1) <= radius_bound)
    if active.shape[0] == 0:
        return mask, best
    D, rolls = rotations.shape[:2]
    V = active.shape[0]
    T_world_tool = np.zeros((V, D, rolls, 4, 4))
    T_world_tool[..., :3, :3] = rotations[None]
    T_world_tool[..., :3, 3] = points[active][:, None, None, :]
    T_world_tool[..., 3, 3] = 1.0
    robot = solver.robot
    solutions = solver.solve(
        (T_base_world @ T_world_tool).reshape(-1, 4, 4), T_flange_tool=T_flange_tool
    )
    ok = solutions.valid & solutions.within_limits
    reached = ok.any(axis=1).reshape(V, D, rolls).any(axis=2)
    bits = np.left_shift(np.uint32(1), np.arange(D, dtype=np.uint32))
    mask[active] = (reached * bits).sum(axis=1, dtype=np.uint32)
    pose, slot = np.nonzero(ok)
    if pose.shape[0] > 0:
        w = translational_manipulability(robot, solutions.q[pose, slot], T_flange_tool)
        voxel = active[pose // (D * rolls)]
        highest = np.full(stop - start, -np.inf)
        np.maximum.at(highest, voxel, w)
        best = np.where(np.isfinite(highest), highest, np.nan)
    return mask, best


def reach_map(
    robot: Robot,
    *,
    voxel_size_m: float,
    T_world_base: npt.ArrayLike | None = None,
    T_flange_tool: npt.ArrayLike | None = None,
    box_m: npt.ArrayLike | None = None,
    directions: npt.ArrayLike | None = None,
    rolls: int = 1,
    executor: Executor | None = None,
    progress: ProgressCallback | None = None,
    cancel: threading.Event | None = None,
) -> ReachMap:
    """Voxel reach map: reachable tool directions and best manipulability per voxel.

    Method, roll handling, skipped voxels and chunking in the module docstring.

    Parameters
    ----------
    robot : Robot
    voxel_size_m : float, keyword-only
        Voxel edge, m (> 0); at most :data:`MAX_VOXELS` voxels.
    T_world_base : array-like, shape (4, 4), optional
        Robot base in the world; identity if omitted.
    T_flange_tool : array-like, shape (4, 4), optional
        Tool in the flange frame; the robot's default tool if omitted.
    box_m : array-like, shape (2, 3), optional
        World box ``[lower, upper]`` to cover, m; if omitted, the cube about
        axis 1's origin of half side ``radius_bound``, widened to whole
        multiples of the voxel size (voxel faces on the world lattice
        ``k * voxel_size_m``).
    directions : array-like, shape (D, 3), optional
        Tool z directions in the world (unit vectors, D <= 32);
        :func:`tool_directions` if omitted.
    rolls : int, keyword-only
        Roll angles per direction (module docstring).
    executor : Executor, optional
        Runs the chunks; :class:`posebridge.compute.SerialExecutor` if omitted.
    progress : callable, optional
        ``progress(done, total)`` in chunks.
    cancel : threading.Event, optional

    Returns
    -------
    ReachMap

    Raises
    ------
    SpacesInputError
        Bad voxel size, box, directions or rolls.
    posebridge.compute.ComputationCancelled
        ``cancel`` was set.
    """
    size = float(voxel_size_m)
    if not np.isfinite(size) or size <= 0.0:
        raise SpacesInputError(f"voxel_size_m: expected a finite value > 0, got {voxel_size_m!r}")
    world_base = _world_base(T_world_base)
    tail = _tail(robot, T_flange_tool)
    unit = tool_directions() if directions is None else np.asarray(directions, dtype=np.float64)
    if unit.ndim != 2 or not 1 <= unit.shape[0] <= 32:
        raise SpacesInputError(f"directions: expected 1..32 directions, got shape {unit.shape}")
    rotations = tool_rotations(unit, rolls)
    axis_origin = robot.origins[0][:3, 3]
    centre = world_base[:3, :3] @ axis_origin + world_base[:3, 3]
    reach = tcp_distance_bound(robot, axis_origin, T_flange_tool=tail)
    radius_bound = 1.01 * reach + 0.5 * np.sqrt(3.0) * size
    if box_m is None:
        lower = np.floor((centre - radius_bound) / size) * size
        upper = np.ceil((centre + radius_bound) / size) * size
    else:
        box = np.asarray(box_m, dtype=np.float64)
        if box.shape != (2, 3) or not np.all(np.isfinite(box)) or np.any(box[1] <= box[0]):
            raise SpacesInputError(
                f"box_m: expected [[x, y, z]_lower, [x, y, z]_upper] with lower < upper, got {box.tolist()}"
            )
        lower, upper = box[0], box[1]
    axes = _grid_axes(lower, upper, size)
    solver = ik_solver(robot)
    shape = (axes[0].shape[0], axes[1].shape[0], axes[2].shape[0])
    chunks = [
        (solver, invert_transform(world_base), tail, rotations, axes, centre, radius_bound, a, b)
        for a, b in split_range(int(np.prod(shape)), CHUNK_VOXELS)
    ]
    runner: Executor = SerialExecutor() if executor is None else executor
    results = runner.map_chunks(_reach_chunk, chunks, progress=progress, cancel=cancel)
    mask = np.concatenate([r[0] for r in results]).reshape(shape)
    best = np.concatenate([r[1] for r in results]).reshape(shape)
    count = np.zeros(shape, dtype=np.int16)
    for d in range(unit.shape[0]):
        count += ((mask >> np.uint32(d)) & np.uint32(1)).astype(np.int16)
    return ReachMap(
        x=axes[0],
        y=axes[1],
        z=axes[2],
        voxel_size=size,
        directions=unit,
        rolls=rolls,
        count=count,
        direction_mask=mask,
        best_manipulability=best,
        centre=centre,
        radius_bound=float(radius_bound),
    )


SectionAxis = Literal["x", "y", "z"]


@dataclass(frozen=True, eq=False)
class ReachSection:
    """A slice of a reach map through voxel centres, as a 2D grid (SI units).

    ``axis="z"`` is a horizontal slice (plan view: ``u`` = x, ``v`` = y);
    ``axis="y"`` and ``axis="x"`` are vertical slices (elevations: ``u`` = x
    or y, ``v`` = z). Grid arrays have shape ``(V, U)``: row ``v``, column
    ``u``, as an image is drawn.

    Attributes
    ----------
    axis : "x", "y" or "z"
        The axis normal to the slice.
    value_m : float
        World coordinate of the slice (the nearest voxel-centre layer), m.
    u_m, v_m : array, shapes (U,), (V,)
        Voxel-centre coordinates along the section's axes, m.
    u_axis, v_axis : str
        World axis names of ``u`` and ``v``.
    count : array of int16, shape (V, U)
    best_manipulability : array, shape (V, U)
    """

    axis: SectionAxis
    value_m: float
    u_m: FloatArray
    v_m: FloatArray
    u_axis: str
    v_axis: str
    count: Int16Array
    best_manipulability: FloatArray


def reach_section(reach: ReachMap, *, axis: SectionAxis, value_m: float) -> ReachSection:
    """Return the layer of voxels nearest ``value_m`` along ``axis``, as a 2D grid (see :class:`ReachSection`).

    Raises
    ------
    SpacesInputError
        Unknown axis, or ``value_m`` outside the map by more than half a voxel.
    """
    names = ("x", "y", "z")
    if axis not in names:
        raise SpacesInputError(f"axis: expected 'x', 'y' or 'z', got {axis!r}")
    k = names.index(axis)
    coordinates = (reach.x, reach.y, reach.z)
    along = coordinates[k]
    half = 0.5 * reach.voxel_size
    if not along[0] - half <= value_m <= along[-1] + half:
        raise SpacesInputError(
            f"value_m: expected a {axis} coordinate within [{along[0] - half:.4g}, "
            f"{along[-1] + half:.4g}] m, got {value_m!r}"
        )
    layer = int(np.argmin(np.abs(along - value_m)))
    u, v = (0, 1) if axis == "z" else ((0, 2) if axis == "y" else (1, 2))
    count = np.take(reach.count, layer, axis=k)
    best = np.take(reach.best_manipulability, layer, axis=k)
    return ReachSection(
        axis=axis,
        value_m=float(along[layer]),
        u_m=coordinates[u],
        v_m=coordinates[v],
        u_axis=names[u],
        v_axis=names[v],
        count=np.ascontiguousarray(count.T),
        best_manipulability=np.ascontiguousarray(best.T),
    )
