"""Inverse kinematics: every solution of a batch of tool poses, whatever the arm.

:func:`solve_ik_all` picks the solver from the robot's geometry (never from
its ``kind`` label), in this order:

1. six-axis ortho-parallel arm with a spherical wrist: closed form of
   Brandstötter et al. (2014), :mod:`posebridge.kinematics.ik.analytic.ortho_parallel`;
2. six-axis arm with joints 2, 3 and 4 parallel and an offset wrist: closed form,
   :mod:`~posebridge.kinematics.ik.analytic.offset_wrist`;
3. planar 2R / 3R arm in the base x-y plane, :mod:`~posebridge.kinematics.ik.analytic.planar`;
4. SCARA, :mod:`~posebridge.kinematics.ik.analytic.scara`;
5. gantry (three linear axes, optional tool rotation), :mod:`~posebridge.kinematics.ik.analytic.gantry`;
6. any other serial chain: multi-start numerical IK, :mod:`posebridge.kinematics.ik.numeric`.

Each analytic family accepts a robot only after checking its own canonical
forward kinematics against :func:`posebridge.kinematics.fk.fk_flange`.
:func:`ik_solver` makes this choice once per robot object and remembers it.

The result, slot order, revolution variants and branch labels are described in
:mod:`posebridge.kinematics.ik.finishing` and :mod:`posebridge.kinematics.branches`.
Analytic solvers reach the orientation exactly (spherical wrist, heading
joint), so ``orientation_tolerance_rad`` only matters for the numerical solver
and for the offset-wrist family, which checks every solution against both
tolerances.
"""

from __future__ import annotations

import weakref
from collections.abc import Callable
from dataclasses import dataclass, field
from functools import partial
from typing import TypedDict

import numpy as np
import numpy.typing as npt

from posebridge.kinematics.ik.analytic.gantry import GantryGeometry, solve_gantry
from posebridge.kinematics.ik.analytic.offset_wrist import (
    OffsetWristGeometry,
    offset_wrist_solver,
    solve_offset_wrist,
)
from posebridge.kinematics.ik.analytic.ortho_parallel import (
    ortho_parallel_reach_margins,
    ortho_parallel_solver,
    solve_ortho_parallel,
)
from posebridge.kinematics.ik.analytic.ortho_parallel_geometry import OrthoParallelGeometry
from posebridge.kinematics.ik.analytic.planar import PlanarGeometry, solve_planar
from posebridge.kinematics.ik.analytic.scara import ScaraGeometry
from posebridge.kinematics.ik.inputs import check_positive
from posebridge.kinematics.ik.numeric import solve_ik_numeric
from posebridge.kinematics.ik.solutions import IkSolutions
from posebridge.robot.model import Robot
from posebridge.units import FloatArray

__all__ = ["IkSolver", "ik_solver", "solve_ik_all"]


Geometry = OrthoParallelGeometry | OffsetWristGeometry | PlanarGeometry | GantryGeometry
"""The extracted parameters of an analytic family."""


class _CommonOptions(TypedDict):
    """The keyword arguments every family's solver takes."""

    T_flange_tool: npt.ArrayLike | None
    seed: npt.ArrayLike | None
    all_revolutions: bool


def _tool_key(T_flange_tool: npt.ArrayLike | None) -> tuple[object, ...] | None:
    """Return a dictionary key of a tool transform: its dtype, shape and bytes (None for none)."""
    if T_flange_tool is None:
        return None
    tool = np.asarray(T_flange_tool)
    return (tool.dtype.str, tool.shape, tool.tobytes())


