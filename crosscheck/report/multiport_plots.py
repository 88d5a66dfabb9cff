"""|Z_ij| against frequency from both engines: the one figure of a multi-port case in the HTML report.

One small figure per case, one panel: each entry of Z is a line of the own route and, where ngspice ran, the
same entry as open circles, so a disagreement shows as circles off their line. A reciprocal Z (Z = Z^T to
``RECIPROCAL_REL``) draws only the entries on and above the diagonal, since the others would lie on top of
them; the caption says so. Built as a ``svg_chart.Chart`` and written as SVG text by ``svg_chart.chart_svg``
(no plotting library is loaded); port names reach the SVG only through ``untrusted.svg_text`` there.
"""

from __future__ import annotations

import base64
from collections.abc import Sequence
from typing import TYPE_CHECKING

import numpy as np

from crosscheck.model.port_matrices import MatrixPoint
from crosscheck.report.plots import fit_y
from crosscheck.report.svg_chart import Chart, Panel, Series, chart_svg

if TYPE_CHECKING:
    from crosscheck.judge.result import CaseResult

#: Okabe & Ito's colour-blind-safe palette ("Color Universal Design", Okabe and Ito 2008), as in report/plots.
PALETTE = ("#0072B2", "#E69F00", "#009E73", "#D55E00", "#CC79A7", "#56B4E9", "#000000", "#F0E442")
#: SVG dash patterns cycled with the colours (solid first), so that more entries than colours stay apart
#: (and colour is not the only sign).
DASHES = (None, "6 3", "6 2 1.5 2", "1.5 2")
#: ||Z - Z^T|| / ||Z|| below which Z counts as reciprocal for drawing (rounding of a reciprocal network).
RECIPROCAL_REL = 1e-9
#: More entries than this and only the diagonal and the first row are drawn (a legend of 64 lines helps nobody).
MAX_LINES = 16
#: Characters of a port name kept in a legend entry.
NAME_CHARS = 10


def _entries(own: np.ndarray, n: int) -> list[tuple[int, int]]:
    """The (i, j) drawn: all, the upper triangle when Z is reciprocal, fewer when there are too many."""
    finite = np.nan_to_num(own)
    norm = np.linalg.norm(finite)
    reciprocal = norm == 0 or np.linalg.norm(finite - np.swapaxes(finite, 1, 2)) <= RECIPROCAL_REL * norm
    pairs = [(i, j) for i in range(n) for j in range(n) if not reciprocal or j >= i]
    if len(pairs) > MAX_LINES:
        pairs = [(i, i) for i in range(n)] + [(0, j) for j in range(1, n)]
    return pairs[:MAX_LINES]


def _label(names: Sequence[str], i: int, j: int) -> str:
    """The legend text of Z_ij (port names are user text: ``chart_svg`` makes them inert)."""
    short = [str(name)[:NAME_CHARS] for name in names]
    return f"|Z({short[i]},{short[j]})|"


def _x_range(f: np.ndarray) -> tuple[float, float]:
    """The frequencies drawn, half a decade either side of a single one."""
    lo, hi = float(f.min()), float(f.max())
    return (lo / 3.0, hi * 3.0) if hi <= lo else (lo, hi)


def z_magnitude_chart(
    freqs_hz: Sequence[float], own: np.ndarray, spice: np.ndarray | None, port_names: Sequence[str]
) -> Chart:
    """|Z_ij| (ohm) against frequency: the own route as lines, ngspice as open circles of the same colour.

    ``own`` and ``spice`` have shape (F, n, n); entries that do not exist (no Thevenin form) are NaN and left
    out, and so are frequencies of 0 Hz (the axis is logarithmic; the tables hold them). The y axis is
    logarithmic when the magnitudes are all above 0 ohm and span a decade or more."""
    f = np.asarray(freqs_hz, dtype=float)
    keep = f > 0
    z_own = np.abs(np.asarray(own, dtype=complex))[keep]
    z_spice = None if spice is None else np.abs(np.asarray(spice, dtype=complex))[keep]
    f = f[keep]
    source = "lines: crosscheck" + ("; open circles: ngspice" if z_spice is not None else "; ngspice not run")
    panel = Panel(source, ylabel="|Z| (ohm)", wide=True)
    if not f.size:
        panel.notes.append(("no frequency above 0 Hz to draw", "centre"))
        return Chart("|Z_ij| against frequency", [panel])
    panel.xlim = _x_range(f)
    style = "line" if len(f) >= 3 else "line+dots"
    for k, (i, j) in enumerate(_entries(np.asarray(own, dtype=complex)[keep], z_own.shape[1])):
        colour, dash = PALETTE[k % len(PALETTE)], DASHES[(k // len(PALETTE)) % len(DASHES)]
        panel.series.append(Series(_label(port_names, i, j), f, z_own[:, i, j], colour, style, width=1.5, dash=dash))
        if z_spice is not None:
            panel.series.append(Series(None, f, z_spice[:, i, j], colour, "circles"))
    values = np.concatenate([z_own.ravel(), [] if z_spice is None else z_spice.ravel()])
    values = values[np.isfinite(values)]
    panel.ylog = bool(values.size and values.min() > 0 and values.max() / values.min() >= 10)
    fit_y(panel)
    return Chart("|Z_ij| against frequency", [panel])


def z_magnitude_figure(
    freqs_hz: Sequence[float], own: np.ndarray, spice: np.ndarray | None, port_names: Sequence[str]
) -> str:
    """The SVG text of ``z_magnitude_chart``."""
    return chart_svg(z_magnitude_chart(freqs_hz, own, spice, port_names))


def _stacked(points: Sequence[MatrixPoint] | None, n: int) -> np.ndarray | None:
    """(F, n, n) Z of the points, NaN where a point has no Z."""
    if points is None:
        return None
    blank = np.full((n, n), np.nan, dtype=complex)
    return np.array([blank if p.z is None else p.z for p in points], dtype=complex)


def case_z_figure(result: CaseResult) -> str | None:
    """The figure of a ``CaseResult`` with a multi-port part (``result.multiport``), or None without one or when
    the own route gave no Z at any frequency. The HTML report calls this once per case."""
    multiport = result.multiport
    if multiport is None or not multiport.own:
        return None
    n = len(multiport.port_names)
    own = _stacked(multiport.own, n)
    if own is None or np.all(np.isnan(own)):
        return None
    spice = _stacked(multiport.spice, n) if multiport.spice and len(multiport.spice) == len(multiport.own) else None
    freqs = [p.freq_hz for p in multiport.own]
    return z_magnitude_figure(freqs, own, spice, [str(name) for name in multiport.port_names])


CAPTION = (
    "|Z_ij| of the multi-port reduction against frequency: crosscheck as lines, ngspice as open circles of the "
    "same colour; a reciprocal Z shows the entries on and above the diagonal only; DC points, if any, are in the "
    "tables only."
)


def case_figure_html(result: CaseResult) -> str:
    """The HTML report's ``<figure>`` for a multi-port case (SVG as a data URI shown through ``<img>``, as the
    one-port figures are; fixed caption), or ""."""
    svg = case_z_figure(result)
    if svg is None:
        return ""
    uri = "data:image/svg+xml;base64," + base64.b64encode(svg.encode("utf-8")).decode("ascii")
    return (
        f'<div class="figures"><figure class="sweep"><img class="plot" src="{uri}" '
        f'alt="|Z_ij| against frequency from both engines"><figcaption>{CAPTION}</figcaption></figure></div>'
    )
