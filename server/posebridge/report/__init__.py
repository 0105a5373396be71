"""The self-contained HTML review report of a cell (``posebridge report CELL -o review.html``).

* :mod:`posebridge.report.html` — :func:`build_report` and :func:`write_report`.
* :mod:`posebridge.report.meshes` — triangle meshes of the cell's solids.
* :mod:`posebridge.report.figures` — the plotly figures (3D, plan, elevation, joint map).
"""

from posebridge.report.html import SAFETY_CAUTION, ReportError, build_report, write_report

__all__ = ["SAFETY_CAUTION", "ReportError", "build_report", "write_report"]
