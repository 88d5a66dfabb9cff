"""A port matrix (Z, Y) or vector (voc, isc) as plain text lines that fit a terminal's width.

A matrix of n ports is n columns of complex numbers; at 4 significant figures an entry such as
``-12.35m - j1.234k`` takes up to 17 characters, so four or five ports already pass 80 columns. Rather than
wrap lines (which scrambles the columns), the matrix is folded: its columns are cut into blocks that fit
``width``, each block printed as a complete sub-matrix under a heading saying which columns it holds, the way
numerical packages print wide arrays. Port names are user text: they are made inert for a terminal and cut to
``NAME_WIDTH`` characters.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from crosscheck.model.values import format_rect
from crosscheck.report.untrusted import terminal_text

#: Significant figures of each entry (the reports' usual precision; JSON and CSV carry every digit).
SIG = 4
#: Longest port name shown as a row or column heading; longer names are cut and end in "~".
NAME_WIDTH = 12
#: Spaces between columns.
GAP = 2


def _name(text: str) -> str:
    shown = terminal_text(text, keep_layout=False)
    return shown if len(shown) <= NAME_WIDTH else shown[: NAME_WIDTH - 1] + "~"


def _cell(value: complex) -> str:
    if not np.isfinite(value):
        return "-"
    return format_rect(complex(value), sig=SIG)


def _blocks(cell_width: int, label_width: int, columns: int, width: int) -> list[range]:
    """Consecutive column ranges, each as many columns as fit in ``width`` (at least one)."""
    per_block = max(1, (width - label_width) // (cell_width + GAP))
    return [range(start, min(start + per_block, columns)) for start in range(0, columns, per_block)]


def matrix_lines(label: str, matrix: np.ndarray, port_names: Sequence[str], width: int = 80) -> list[str]:
    """``label`` and the matrix (n, n), or a vector (n,) shown as one row, folded at ``width`` columns.

    Rows and columns are headed by the port names in order; a block that does not hold every column says
    which it holds (``columns 1-4 of 6``)."""
    m = np.asarray(matrix, dtype=complex)
    rows = m.reshape(1, -1) if m.ndim == 1 else m
    names = [_name(n) for n in port_names]
    if rows.shape[1] != len(names):
        raise ValueError(f"{rows.shape[1]} columns for {len(names)} port names: give one name per port")
    cells = [[_cell(v) for v in row] for row in rows]
    row_heads = names if m.ndim == 2 else [""]
    cell_width = max([len(c) for row in cells for c in row] + [len(n) for n in names])
    label_width = max(len(h) for h in row_heads)
    blocks = _blocks(cell_width, label_width, len(names), width)
    lines: list[str] = []
    for block in blocks:
        part = "" if len(blocks) == 1 else f" (columns {block.start + 1}-{block.stop} of {len(names)})"
        lines.append(f"{label}{part}")
        head = " " * label_width + "".join(" " * GAP + names[j].rjust(cell_width) for j in block)
        lines.append(head.rstrip())
        for head_name, row in zip(row_heads, cells, strict=True):
            body = "".join(" " * GAP + row[j].rjust(cell_width) for j in block)
            lines.append(head_name.ljust(label_width) + body)
    return lines
