"""The boundary between the SI computations and the front doors (CLI, HTTP API, review report).

Every JSON-ready result model lives here, in millimetres and degrees with the
unit in each field name, with its plain-text rendering and the builders that
make it from the SI results of the domain packages (``cell``, ``planning``,
``spaces``, ``kinematics``). Domain modules never import this package; the
front doors import it instead of converting units themselves.

* :mod:`posebridge.results.kinematics` — forward and inverse kinematics results.
* :mod:`posebridge.results.robots` — robot models and their display meshes.
* :mod:`posebridge.results.cell` — target check, pose and log diagnosis models;
  :mod:`posebridge.results.cell_text` renders them.
* :mod:`posebridge.results.target_check`, :mod:`~posebridge.results.diagnosis`,
  :mod:`~posebridge.results.log_diagnosis`, :mod:`~posebridge.results.arm_state`,
  :mod:`~posebridge.results.quality` — their builders from the SI results.
* :mod:`posebridge.results.external_axes` — external-axis values in mm and degrees.
* :mod:`posebridge.results.path_check` — the path check result, its builder and text.
* :mod:`posebridge.results.joint_plan` — the joint move plan result, its builder and text.
* :mod:`posebridge.results.sequence` — the fastest solution sequence, its builder and text.
* :mod:`posebridge.results.motion_export` — exported motions (CSV and JSON rows).
* :mod:`posebridge.results.placement` — base and rail placement results, their text and builder.
* :mod:`posebridge.results.spaces`, :mod:`~posebridge.results.planar_reach` — joint maps,
  reach sections and the planar reach area.
* :mod:`posebridge.results.map_images` — PNG pictures of the grid results.
* :mod:`posebridge.results.text_table` — the plain-text table helpers they share.
"""
