"""|Z_ij| against frequency from both engines: the one figure of a multi-port case in the HTML report.

One small figure per case, one axes: each entry of Z is a line of the own route and, where ngspice ran, the
same entry as open markers, so a disagreement shows as markers off their line. A reciprocal Z (Z = Z^T to
``RECIPROCAL_REL``) draws only the entries on and above the diagonal, since the others would lie on top of
them; the legend says so. Drawn with matplotlib's Agg canvas on a plain ``Figure`` (never registered with
pyplot) straight to PNG bytes, at a low resolution, so a figure costs a few tens of milliseconds.
"""

from __future__ import annotations

import base64
import io
from collections.abc import Sequence
from typing import TYPE_CHECKING

import numpy as np

from crosscheck.model.port_matrices import MatrixPoint

if TYPE_CHECKING:
    from crosscheck.judge.result import CaseResult

#: Okabe & Ito's colour-blind-safe palette ("Color Universal Design", Okabe and Ito 2008), as in report/plots.
PALETTE = ("#0072B2", "#E69F00", "#009E73", "#D55E00", "#CC79A7", "#56B4E9", "#000000", "#F0E442")
#: Line styles cycled with the colours, so that more entries than colours stay apart (and colour is not the
#: only sign).
STYLES = ("-", "--", "-.", ":")
#: ||Z - Z^T|| / ||Z|| below which Z counts as reciprocal for drawing (rounding of a reciprocal network).
RECIPROCAL_REL = 1e-9
#: More entries than this and only the diagonal and the first row are drawn (a legend of 64 lines helps nobody).
MAX_LINES = 16


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
    """The legend text of Z_ij; port names are user text: a ``$`` would start matplotlib's math mode."""
    short = [str(n)[:10].replace("\\", "\\\\").replace("$", r"\$") for n in names]
    return f"|Z({short[i]},{short[j]})|"


def z_magnitude_figure(
    freqs_hz: Sequence[float], own: np.ndarray, spice: np.ndarray | None, port_names: Sequence[str], dpi: int = 72
) -> bytes:
    """PNG bytes of |Z_ij| (ohm) against frequency: the own route as lines, ngspice as open markers.

    ``own`` and ``spice`` have shape (F, n, n); entries that do not exist (no Thevenin form) are NaN and left
    out. Log axes where the values allow (frequencies above 0 Hz, magnitudes above 0 ohm)."""
    from matplotlib.figure import Figure  # start-up time: matplotlib only when an HTML report is drawn

    f = np.asarray(freqs_hz, dtype=float)
    z_own = np.abs(np.asarray(own, dtype=complex))
    z_spice = None if spice is None else np.abs(np.asarray(spice, dtype=complex))
    n = z_own.shape[1]
    fig = Figure(figsize=(6.4, 3.6))
    ax = fig.add_axes((0.12, 0.14, 0.84, 0.78))  # fixed margins: tight_layout would double the cost
    for k, (i, j) in enumerate(_entries(np.asarray(own, dtype=complex), n)):
        colour, style = PALETTE[k % len(PALETTE)], STYLES[(k // len(PALETTE)) % len(STYLES)]
        ax.plot(
            f,
            z_own[:, i, j],
            color=colour,
            ls=style,
            lw=1.5,
            marker="." if len(f) < 3 else None,
            label=_label(port_names, i, j),
        )
        if z_spice is not None:
            ax.plot(f, z_spice[:, i, j], color=colour, ls="none", marker="o", ms=4, mfc="none")
    positive_f = bool(np.all(f > 0)) and len(f) > 1 and f.max() / f.min() >= 10
    values = np.concatenate([z_own.ravel(), [] if z_spice is None else z_spice.ravel()])
    values = values[np.isfinite(values)]
    if positive_f:
        ax.set_xscale("log")
    if values.size and values.min() > 0 and values.max() / values.min() >= 10:
        ax.set_yscale("log")
    ax.set_xlabel("frequency (Hz)")
    ax.set_ylabel("|Z| (ohm)")
    source = "lines: crosscheck" + ("; open circles: ngspice" if z_spice is not None else "; ngspice not run")
    ax.set_title(source, fontsize=9)
    ax.grid(True, alpha=0.3)
    ax.legend(fontsize=7, ncols=2 if len(ax.lines) > 8 else 1, loc="best")
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=dpi, metadata={"Software": None})
    return buffer.getvalue()


def _stacked(points: Sequence[MatrixPoint] | None, n: int) -> np.ndarray | None:
    """(F, n, n) Z of the points, NaN where a point has no Z."""
    if points is None:
        return None
    blank = np.full((n, n), np.nan, dtype=complex)
    return np.array([blank if p.z is None else p.z for p in points], dtype=complex)


def case_z_figure(result: CaseResult, dpi: int = 72) -> bytes | None:
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
    return z_magnitude_figure(freqs, own, spice, [str(name) for name in multiport.port_names], dpi=dpi)


CAPTION = (
    "|Z_ij| of the multi-port reduction against frequency: crosscheck as lines, ngspice as open circles of the "
    "same colour; a reciprocal Z shows the entries on and above the diagonal only."
)


def case_figure_html(result: CaseResult) -> str:
    """The HTML report's ``<figure>`` for a multi-port case (PNG as a data URI, fixed caption), or ""."""
    png = case_z_figure(result)
    if png is None:
        return ""
    uri = "data:image/png;base64," + base64.b64encode(png).decode("ascii")
    return (
        f'<div class="figures"><figure class="sweep"><img class="plot" src="{uri}" '
        f'alt="|Z_ij| against frequency from both engines"><figcaption>{CAPTION}</figcaption></figure></div>'
    )
