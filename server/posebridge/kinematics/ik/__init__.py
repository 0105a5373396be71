"""Inverse kinematics: every joint solution of a batch of tool poses, whatever the arm.

Modules, from the bottom up: ``solutions`` (the :class:`IkSolutions` result),
``inputs`` (target pose, seed and tolerance checks), ``finishing`` (raw candidates
to sorted slots: revolution variants, limit flags, order; numba kernels),
``analytic/`` (closed forms, one module per arm family), ``numeric`` (multi-start
Levenberg-Marquardt) and ``dispatch`` (:func:`solve_ik_all`: picks the solver
of a robot). Branch labels come from :mod:`posebridge.kinematics.branches`.
"""

from posebridge.kinematics.ik.dispatch import IkSolver, ik_solver, solve_ik_all
from posebridge.kinematics.ik.solutions import IkSolutions

__all__ = ["IkSolutions", "IkSolver", "ik_solver", "solve_ik_all"]
