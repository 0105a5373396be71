"""The planar arm's reach (the ``reach`` command's answer for a planar robot) in boundary units."""

from __future__ import annotations

from posebridge.spaces.planar_boundary import PlanarReach
from posebridge.units import mm_from_m

__all__ = ["planar_reach_summary"]


def planar_reach_summary(reach: PlanarReach, dof: int) -> dict[str, object]:
    """Return a planar arm's reach in boundary units, ready for JSON and the command's text.

    Lengths in mm, the area in m² like the reach map's volumes.

    Parameters
    ----------
    reach : PlanarReach
        From :func:`posebridge.spaces.planar_boundary.planar_reach`.
    dof : int
        The arm's joint count (2: closed form, 3: grid membership test).

    Returns
    -------
    dict
    """
    height_mm = float(mm_from_m(reach.plane_height_m))
    return {
        "planar": True,
        "plane": f"base x-y plane at z = {height_mm:g} mm",
        "plane_z_mm": height_mm,
        "area_m2": reach.area_m2,
        "inner_radius_mm": float(mm_from_m(reach.inner_radius_m)),
        "outer_radius_mm": float(mm_from_m(reach.outer_radius_m)),
        "full_turns": reach.full_turns,
        "method": "closed form (law of cosines; swept region of the joint ranges)"
        if dof == 2
        else "exact membership test on a 5 mm grid",
    }
