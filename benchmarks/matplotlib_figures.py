"""The multi-port and spread figures as matplotlib drew them before ``svg_chart``/``svg_bars`` replaced them.

Kept only so that ``report_figures.py`` can time the figures before and after in one run: the same panels
(|Z_ij| lines and ngspice circles; ranked sensitivity bars and histograms of |q| and phase with limit
lines) on matplotlib's Agg canvas, a plain ``Figure`` never registered with pyplot, written to PNG bytes.
The data each panel shows comes from the report modules themselves, so both versions draw the same numbers.
"""

from __future__ import annotations

import io
from typing import Any

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from crosscheck.judge.result import CaseResult
from crosscheck.report import multiport_plots, spread_plots
from crosscheck.report.svg_bars import Bars, Histogram


def multiport_png(result: CaseResult) -> bytes | None:
    """|Z_ij| against frequency as PNG bytes (72 dpi), from the same chart the SVG figure draws."""
    multiport = result.multiport
    if multiport is None or not multiport.own:
        return None
    n = len(multiport.port_names)
    own = multiport_plots._stacked(multiport.own, n)
    if own is None:
        return None
    spice = multiport_plots._stacked(multiport.spice, n) if multiport.spice else None
    freqs = [p.freq_hz for p in multiport.own]
    chart = multiport_plots.z_magnitude_chart(freqs, own, spice, [str(name) for name in multiport.port_names])
    panel = chart.panels[0]
    fig = Figure(figsize=(6.4, 3.6))
    ax = fig.add_axes((0.12, 0.14, 0.84, 0.78))  # fixed margins, as the matplotlib version had
    for s in panel.series:
        if s.style == "circles":
            ax.plot(s.xs, s.ys, color=s.colour, ls="none", marker="o", ms=4, mfc="none")
        else:
            ax.plot(s.xs, s.ys, color=s.colour, lw=1.5, label=(s.label or "").replace("$", r"\$"))
    ax.set_xscale("log")
    if panel.ylog:
        ax.set_yscale("log")
    ax.set_xlabel(panel.xlabel)
    ax.set_ylabel(panel.ylabel)
    ax.set_title(panel.title, fontsize=9)
    ax.grid(True, alpha=0.3)
    ax.legend(fontsize=7, ncols=2 if len(ax.lines) > 8 else 1, loc="best")
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=72, metadata={"Software": None})
    return buffer.getvalue()


def _draw(ax: Any, panel: Bars | Histogram) -> None:
    ax.set_title(panel.title, fontsize=9)
    if isinstance(panel, Bars):
        ax.barh(panel.labels[::-1], panel.values[::-1], color=panel.colour)
        ax.axvline(0.0, color="#000000", lw=0.6)
        ax.tick_params(labelsize=8)
        return
    edges = np.asarray(panel.edges, dtype=float)
    # 40 rectangles, as ``ax.hist`` draws them
    ax.bar(edges[:-1], panel.counts, width=np.diff(edges), align="edge", color=panel.colour, edgecolor="none")
    for bound in panel.limits:
        ax.axvline(bound, color=panel.limit_colour, ls="--", lw=1.4, label="limit")
    ax.set_xlabel(panel.xlabel, fontsize=8)
    ax.tick_params(labelsize=7)


def spread_png(result: CaseResult) -> bytes | None:
    """The spread figure as PNG bytes (80 dpi, constrained layout, as the matplotlib version had)."""
    rows = spread_plots.spread_panels(result)
    if rows is None:
        return None
    title, panels = rows
    fig = Figure(figsize=(10.5, 2.6 * len(panels)), dpi=80, layout="constrained")
    FigureCanvasAgg(fig)
    axes = fig.subplots(len(panels), 3, squeeze=False)
    fig.suptitle(title, fontsize=10)
    for r, row in enumerate(panels):
        for c, panel in enumerate(row):
            _draw(axes[r][c], panel)
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png")
    return buffer.getvalue()
