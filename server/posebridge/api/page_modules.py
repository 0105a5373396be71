"""The page's ES modules, for its ``<link rel="modulepreload">`` list.

The page's entry module (``static/main.js``) imports the others, which import more: left to
itself the browser finds each level of that tree only once the level above has arrived and
been parsed, so the modules arrive in several rounds, the later ones behind the charting
script's parse. Listing every module in the page's head as ``modulepreload`` asks for them all
at once (HTML Living Standard, "link type modulepreload"). The list is read from the modules'
own static ``import ... from "./x.js"`` statements, so it cannot drift from the code.
"""

from __future__ import annotations

import re
from pathlib import Path, PurePosixPath

__all__ = ["page_modules"]

_IMPORT = re.compile(
    r"""\b(?:import|export)\b[^;"'`]*?\bfrom\s*["'](\.{1,2}/[^"']+)["']|\bimport\s*["'](\.{1,2}/[^"']+)["']"""
)
"""A static import or re-export of a relative module specifier (``./x.js``, ``../x.js``)."""


def page_modules(static: Path, entry: str = "main.js") -> list[str]:
    """Return every module ``entry`` reaches through static relative imports, entry first.

    Parameters
    ----------
    static : Path
        The static folder the page's modules are served from.
    entry : str
        The entry module, relative to ``static``.

    Returns
    -------
    list of str
        Module paths relative to ``static`` (``/``-separated), in breadth-first import order.
    """
    order = [PurePosixPath(entry)]
    seen = set(order)
    for module in order:
        text = (static / module).read_text(encoding="utf-8")
        for match in _IMPORT.finditer(text):
            specifier = match.group(1) or match.group(2)
            target = PurePosixPath(_normalized(module.parent / specifier))
            if target not in seen:
                seen.add(target)
                order.append(target)
    return [str(module) for module in order]


def _normalized(path: PurePosixPath) -> str:
    """``path`` with its ``.`` and ``..`` parts resolved (no file system access)."""
    parts: list[str] = []
    for part in path.parts:
        if part == "..":
            parts.pop()
        elif part != ".":
            parts.append(part)
    return "/".join(parts)
