"""The boundary between the SI computations and the front doors (CLI, HTTP API, review report).

Every JSON-ready result model lives here, in millimetres and degrees with the
unit in each field name, with its plain-text rendering and the builders that
make it from the SI results of the domain packages (``cell``, ``planning``,
``spaces``, ``kinematics``). Domain modules never import this package; the
front doors import it instead of converting units themselves.

* :mod:`posebridge.results.kinematics` — forward and inverse kinematics results.
* :mod:`posebridge.results.cell` — target check, pose and log diagnosis results;
  :mod:`posebridge.results.cell_text` renders them.
* :mod:`posebridge.results.path_check` — the path check result, its builder and text.
* :mod:`posebridge.results.joint_plan` — the joint move plan result, its builder and text.
* :mod:`posebridge.results.placement` — base placement results, their text and their builder.
"""
