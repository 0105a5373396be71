"""Move a turntable to another place in the cell file, with everything it carries.

The cell file edit that applies a table placement candidate
(:mod:`posebridge.planning.placement_table`): the table's axis point (its
``position_mm``) moves by a step ``d`` (world, mm) and every fixture it carries
(:attr:`posebridge.cell.external_axes.TurntableAxis.fixtures`: the listed ones
and their children) moves rigidly by the same step, so that each carried
fixture's world frame, and each target on one, becomes ``Trans(d) T`` at every
table angle. That is the pose the search scores a candidate at
(``Trans(d) D_p0(theta - theta_0) T_world_pose``), since turning about the
moved line is ``D_(p0+d) = Trans(d) D_p0 Trans(-d)``.

A fixture's position is stored in its parent's frame (the world without one):

* a carried fixture whose parent is carried too is left as it is (it follows
  its parent; changing it as well would move it twice);
* a carried fixture without a parent gets ``position + d``;
* a carried fixture whose parent the table does not carry (a stand beside or
  under the table, possibly rotated) gets ``position + R^T d``, ``R`` the
  parent's world rotation: ``T_parent T_parent_fixture' = Trans(d) T_parent
  T_parent_fixture`` (Lynch & Park, *Modern Robotics*, sec. 3.3.1).

Orientations, other fixtures, world targets and pose waypoints do not change.
A fixture rides one table at most (the cell model refuses one listed on two
tables, or hanging from another table's fixture).
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

from posebridge.cell.model import Cell, CellFileError, validate_cell
from posebridge.cell.scene import Scene

__all__ = ["cell_with_turntable_at"]


def cell_with_turntable_at(scene: Scene, name: str, position_mm: npt.ArrayLike) -> Cell:
    """Return the scene's cell with turntable ``name`` moved to ``position_mm`` (module docstring).

    Parameters
    ----------
    scene : Scene
        The cell resolved at its axes' home values (:func:`posebridge.cell.scene.resolve_scene`);
        its fixtures' world rotations turn the step into a parent's frame.
    name : str
        The turntable.
    position_mm : array-like, shape (3,)
        The table's new axis point (top centre of the plate) in the world, mm (the cell file's
        unit).

    Returns
    -------
    Cell
        The edited cell, validated.

    Raises
    ------
    CellFileError
        No turntable ``name``, or ``position_mm`` is not three finite numbers.
    ValueError
        ``scene`` is posed away from its axes' home values.
    """
    cell = scene.cell
    names = [table.name for table in cell.turntables]
    if name not in names:
        known = ", ".join(repr(n) for n in names) or "none"
        raise CellFileError([f"turntables: no turntable named {name!r} (the cell has {known})"])
    new = np.asarray(position_mm, dtype=np.float64)
    if new.shape != (3,) or not np.all(np.isfinite(new)):
        raise CellFileError([f"position_mm: expected three finite numbers, got {position_mm!r}"])
    if not np.array_equal(scene.external.values, scene.external.home):
        raise ValueError("scene: expected the cell's scene at its axes' home values")
    k = names.index(name)
    step = new - np.asarray(cell.turntables[k].position_mm, dtype=np.float64)
    carried = set(scene.external.turntables[k].fixtures)
    index_of = {fixture.name: i for i, fixture in enumerate(cell.fixtures)}
    fixtures = list(cell.fixtures)
    for i in sorted(carried):
        parent = fixtures[i].parent
        if parent is None:
            local = step
        elif index_of[parent] in carried:
            continue  # it follows its parent
        else:
            local = scene.T_world_fixture[index_of[parent], :3, :3].T @ step
        position = np.asarray(fixtures[i].position_mm, dtype=np.float64) + local
        fixtures[i] = fixtures[i].model_copy(
            update={"position_mm": tuple(float(v) for v in position)}
        )
    turntables = list(cell.turntables)
    turntables[k] = turntables[k].model_copy(update={"position_mm": tuple(float(v) for v in new)})
    edited = cell.model_copy(update={"fixtures": fixtures, "turntables": turntables})
    return validate_cell(edited.model_dump(mode="json", exclude_none=True))
