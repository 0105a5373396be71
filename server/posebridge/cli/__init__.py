"""The ``posebridge`` command line, one module per command group.

``main`` builds the parser from the groups (``robots``: robots/fk/ik, ``cells``:
check/diagnose/report/schema, ``spaces``: reach/jointmap, ``planning``: paths/plan/place,
``service``: serve/bench); options shared by commands are argparse parent parsers in
``options``; exit codes, the input error and mm/deg parsing are in ``common``.
"""

from posebridge.cli.common import EXIT_BAD_INPUT, EXIT_FINDINGS, EXIT_INTERNAL, EXIT_OK
from posebridge.cli.main import build_parser, main

__all__ = [
    "EXIT_BAD_INPUT",
    "EXIT_FINDINGS",
    "EXIT_INTERNAL",
    "EXIT_OK",
    "build_parser",
    "main",
]
