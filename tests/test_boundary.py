"""The SI / user-unit boundary: domain modules do not convert SI results into mm and degrees.

Results in millimetres and degrees are built by ``posebridge.results`` from the SI results
of the domain packages; import-linter's layer contract keeps the domain from importing it.
This test keeps the other half of the rule: no domain module outside ``STILL_CONVERTING``
uses an SI-to-user conversion, and every module of that list still does (so the list only
shrinks as modules move their conversions behind the boundary).
"""

from __future__ import annotations

import re
from pathlib import Path

import posebridge

PACKAGE = Path(posebridge.__file__).parent
DOMAIN = ("cell", "planning", "spaces", "kinematics", "geometry", "robot")
TO_USER = re.compile(
    r"\b(mm_from_m|deg_from_rad|joints_user_from_si|user_from_si|np\.degrees|math\.degrees"
    r"|MM_PER_M|DEG_PER_RAD)\b|degrees=True"
)

STILL_CONVERTING: set[str] = set()
"""Domain modules that still convert SI values to mm/deg: none left; keep it empty."""


def _converting_modules() -> set[str]:
    found = set()
    for package in DOMAIN:
        for path in (PACKAGE / package).rglob("*.py"):
            if TO_USER.search(path.read_text(encoding="utf-8")):
                found.add(path.relative_to(PACKAGE).as_posix())
    return found


def test_no_new_domain_module_converts_to_user_units() -> None:
    assert _converting_modules() - STILL_CONVERTING == set()


def test_the_list_of_converting_modules_only_shrinks() -> None:
    assert STILL_CONVERTING - _converting_modules() == set()
