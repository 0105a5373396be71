r"""Text taken from a request or a file, made safe to show in a one-line message.

Error messages quote what they were given (a column name, a label, a robot
name). Control characters in that text — NUL, line breaks, escape sequences
that a terminal would obey, the C1 range — are shown escaped
(``\x00``, ``\n``, ``\x1b``, ``\u2028``), so an error line stays one line
and shows exactly what was received (common practice, no source).
"""

from __future__ import annotations

import re

__all__ = ["printable"]

_CONTROL = re.compile("[\x00-\x1f\x7f-\x9f\u2028\u2029]")
_NAMED = {"\n": "\\n", "\r": "\\r", "\t": "\\t"}


def _escaped(match: re.Match[str]) -> str:
    char = match.group()
    if char in _NAMED:
        return _NAMED[char]
    code = ord(char)
    return f"\\x{code:02x}" if code < 0x100 else f"\\u{code:04x}"


def printable(text: str) -> str:
    """Return ``text`` with every control character written as its backslash escape.

    Control characters are C0, DEL, C1, line and paragraph separators; everything else unchanged.
    """
    return _CONTROL.sub(_escaped, text)