@dataclass(frozen=True, eq=False)
class IkSolver:
    """The IK solver chosen for one robot.

    Attributes
    ----------
    robot : Robot
    family : str
        ``"ortho_parallel"``, ``"offset_wrist"``, ``"planar"``, ``"scara"``,
        ``"gantry"`` or ``"numeric"``.
    geometry : OrthoParallelGeometry, OffsetWristGeometry, PlanarGeometry, GantryGeometry or None
        Extracted parameters of the analytic family (None for ``"numeric"``).
    """

    robot: Robot
    family: str
    geometry: Geometry | None
    _prepared: dict[tuple[object, ...], Callable[[FloatArray], IkSolutions]] = field(
        default_factory=dict, repr=False
    )
    """:meth:`prepare`'s answers by tool and tolerances."""
    _reach: dict[tuple[object, ...] | None, Callable[[FloatArray], FloatArray]] = field(
        default_factory=dict, repr=False
    )
    """:meth:`reach_margins`' answers by tool."""

    def solve(
        self,
        T_base_tool: npt.ArrayLike,
        *,
        T_flange_tool: npt.ArrayLike | None = None,
        seed: npt.ArrayLike | None = None,
        all_revolutions: bool = False,
        position_tolerance_m: float = 1e-6,
        orientation_tolerance_rad: float = 1e-6,
    ) -> IkSolutions:
        """Every IK solution of each pose; parameters as :func:`solve_ik_all`."""
        tolerance = check_positive(position_tolerance_m, "position_tolerance_m")
        orientation = check_positive(orientation_tolerance_rad, "orientation_tolerance_rad")
        robot, geometry = self.robot, self.geometry
        common = _CommonOptions(
            T_flange_tool=T_flange_tool, seed=seed, all_revolutions=all_revolutions
        )
        if isinstance(geometry, OrthoParallelGeometry):
            return solve_ortho_parallel(
                robot, geometry, T_base_tool, position_tolerance_m=tolerance, **common
            )
        if isinstance(geometry, OffsetWristGeometry):
            return solve_offset_wrist(
                robot,
                geometry,
                T_base_tool,
                position_tolerance_m=tolerance,
                orientation_tolerance_rad=orientation,
                **common,
            )
        if isinstance(geometry, PlanarGeometry):
            return solve_planar(
                robot, geometry, T_base_tool, position_tolerance_m=tolerance, **common
            )
        if isinstance(geometry, GantryGeometry):
            return solve_gantry(robot, geometry, T_base_tool, **common)
        return solve_ik_numeric(
            robot,
            T_base_tool,
            position_tolerance_m=tolerance,
            orientation_tolerance_rad=orientation,
            **common,
        )

    def prepare(
        self,
        *,
        T_flange_tool: npt.ArrayLike | None = None,
        position_tolerance_m: float = 1e-6,
        orientation_tolerance_rad: float = 1e-6,
    ) -> Callable[[FloatArray], IkSolutions]:
        """Return a solve of many batches with one tool, without seed or revolution variants.

        The tool, tolerances, kernel parameters and joint table are checked and
        prepared once (:class:`~posebridge.kinematics.ik.finishing.BlockSolver` for the
        six-axis closed forms); the returned function takes poses already checked by
        :func:`~posebridge.kinematics.ik.inputs.check_target_poses`, shape (N, 4, 4),
        and returns what :meth:`solve` returns for them. Kept per tool and
        tolerances, so a second call with the same ones costs nothing.
        """
        tolerance = check_positive(position_tolerance_m, "position_tolerance_m")
        orientation = check_positive(orientation_tolerance_rad, "orientation_tolerance_rad")
        key = (_tool_key(T_flange_tool), tolerance, orientation)
        prepared = self._prepared.get(key)
        if prepared is None:
            prepared = self._prepare(T_flange_tool, tolerance, orientation)
            self._prepared[key] = prepared
        return prepared

    def reach_margins(
        self, *, T_flange_tool: npt.ArrayLike | None = None
    ) -> Callable[[FloatArray], FloatArray] | None:
        """Return a signed, smooth measure of the reach of tool poses, or None for this family.

        Ortho-parallel arms only
        (:func:`~posebridge.kinematics.ik.analytic.ortho_parallel.ortho_parallel_reach_margins`):
        the returned function takes checked poses (N, 4, 4) and returns ``1 - |cos β|`` of the
        elbow's law of cosines for the front and back shoulder, shape (N, 2), positive where
        the elbow solutions exist and negative beyond the reach. Kept per tool, as
        :meth:`prepare`'s answers are.
        """
        if not isinstance(self.geometry, OrthoParallelGeometry):
            return None
        key = _tool_key(T_flange_tool)
        margins = self._reach.get(key)
        if margins is None:
            margins = ortho_parallel_reach_margins(
                self.robot, self.geometry, T_flange_tool=T_flange_tool
            )
            self._reach[key] = margins
        return margins

    def _prepare(
        self, T_flange_tool: npt.ArrayLike | None, tolerance: float, orientation: float
    ) -> Callable[[FloatArray], IkSolutions]:
        """:meth:`prepare`, worked out."""
        robot, geometry = self.robot, self.geometry
        if isinstance(geometry, OrthoParallelGeometry):
            return ortho_parallel_solver(
                robot, geometry, T_flange_tool=T_flange_tool, position_tolerance_m=tolerance
            ).solve
        if isinstance(geometry, OffsetWristGeometry):
            return offset_wrist_solver(
                robot,
                geometry,
                T_flange_tool=T_flange_tool,
                position_tolerance_m=tolerance,
                orientation_tolerance_rad=orientation,
            ).solve
        return partial(
            self.solve,
            T_flange_tool=T_flange_tool,
            position_tolerance_m=tolerance,
            orientation_tolerance_rad=orientation,
        )


