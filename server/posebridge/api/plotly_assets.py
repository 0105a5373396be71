"""plotly.js under a strict content security policy: its style rules as a stylesheet file.

plotly.js adds its CSS at run time by creating ``<style>`` elements, which a
policy without ``'unsafe-inline'`` styles refuses. plotly.js supports such
policies (its ``addRelatedStyleRule`` skips the injection when the page
already has an element ``#plotly.js-style-global.no-inline-styles``), and the
rules it would inject are data in plotly.min.js. This module reads them from
the installed plotly.min.js once, so the server can serve them as
``/vendor/plotly.css`` and the page stays styled exactly as plotly.js means:

* the global rules object (keys ``"X,X div"`` ...), with plotly.js's own
  selector expansion (``X`` -> ``.js-plotly-plot .plotly``, ``Y`` ->
  ``.plotly-notifier``) and its order (each rule was inserted at the top of
  the sheet, so the last rule comes first);
* a bundled stylesheet that plotly.js adds under a fixed element id only when
  no element has that id (served as ``/vendor/plotly-bundled.css`` with that
  id on its ``<link>``);
* the style attributes plotly.js sets with ``setAttribute`` (crisp heatmap
  pixels, and an empty one on colour bar fills): their SHA-256 go into the
  policy's ``style-src-attr`` (CSP Level 3, ``'unsafe-hashes'``), the only
  inline styles the page allows.

If a future plotly.js changes these, the page still works (plotly.js then
logs that a style rule was refused); the browser tests check the console.
"""

from __future__ import annotations

import base64
import hashlib
import json
import re
from dataclasses import dataclass
from functools import cache
from pathlib import Path

__all__ = ["PlotlyAssets", "plotly_assets"]

_STRING = r"\"(?:[^\"\\]|\\.)*\"|'(?:[^'\\]|\\.)*'"
_GLOBAL_RULES = re.compile(r"=\{(\"X,X div\":.*?)\};?for\(", re.DOTALL)
_PAIR = re.compile(rf"\s*({_STRING})\s*:\s*({_STRING})\s*,?")
_BUNDLED = re.compile(
    r"document\.getElementById\(\"([0-9a-f]{32,128})\"\)\)\{var (\w+)=document\.createElement"
    rf"\(\"style\"\);\2\.id=\"\1\",\2\.textContent=({_STRING})"
)
_DECLARATIONS = re.compile(r"CSS_DECLARATIONS=(\[\[.*?\]\])[;,]")


def _js_string(literal: str) -> str:
    """Return the value of a JavaScript string literal in single or double quotes."""
    body = literal[1:-1]
    return re.sub(r"\\(.)", lambda m: {"n": "\n", "t": "\t"}.get(m.group(1), m.group(1)), body)


@dataclass(frozen=True)
class PlotlyAssets:
    """What the page needs to run plotly.js under a strict policy (module docstring).

    Attributes
    ----------
    global_css : str
        plotly.js's global rules as a stylesheet ("" if not found).
    bundled_style_id : str or None
        The element id plotly.js checks before adding its bundled stylesheet.
    bundled_css : str
        That stylesheet ("" if not found).
    style_attribute_hashes : tuple of str
        ``'sha256-...'`` sources for ``style-src-attr``.
    """

    global_css: str
    bundled_style_id: str | None
    bundled_css: str
    style_attribute_hashes: tuple[str, ...]

    @classmethod
    def from_script(cls, script: str) -> PlotlyAssets:
        """Read the assets out of plotly.min.js text."""
        rules: list[str] = []
        found = _GLOBAL_RULES.search(script)
        if found is not None:
            for key, value in _PAIR.findall(found.group(1)):
                selector = (
                    re.sub(r"^,", " ,", _js_string(key))
                    .replace("X", ".js-plotly-plot .plotly")
                    .replace("Y", ".plotly-notifier")
                )
                rules.append(f"{selector}{{{_js_string(value)}}}")
        bundled = _BUNDLED.search(script)
        styles = []
        declarations = _DECLARATIONS.search(script)
        if declarations is not None:
            pairs = json.loads(declarations.group(1))
            styles.append("".join(": ".join(pair) + "; " for pair in pairs))
        if 'attr("style","")' in script:  # colour bar fills are reset to an empty style
            styles.append("")
        hashes = [
            f"'sha256-{base64.b64encode(hashlib.sha256(style.encode()).digest()).decode()}'"
            for style in styles
        ]
        return cls(
            global_css="\n".join(reversed(rules)) + "\n",
            bundled_style_id=None if bundled is None else bundled.group(1),
            bundled_css="" if bundled is None else _js_string(bundled.group(3)),
            style_attribute_hashes=tuple(hashes),
        )


@cache
def plotly_assets(script_path: Path) -> PlotlyAssets:
    """:class:`PlotlyAssets` of the plotly.min.js at ``script_path`` (read once per process)."""
    return PlotlyAssets.from_script(script_path.read_text(encoding="utf-8"))
