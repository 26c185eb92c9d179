"""Aligned plain-text tables for the terminal."""

from __future__ import annotations

from typing import Iterable, Sequence

__all__ = ["render_table"]


def render_table(headers: Sequence[str], rows: Iterable[Sequence[object]], *, right: Iterable[int] = (),
                 indent: str = "") -> str:
    """Render ``rows`` under ``headers`` with columns padded to their widest cell;
    column indexes in ``right`` are right-aligned (numbers)."""
    rows = [[str(c) for c in row] for row in rows]
    right = set(right)
    widths = [len(h) for h in headers]
    for row in rows:
        for i, cell in enumerate(row):
            widths[i] = max(widths[i], len(cell))

    def line(cells: Sequence[str]) -> str:
        out = [c.rjust(widths[i]) if i in right else c.ljust(widths[i]) for i, c in enumerate(cells)]
        return (indent + "  ".join(out)).rstrip()

    sep = indent + "  ".join("-" * w for w in widths)
    return "\n".join([line(list(headers)), sep] + [line(r) for r in rows])
