"""Closed-form inverse kinematics, one module per arm family.

Each family has a geometry extractor ``<Family>Geometry.from_robot(robot)`` (for the
ortho-parallel family in its own module, ``ortho_parallel_geometry``)
that returns None for robots outside the family (checked against forward
kinematics on random configurations) and a batch solver ``solve_<family>``
returning :class:`posebridge.kinematics.ik.solutions.IkSolutions`.
"""
