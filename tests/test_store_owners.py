"""The page store's writers: every literal key a module passes to ``store.update`` is a key
that module owns in the table of ``static/state.js`` (our own contract, stated there), and
every key of the initial state has exactly one owner."""

from __future__ import annotations

import re
from pathlib import Path

from posebridge.resources import data_folder

STATIC = data_folder("static")
# the crossings state.js documents: linking.js resets the previous robot's keys when it loads
# a robot, and sets the arm with the IK answer it follows (one update, one redraw); cellsync.js
# clears the carriage with the saved cell
CROSSINGS = {
    "linking.js": {
        "target",
        "selectedBranch",
        "joints",
        "mapJoints",
        "map3Joints",
        "jointMap",
        "jointMap3",
        "pathCurve",
    },
    # cellsync.js clears the dragged carriage with the saved cell (one update)
    "cellsync.js": {"carriage"},
}


def _owners() -> dict[str, set[str]]:
    text = (STATIC / "state.js").read_text(encoding="utf-8")
    table = text[text.index(" * Writers:") : text.index(" * Two writes")]
    lines = [line.removeprefix(" *").strip() for line in table.splitlines()]
    owners: dict[str, set[str]] = {}
    current = ""
    for line in lines:
        match = re.fullmatch(r"([\w/]+\.js): (.*)", line)
        if match:
            current = match.group(1)
            owners[current] = set()
            line = match.group(2)
        elif not current or not line:
            continue
        owners[current] |= {key.strip() for key in line.split(",") if key.strip()}
    return owners


def _top_level_keys(source: str, start: int) -> list[str]:
    """Keys of the object literal that opens at ``source[start] == "{"`` (computed keys and
    spreads skipped)."""
    depth, part, parts = 0, "", []
    for char in source[start:]:
        if char in "{[(":
            depth += 1
            if depth == 1:
                continue
        elif char in "}])":
            depth -= 1
            if depth == 0:
                parts.append(part)
                break
        if depth == 1 and char == ",":
            parts.append(part)
            part = ""
        elif depth >= 1:
            part += char
    keys = []
    for item in (p.strip() for p in parts):
        match = re.match(r"([A-Za-z_$][\w$]*)\s*(:|$)", item)
        if match:
            keys.append(match.group(1))
    return keys


def _page_scripts() -> list[Path]:
    """Our own scripts under static/: every ``.js`` file but the vendored bundle's folder
    (``static/vendor/``, plotly.js: megabytes of minified code with no store of ours)."""
    return sorted(
        path for path in STATIC.rglob("*.js") if path.relative_to(STATIC).parts[0] != "vendor"
    )


def _literal_writes() -> dict[str, set[str]]:
    writes: dict[str, set[str]] = {}
    for path in _page_scripts():
        source = path.read_text(encoding="utf-8")
        name = path.relative_to(STATIC).as_posix()
        for match in re.finditer(r"store\.update\(\s*\{", source):
            writes.setdefault(name, set()).update(_top_level_keys(source, match.end() - 1))
    return writes


def test_every_key_has_one_owner() -> None:
    owners = _owners()
    initial = (STATIC / "state.js").read_text(encoding="utf-8")
    body = initial[initial.index("export function initialState()") :]
    state_keys = set(_top_level_keys(body, body.index("return {") + len("return ")))
    owned = [key for keys in owners.values() for key in keys]
    assert sorted(owned) == sorted(set(owned))  # no key with two owners
    assert set(owned) == state_keys


def test_modules_write_only_their_own_keys() -> None:
    owners = _owners()
    writes = _literal_writes()
    assert writes  # the scan found the store's writers
    for module, keys in writes.items():
        allowed = owners.get(module, set()) | CROSSINGS.get(module, set())
        assert keys <= allowed, f"{module} writes {sorted(keys - allowed)} owned elsewhere"


def test_scan_skips_only_the_vendor_folder() -> None:
    scanned = {path.relative_to(STATIC).as_posix() for path in _page_scripts()}
    every = {path.relative_to(STATIC).as_posix() for path in STATIC.rglob("*.js")}
    vendored = {name for name in every if name.startswith("vendor/")}
    assert vendored  # the plotly bundle is there to skip
    assert scanned == every - vendored
    assert {"state.js", "cellsync.js"} <= scanned
    assert any("/" in name for name in scanned)  # subfolders (views/, panels/) still scanned
