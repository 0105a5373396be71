"""The fastest solution sequence of a cell path and the path edits that make the path follow it.

:func:`optimise_path` runs :func:`posebridge.planning.solution_sequence.optimise_sequence`
(exact shortest path over the layered candidate graph, dynamic programming;
method and references there) with its limits in SI units (the cell's thresholds
when omitted), and finds the edits below; :func:`posebridge.results.sequence.sequence_result`
turns its :class:`PathSequence` into the report (mm, deg, the saving in words, the limits as
the user gave them) for the command line, the HTTP API and the page.

**Edits that make the path follow the sequence.** The path check chooses each
waypoint's configuration itself (:func:`posebridge.planning.path_sampling.sample_path`:
a joint-move waypoint nearest the previous one on its required branch, a
linear-move waypoint where the line arrives). To make it choose the optimiser's
sequence, waypoints are given as joint values, as few as possible: in path
order, the first waypoint whose configuration differs from the sequence's
(more than :data:`MATCH_TOLERANCE_RAD` on a joint) gets the sequence's joint
values, the path is sampled again with that change, and so on until every
waypoint matches. Waypoints already on the sequence keep their target or pose
(and move with it). A waypoint given as joint values no longer follows its
target when the target moves: that is the price of naming the configuration
exactly (the revolutions of a wide-range joint cannot be said in branch words).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, replace
from typing import Protocol

import numpy as np

from posebridge.cell.model import Cell, validate_cell
from posebridge.cell.scene import ResolvedPath, Scene
from posebridge.planning.errors import PlanningInputError
from posebridge.planning.path_sampling import (
    DEFAULT_RESOLUTION_M,
    DEFAULT_RESOLUTION_RAD,
    path_of,
    sample_path,
)
from posebridge.planning.solution_sequence import (
    SequenceLimits,
    SequenceResult,
    optimise_sequence,
)
from posebridge.units import FloatArray, m_from_mm, rad_from_deg

__all__ = [
    "MATCH_TOLERANCE_RAD",
    "JointsEdit",
    "PathSequence",
    "optimise_path",
    "sequence_edits",
    "with_waypoint_joints",
]

MATCH_TOLERANCE_RAD = 1e-6
"""Largest joint difference (rad, or m for prismatic joints) at which two configurations match."""


@dataclass(frozen=True, eq=False)
class PathSequence:
    """The fastest consistent solution sequence of a path and its edits (module docstring).

    Attributes
    ----------
    scene : Scene
    path : ResolvedPath
    result : SequenceResult
        SI units (:func:`~posebridge.planning.solution_sequence.optimise_sequence`).
    edits : list of int
        Waypoints to give as the best sequence's joint values (:func:`sequence_edits`),
        increasing; empty when none is feasible or the path already follows it.
    """

    scene: Scene
    path: ResolvedPath
    result: SequenceResult
    edits: list[int]


class JointsEdit(Protocol):
    """Joint values for one waypoint of a path (cell units: degrees, mm for prismatic joints)."""

    @property
    def index(self) -> int:
        """Waypoint position in the path, from 0."""
        ...

    @property
    def joints_deg(self) -> list[float]:
        """The joint values."""
        ...


def _matches(a: FloatArray, b: FloatArray) -> bool:
    return bool(np.all(np.isfinite(a)) and np.max(np.abs(a - b)) <= MATCH_TOLERANCE_RAD)


def sequence_edits(
    scene: Scene, path: int | ResolvedPath, q_best: FloatArray, **sampling: float
) -> list[int]:
    """Return the fewest waypoints to give as joint values so the path check follows ``q_best``.

    Method in the module docstring (greedy in path order, re-sampling after each edit).

    Parameters
    ----------
    scene : Scene
    path : int or ResolvedPath
    q_best : array, shape (W, n)
        rad or m, one configuration per waypoint.
    **sampling : float
        ``resolution_m``, ``resolution_rad``, ``jump_rad``, ``jump_m`` of
        :func:`~posebridge.planning.path_sampling.sample_path`.

    Returns
    -------
    list of int
        Waypoint indices, increasing.
    """
    resolved = path_of(scene, path)
    W = len(resolved.sources)
    edits: list[int] = []
    current = resolved
    for _ in range(W):
        q = sample_path(scene, current, **sampling).waypoint_q
        differing = [w for w in range(W) if not _matches(q[w], q_best[w])]
        if not differing:
            break
        w = differing[0]
        edits.append(w)
        sources = list(current.sources)
        sources[w] = "joints"
        given_q = current.q.copy()
        given_q[w] = q_best[w]
        given = current.joints_given.copy()
        given[w] = True
        target_index = current.target_index.copy()
        target_index[w] = -1
        current = replace(
            current,
            sources=tuple(sources),
            q=given_q,
            joints_given=given,
            target_index=target_index,
        )
    return edits


def optimise_path(
    scene: Scene,
    path: int,
    *,
    limit_margin_rad: float | None = None,
    limit_margin_m: float | None = None,
    collision_threshold_m: float = 0.0,
    resolution_m: float = DEFAULT_RESOLUTION_M,
    resolution_rad: float = DEFAULT_RESOLUTION_RAD,
) -> PathSequence:
    """Return the fastest consistent solution sequence of a cell path and its edits.

    Parameters
    ----------
    scene : Scene
    path : int
        Index into ``scene.paths``.
    limit_margin_rad, limit_margin_m : float, keyword-only
        Smallest joint-limit margin every configuration keeps (revolute, prismatic);
        the cell's ``thresholds.limit_margin_deg`` (``_mm``) when omitted.
    collision_threshold_m : float, keyword-only
        Clearance below which a configuration collides (0: contact).
    resolution_m, resolution_rad : float, keyword-only
        Sampling of moves, as the path check samples.

    Returns
    -------
    PathSequence
        Method in :mod:`posebridge.planning.solution_sequence`; edits in the module docstring.

    Raises
    ------
    PlanningInputError
        Bad path index, limits or speeds.
    """
    resolved = path_of(scene, path)
    thresholds = scene.cell.thresholds
    if limit_margin_rad is None:
        limit_margin_rad = float(rad_from_deg(thresholds.limit_margin_deg))
    if limit_margin_m is None:
        limit_margin_m = float(m_from_mm(thresholds.limit_margin_mm))
    limits = SequenceLimits(
        limit_margin_rad=float(limit_margin_rad),
        limit_margin_m=float(limit_margin_m),
        collision_threshold_m=float(collision_threshold_m),
        resolution_m=float(resolution_m),
        resolution_rad=float(resolution_rad),
    )
    result = optimise_sequence(scene, resolved, limits=limits)
    edits: list[int] = []
    if result.best is not None:
        edits = sequence_edits(
            scene,
            resolved,
            result.best.q,
            resolution_m=resolution_m,
            resolution_rad=resolution_rad,
        )
    return PathSequence(
        scene=scene,
        path=resolved,
        result=result,
        edits=edits,
    )


def with_waypoint_joints(cell: Cell, path: int, edits: Sequence[JointsEdit]) -> Cell:
    """Return a copy of ``cell`` whose path ``path`` gives the edited waypoints as joint values.

    Motion, speed and blend radius of each waypoint stay; its target or pose is
    replaced by ``joints_deg`` (the cell file's units: degrees, mm for prismatic joints).

    Raises
    ------
    PlanningInputError
        An index outside the path, or joint values of the wrong length.
    """
    if not 0 <= path < len(cell.paths):
        raise PlanningInputError(f"path: expected an index in 0..{len(cell.paths) - 1}, got {path}")
    waypoints = list(cell.paths[path].waypoints)
    for edit in edits:
        if not 0 <= edit.index < len(waypoints):
            raise PlanningInputError(
                f"edits: waypoint {edit.index} is not in path {cell.paths[path].name!r} "
                f"(it has {len(waypoints)}, numbered from 0)"
            )
        waypoints[edit.index] = waypoints[edit.index].model_copy(
            update={
                "target": None,
                "approach": False,
                "pose": None,
                "joints_deg": list(edit.joints_deg),
            }
        )
    paths = list(cell.paths)
    paths[path] = paths[path].model_copy(update={"waypoints": waypoints})
    return validate_cell(cell.model_copy(update={"paths": paths}).model_dump(mode="json"))
