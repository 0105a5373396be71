"""Plain-text table and number cells shared by the planning results' text renderings."""

from __future__ import annotations

__all__ = ["number_text", "table_lines"]


def number_text(value: float | None, digits: int = 1) -> str:
    """Return a table cell: the value with ``digits`` decimals, ``-`` for None."""
    return "-" if value is None else f"{value:.{digits}f}"


def table_lines(header: list[str], rows: list[list[str]]) -> list[str]:
    """Return the lines of a left-aligned table: header, dashes, one line per row."""
    widths = [
        max(len(h), *(len(r[i]) for r in rows)) if rows else len(h) for i, h in enumerate(header)
    ]
    lines = ["  ".join(h.ljust(w) for h, w in zip(header, widths, strict=True))]
    lines.append("  ".join("-" * w for w in widths))
    lines += ["  ".join(c.ljust(w) for c, w in zip(r, widths, strict=True)) for r in rows]
    return lines