_SOLVERS: weakref.WeakKeyDictionary[Robot, IkSolver] = weakref.WeakKeyDictionary()
"""Solver chosen per robot object. Robots are immutable, so the choice (a pure
function of the robot, costing a geometry extraction and its FK verification)
is kept as long as the robot object lives."""


def ik_solver(robot: Robot) -> IkSolver:
    """Return the IK solver for ``robot``, chosen from its geometry (module docstring) once per robot."""
    solver = _SOLVERS.get(robot)
    if solver is None:
        solver = _choose_solver(robot)
        _SOLVERS[robot] = solver
    return solver


_FAMILIES: tuple[tuple[str, Callable[[Robot], Geometry | None]], ...] = (
    ("ortho_parallel", OrthoParallelGeometry.from_robot),
    ("offset_wrist", OffsetWristGeometry.from_robot),
    ("planar", PlanarGeometry.from_robot),
    ("scara", ScaraGeometry.from_robot),
    ("gantry", GantryGeometry.from_robot),
)
"""The analytic families in the order they are tried (module docstring), with their extractors."""


def _choose_solver(robot: Robot) -> IkSolver:
    for family, extract in _FAMILIES:
        geometry = extract(robot)
        if geometry is not None:
            return IkSolver(robot, family, geometry)
    return IkSolver(robot, "numeric", None)


def solve_ik_all(
    robot: Robot,
    T_base_tool: npt.ArrayLike,
    *,
    T_flange_tool: npt.ArrayLike | None = None,
    seed: npt.ArrayLike | None = None,
    all_revolutions: bool = False,
    position_tolerance_m: float = 1e-6,
    orientation_tolerance_rad: float = 1e-6,
) -> IkSolutions:
    """Every IK solution of each target pose, with branch labels, limits and revolution variants.

    Parameters
    ----------
    robot : Robot
    T_base_tool : array-like, shape (N, 4, 4)
        Target tool (TCP) poses in the robot base frame, SI.
    T_flange_tool : array-like, shape (4, 4), optional
        Tool pose in the flange frame; the robot's default tool if omitted.
    seed : array-like, shape (n,) or (N, n), optional
        Reference configuration(s): valid slots are ordered by weighted joint
        distance to it, revolution representatives are the ones nearest to it, and
        free joints at singularities take its values.
    all_revolutions : bool
        One slot for every in-limit 2 pi variant of joints whose range
        exceeds one revolution, instead of the one nearest the seed (or zero).
    position_tolerance_m, orientation_tolerance_rad : float
        A valid solution reaches the target within these.

    Returns
    -------
    IkSolutions
        See :mod:`posebridge.kinematics.ik.finishing`.

    Examples
    --------
    >>> import numpy as np
    >>> from posebridge.robot.library import load_robot
    >>> from posebridge.kinematics.fk import fk_tool
    >>> robot = load_robot("pb-arm6")
    >>> target = fk_tool(robot, [[0.1, 0.2, -0.3, 0.4, 0.5, 0.6]])
    >>> result = solve_ik_all(robot, target)
    >>> result.method
    'analytic: ortho-parallel, Brandstötter et al. 2014'
    >>> result.branch_label(0, 0)
    'front, up, positive'
    """
    return ik_solver(robot).solve(
        T_base_tool,
        T_flange_tool=T_flange_tool,
        seed=seed,
        all_revolutions=all_revolutions,
        position_tolerance_m=position_tolerance_m,
        orientation_tolerance_rad=orientation_tolerance_rad,
    )
