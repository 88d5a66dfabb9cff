"""Ranked bars and histograms as SVG text, written here: the spread figure of the HTML report.

The sibling of ``svg_chart`` (line charts against frequency) for panels whose x axis is linear: horizontal
bars, one per named thing, largest first, and histograms with dashed limit lines. A panel is plain data
(``Bars``, ``Histogram``); ``grid_svg`` lays panels out in rows of equal cells and returns one SVG document,
the same bytes for the same panels. Labels and titles may be user text (part names, a case title): they
reach the SVG only through ``svg_chart``'s text element, which passes them through ``untrusted.svg_text``.
Each panel is a ``<g data-panel="bars|histogram">``; a bar carries its value as ``data-value``, a histogram
bin its count as ``data-count`` and a limit line its bound as ``data-limit``, so a reader (or a test) can
read the numbers back.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from crosscheck.report.svg_chart import _CHAR_WIDTH, _FONT, _cut, _num, _text, linear_ticks

#: Pixels: the figure's width, a panel's plot height, the space for a panel's title and for its x axis.
WIDTH = 840
PLOT_HEIGHT = 130
_TITLE, _BELOW, _GAP = 22, 32, 10
#: Space left of a bar panel's plot for the bar labels, and of a histogram's for its count labels.
_BAR_LABELS, _COUNT_LABELS, _RIGHT = 86, 40, 12
#: Characters of a bar's label kept (a part name is cut with an ellipsis).
LABEL_CHARS = 13
#: Fraction of the x span left free either side of the bars, bins and limit lines.
MARGIN = 0.05


@dataclass
class Bars:
    """Horizontal bars drawn top to bottom in the order given; ``note`` is shown instead when there are none."""

    title: str
    labels: list[str]
    values: list[float]
    colour: str
    xlabel: str = ""
    note: str = "nothing to draw"


@dataclass
class Histogram:
    """Bins (``edges`` one longer than ``counts``) with dashed vertical lines at ``limits``."""

    title: str
    edges: np.ndarray
    counts: np.ndarray
    colour: str
    xlabel: str = ""
    limits: list[float] = field(default_factory=list)
    limit_colour: str = "#D55E00"
    note: str = "no samples"


class _Axis:
    """Data to pixels along a linear axis."""

    def __init__(self, lo: float, hi: float, start: float, length: float, flip: bool = False) -> None:
        self.lo, self.span = lo, (hi - lo) or 1.0
        self.start, self.length, self.flip = start, length, flip

    def __call__(self, value: float) -> float:
        fraction = (value - self.lo) / self.span
        return self.start + (1.0 - fraction if self.flip else fraction) * self.length


def _padded(values: list[float]) -> tuple[float, float]:
    """The range of ``values`` with ``MARGIN`` of its span either side (a span of 1 around one value)."""
    lo, hi = min(values), max(values)
    span = hi - lo
    if not (span > 0 and math.isfinite(span)):
        return (lo - 0.5 * (abs(lo) or 1.0), hi + 0.5 * (abs(hi) or 1.0)) if math.isfinite(span) else (lo, hi)
    return lo - MARGIN * span, hi + MARGIN * span


def _x_axis(x: _Axis, top: float, lo: float, hi: float, label: str) -> list[str]:
    """Grid lines, tick labels and the label of a linear x axis under a plot from ``top``."""
    bottom = top + PLOT_HEIGHT
    out = []
    ticks = linear_ticks(lo, hi)
    widest = max((len(f"{t:g}") for t in ticks), default=0) * 9 * _CHAR_WIDTH + 6
    every = max(1, math.ceil(widest / (x.length / max(len(ticks) - 1, 1))))  # labels that would touch: every k-th
    for k, t in enumerate(ticks):
        px = _num(x(t))
        out.append(
            f'<line x1="{px}" y1="{_num(top)}" x2="{px}" y2="{_num(bottom)}" '
            'stroke="#000" stroke-opacity="0.25" stroke-width="0.8"/>'
        )
        if k % every == 0:
            out.append(_text(x(t), bottom + 12, f"{t:g}", 9, "middle"))
    if label:
        out.append(_text(x.start + x.length / 2, bottom + 25, label, 10, "middle"))
    return out


def _frame(left: float, top: float, width: float) -> str:
    return (
        f'<rect x="{_num(left)}" y="{_num(top)}" width="{_num(width)}" height="{PLOT_HEIGHT}" '
        'fill="none" stroke="#000" stroke-width="0.8"/>'
    )


def _bars(panel: Bars, left: float, top: float, width: float) -> list[str]:
    """One bar per label, largest first from the top, a line at zero, the labels to the left."""
    plot_left = left + _BAR_LABELS
    plot_width = width - _BAR_LABELS - _RIGHT
    if not panel.values:
        return [
            _frame(plot_left, top, plot_width),
            _text(plot_left + plot_width / 2, top + PLOT_HEIGHT / 2, panel.note),
        ]
    lo, hi = _padded([0.0, *panel.values])
    x = _Axis(lo, hi, plot_left, plot_width)
    slot = PLOT_HEIGHT / len(panel.values)
    out = _x_axis(x, top, lo, hi, panel.xlabel)
    for k, (label, value) in enumerate(zip(panel.labels, panel.values)):
        x0, x1 = sorted((x(0.0), x(value)))
        y = top + k * slot + 0.15 * slot
        out.append(
            f'<rect x="{_num(x0)}" y="{_num(y)}" width="{_num(x1 - x0)}" height="{_num(0.7 * slot)}" '
            f'fill="{panel.colour}" data-value="{value:.6g}"/>'
        )
        out.append(_text(plot_left - 4, y + 0.35 * slot + 3.5, _cut(label, LABEL_CHARS), 9, "end"))
    zero = _num(x(0.0))
    out.append(
        f'<line x1="{zero}" y1="{_num(top)}" x2="{zero}" y2="{_num(top + PLOT_HEIGHT)}" stroke="#000" stroke-width="0.6"/>'
    )
    return [*out, _frame(plot_left, top, plot_width)]


def _histogram(panel: Histogram, left: float, top: float, width: float) -> list[str]:
    """One rectangle per non-empty bin, a count axis, and a dashed line (and a legend) per limit."""
    plot_left = left + _COUNT_LABELS
    plot_width = width - _COUNT_LABELS - _RIGHT
    counts = np.asarray(panel.counts, dtype=int)
    if not counts.sum():
        return [
            _frame(plot_left, top, plot_width),
            _text(plot_left + plot_width / 2, top + PLOT_HEIGHT / 2, panel.note),
        ]
    edges = [float(e) for e in panel.edges]
    limits = [b for b in panel.limits if math.isfinite(b)]
    lo, hi = _padded([edges[0], edges[-1], *limits])
    x = _Axis(lo, hi, plot_left, plot_width)
    y = _Axis(0.0, float(counts.max()) * 1.05, top, PLOT_HEIGHT, flip=True)
    out = _x_axis(x, top, lo, hi, panel.xlabel)
    for t in [t for t in linear_ticks(0.0, float(counts.max())) if t == int(t)]:  # counts are whole
        out.append(_text(plot_left - 4, y(t) + 3.5, f"{t:g}", 9, "end"))
    for k, count in enumerate(counts):
        if count:
            x0, x1 = x(edges[k]), x(edges[k + 1])
            out.append(
                f'<rect x="{_num(x0)}" y="{_num(y(count))}" width="{_num(max(x1 - x0, 0.8))}" '
                f'height="{_num(y(0.0) - y(count))}" fill="{panel.colour}" data-count="{int(count)}"/>'
            )
    for bound in limits:
        px = _num(x(bound))
        out.append(
            f'<line x1="{px}" y1="{_num(top)}" x2="{px}" y2="{_num(top + PLOT_HEIGHT)}" stroke="{panel.limit_colour}" '
            f'stroke-width="1.4" stroke-dasharray="5 3" data-limit="{bound:.9g}"/>'
        )
    if limits:
        legend_x, legend_y = plot_left + plot_width - 44, top + PLOT_HEIGHT + 25  # beside the axis label
        out.append(
            f'<line x1="{_num(legend_x)}" y1="{_num(legend_y - 3)}" x2="{_num(legend_x + 16)}" '
            f'y2="{_num(legend_y - 3)}" stroke="{panel.limit_colour}" stroke-width="1.4" stroke-dasharray="5 3"/>'
        )
        out.append(_text(legend_x + 20, legend_y, "limit", 9))
    return [*out, _frame(plot_left, top, plot_width)]


def grid_svg(title: str, rows: list[list[Bars | Histogram]]) -> str:
    """The panels as one SVG document: a title, then each row's panels side by side in equal cells."""
    body = [_text(WIDTH / 2, 18, _cut(title, 110), 13, "middle")]
    top = 28.0
    for row in rows:
        cell = WIDTH / max(len(row), 1)
        for k, panel in enumerate(row):
            left = k * cell
            kind, drawn = (
                ("bars", _bars(panel, left, top + _TITLE, cell))
                if isinstance(panel, Bars)
                else ("histogram", _histogram(panel, left, top + _TITLE, cell))
            )
            heading = _text(left + cell / 2, top + 14, _cut(panel.title, 40), 11, "middle")
            body += [f'<g data-panel="{kind}">', heading, *drawn, "</g>"]
        top += _TITLE + PLOT_HEIGHT + _BELOW + _GAP
    height = int(math.ceil(top))
    return (
        f'<svg xmlns="http://www.w3.org/2000/svg" width="{WIDTH}" height="{height}" '
        f'viewBox="0 0 {WIDTH} {height}" {_FONT}>'
        f'<rect width="{WIDTH}" height="{height}" fill="#fff"/>' + "".join(body) + "</svg>\n"
    )
