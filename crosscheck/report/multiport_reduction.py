"""What `crosscheck reduce` prints for several ports: the matrices per frequency (text) or the JSON document.

The text folds each matrix with ``matrix_lines``; until multiport-out's ``report.multiport_text.matrix_lines``
(the same signature, folded at 80 columns) is on this branch, ``plain_matrix_lines`` stands in for it.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np
from rich.console import Console
from rich.markup import escape

from crosscheck.judge.result import CaseResult
from crosscheck.model.port_matrices import MatrixPoint
from crosscheck.model.values import format_eng, format_rect
from crosscheck.report.caution import CAUTION
from crosscheck.report.multiport_text import matrix_lines as folded_matrix_lines
from crosscheck.report.results_json import multiport_case_document, read_document, results_document
from crosscheck.report.untrusted import terminal_text


def plain_matrix_lines(label: str, matrix: np.ndarray, port_names: Sequence[str], width: int = 80) -> list[str]:
    """``label`` then the rows of a matrix (or a vector as one row), headed by port names; no folding."""
    m = np.asarray(matrix, dtype=complex)
    rows = m.reshape(1, -1) if m.ndim == 1 else m
    names = [terminal_text(n, keep_layout=False)[:12] for n in port_names]
    cells = [["-" if not np.isfinite(v) else format_rect(complex(v), sig=4) for v in row] for row in rows]
    size = max([len(c) for row in cells for c in row] + [len(n) for n in names])
    heads = names if m.ndim == 2 else [""]
    left = max(len(h) for h in heads)
    lines = [label, " " * left + "".join("  " + n.rjust(size) for n in names)]
    lines += [h.ljust(left) + "".join("  " + c.rjust(size) for c in row) for h, row in zip(heads, cells, strict=True)]
    return lines


matrix_lines = folded_matrix_lines
#: Reciprocity figure above which the text says "not reciprocal": far above rounding (~1e-16), far below any
#: controlled source that matters.
RECIPROCAL_BELOW = 1e-9


def point_lines(route: str, p: MatrixPoint, names: Sequence[str]) -> list[str]:
    """One route's point as text: voc, Z, isc, Y where they exist, then the figures and notes."""
    lines: list[str] = []
    if not np.all(np.isnan(p.voc.real)):
        lines += matrix_lines(f"{route} voc (V)", p.voc, names)
    for label, value in ((f"{route} Z (Ω)", p.z), (f"{route} isc (A)", p.isc), (f"{route} Y (S)", p.y)):
        if value is not None:
            lines += matrix_lines(label, value, names)
    figures = []
    if p.condition is not None:
        figures.append(f"condition {p.condition:.3g}")
    if p.z_condition is not None:
        figures.append(f"cond(Z) = cond(Y) {p.z_condition:.3g}")
    if p.reciprocity is not None:
        reciprocal = "" if p.reciprocity <= RECIPROCAL_BELOW else " (not reciprocal)"
        figures.append(f"reciprocity ||Z - Zᵀ||/||Z|| {p.reciprocity:.3g}{reciprocal}")
    if figures:
        lines.append(f"{route}: " + ", ".join(figures))
    lines += [f"{route}: {note}" for note in p.notes]
    return lines


def print_multiport(console: Console, result: CaseResult) -> None:
    """`reduce` with several ports: the ports, the matrices per frequency, the verdict and the caution."""
    print_multiport_points(console, result)
    if result.error:
        console.print(f"[bold magenta]error: {escape(result.error)}[/]")
    console.print(f"verdict: {result.verdict}")
    console.print(f"[dim]Caution: {CAUTION}[/]")


def print_multiport_points(console: Console, result: CaseResult) -> None:
    """The ports, the matrices per frequency from both routes, each frequency's verdict, hand values and limits
    (``verify --detail`` shows this for each multi-port case)."""
    part = result.multiport
    if part is None:
        return
    ports = ", ".join(f"{n} = ({a}, {b})" for n, (a, b) in zip(part.port_names, part.port_nodes, strict=True))
    console.print(escape(f"{terminal_text(result.title)}: {len(part.port_names)} ports: {terminal_text(ports)}"))
    for i, own in enumerate(part.own):
        console.print(f"[bold]{format_eng(own.freq_hz, 4, ' Hz')}[/]")
        lines = point_lines("own", own, part.port_names)
        if part.spice is not None:
            lines += point_lines("ngspice", part.spice[i], part.port_names)
        for line in lines:
            console.print(escape(line), soft_wrap=True)
        if part.checks:
            check = part.checks[i]
            z_error = "" if check.z_norm_error is None else f" (normwise Z error {check.z_norm_error:.3g})"
            console.print(escape(f"own vs ngspice: {check.verdict}{z_error}"))
            if check.verdict != "pass" and check.explanation:
                console.print(escape(check.explanation), soft_wrap=True)
    if part.spice is None and part.spice_note:
        console.print(escape(f"ngspice: {part.spice_note}"), soft_wrap=True)
    said = [(f"expect[{e.index}] {e.quantity}", e.verdict, e.explanation) for e in part.expectations]
    said += [(f"limit[{x.index}] {x.text}", x.verdict, x.explanation) for x in part.limits]
    for what, verdict, why in said:
        console.print(escape(f"{what}: {verdict}{' - ' + why if why else ''}"), soft_wrap=True)


def multiport_reduction_document(result: CaseResult, source_file: str) -> dict[str, Any]:
    """``reduce --format json`` with several ports: the run's header, the ports and per point own/spice."""
    doc = results_document([result])
    del doc["cases"]
    doc.update(
        {"netlist": source_file, "title": result.title, "excitation": result.excitation, "verdict": result.verdict}
    )
    if result.multiport is not None and result.multiport.ngspice_version:
        doc["ngspice_version"] = result.multiport.ngspice_version
    doc.update(multiport_case_document(result) or {})
    doc.update(read_document(result))
    if result.error is not None:
        doc["error"] = result.error
    return doc
