"""Line charts against frequency as SVG text, written here: the HTML report's figures.

Why by hand: matplotlib (with its Agg or SVG back end) spent most of a figure's time laying out and
drawing tick labels and legends, well above the report's budget per case, and the figures need only
polylines, markers, shaded bands, dashed lines, ticks and text. A chart is plain data (``Panel``s in a
``Chart``); ``chart_svg`` turns it into one SVG document, the same bytes for the same chart. Every
string a chart holds may be user text: it reaches the SVG only through ``untrusted.svg_text``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from crosscheck.report.untrusted import svg_text

#: Pixels: the figure's width, a panel's plot height, and the space around each plot.
WIDTH = 800
PLOT_HEIGHT = 170
_LEFT, _RIGHT, _TITLE, _BELOW, _LEGEND_LINE, _GAP = 62, 14, 20, 34, 15, 18
_FONT = 'font-family="DejaVu Sans, Arial, sans-serif"'
#: Average advance of a character of the sans-serif font, as a fraction of the font size (for layout only).
_CHAR_WIDTH = 0.6


@dataclass
class Series:
    """One curve or set of markers. ``style``: ``line``, ``line+dots``, ``circles`` (open) or ``marker``
    (filled ``marker`` shapes with a black edge: o, X, D, s, ^ or *); ``dash``: an SVG dash pattern
    (``"5 3"``) for a line, so that lines of one colour stay apart."""

    label: str | None
    xs: np.ndarray
    ys: np.ndarray
    colour: str
    style: str = "line"
    marker: str = "o"
    width: float = 1.0
    dash: str | None = None


def _dash(s: Series) -> str:
    return f' stroke-dasharray="{s.dash}"' if s.dash else ""


@dataclass
class Band:
    """A shaded stretch from ``x0`` to ``x1`` between ``y0`` and ``y1`` (a limit's forbidden side)."""

    x0: float
    x1: float
    y0: float
    y1: float
    colour: str
    label: str | None = None


@dataclass
class HLine:
    """A dashed horizontal line at ``y`` from ``x0`` to ``x1`` (None: the panel's whole width)."""

    y: float
    colour: str
    x0: float | None = None
    x1: float | None = None
    label: str | None = None


@dataclass
class Panel:
    """One plot: a log frequency axis, a linear or log y axis, what is drawn on it and the range shown."""

    title: str
    xlabel: str = "frequency (Hz)"
    ylabel: str = ""
    ylog: bool = False
    xlim: tuple[float, float] = (1.0, 10.0)
    ylim: tuple[float, float] = (0.0, 1.0)
    series: list[Series] = field(default_factory=list)
    bands: list[Band] = field(default_factory=list)
    hlines: list[HLine] = field(default_factory=list)
    notes: list[tuple[str, str]] = field(default_factory=list)  # (text, "centre" | "corner")
    wide: bool = False  # spans both columns


@dataclass
class Chart:
    title: str
    panels: list[Panel]


def _num(v: float) -> str:
    return f"{v:.1f}".rstrip("0").rstrip(".")


_SUPERSCRIPT = str.maketrans("-0123456789", "⁻⁰¹²³⁴⁵⁶⁷⁸⁹")


def decade_label(x: float) -> str:
    """A log axis's tick label: 10³ for a decade, the number itself between decades."""
    if not x > 0 or not math.isfinite(x):
        return ""
    exponent = round(math.log10(x))
    if abs(math.log10(x) - exponent) < 1e-9:
        return "10" + str(exponent).translate(_SUPERSCRIPT)
    return f"{x:g}"


def log_ticks(lo: float, hi: float) -> tuple[list[float], list[float]]:
    """(labelled, unlabelled) ticks of a log axis over ``lo … hi``: decades (every k-th if there are many),
    with 2 and 5 between them; inside one decade, the 1-2-5 values are labelled, or linear ticks in a
    narrower range."""
    if not (0 < lo <= hi and math.isfinite(hi)):
        return [], []
    first, last = math.floor(math.log10(lo)), math.ceil(math.log10(hi))
    step = max(1, math.ceil((last - first) / 7))
    major = [10.0**e for e in range(first, last + 1) if e % step == 0]
    minor = [m * 10.0**e for e in range(first, last + 1) for m in (2.0, 5.0)] if step == 1 else []
    inside = [t for t in major if lo <= t * (1 + 1e-9) and t <= hi * (1 + 1e-9)]
    if len(inside) < 2:
        between = [t for t in sorted({*major, *minor}) if lo <= t <= hi]
        return (between if len(between) >= 2 else [t for t in linear_ticks(lo, hi) if t > 0]), []
    return inside, [t for t in minor if lo <= t <= hi]


def linear_ticks(lo: float, hi: float) -> list[float]:
    """About five ticks at a 1, 2, 2.5 or 5 times a power of ten step."""
    span = hi - lo
    if not (span > 0 and math.isfinite(span)):
        return [v for v in (lo, hi) if math.isfinite(v)][:1]
    raw = span / 5
    power = 10.0 ** math.floor(math.log10(raw))
    step = next(m * power for m in (1.0, 2.0, 2.5, 5.0, 10.0) if m * power >= raw)
    start = math.ceil(lo / step - 1e-9)
    return [float(f"{k * step:.12g}") + 0.0 for k in range(start, int(math.floor(hi / step + 1e-9)) + 1)]


class _Frame:
    """Data to pixels for one panel's plot area."""

    def __init__(self, panel: Panel, left: float, top: float, width: float, height: float) -> None:
        self.panel, self.left, self.top, self.width, self.height = panel, left, top, width, height
        self.x0, self.x1 = math.log10(panel.xlim[0]), math.log10(panel.xlim[1])
        lo, hi = panel.ylim
        y0, y1 = (math.log10(lo), math.log10(hi)) if panel.ylog else (lo, hi)
        self.scale = max(abs(y0), abs(y1)) or 1.0  # in units of the larger end: no overflow near 1e308
        self.y0, self.y1 = y0 / self.scale, y1 / self.scale

    def px(self, x: np.ndarray) -> np.ndarray:
        span = (self.x1 - self.x0) or 1.0
        return self.left + (np.log10(x) - self.x0) / span * self.width

    def py(self, y: np.ndarray) -> np.ndarray:
        values = (np.log10(y) if self.panel.ylog else y) / self.scale
        span = (self.y1 - self.y0) or 1.0
        return self.top + self.height - (values - self.y0) / span * self.height


def _drawable(panel: Panel, xs: np.ndarray, ys: np.ndarray) -> np.ndarray:
    ok = np.isfinite(xs) & np.isfinite(ys) & (xs > 0)
    return ok & (ys > 0) if panel.ylog else ok


def _polyline(frame: _Frame, s: Series) -> tuple[list[str], list[str]]:
    """The series' lines (to be clipped to the plot area) and its markers (drawn whole, even on the frame)."""
    xs, ys = np.asarray(s.xs, dtype=float), np.asarray(s.ys, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        ok = _drawable(frame.panel, xs, ys)
        px, py = frame.px(np.where(ok, xs, 1.0)), frame.py(np.where(ok, ys, 1.0))
    runs: list[list[str]] = [[]]
    for good, x, y in zip(ok, px, py):
        if good:
            runs[-1].append(f"{_num(x)},{_num(y)}")
        elif runs[-1]:
            runs.append([])  # a gap (a missing or undrawable value) breaks the line
    lines = []
    if s.style in ("line", "line+dots"):
        lines = [
            f'<polyline points="{" ".join(r)}" fill="none" stroke="{s.colour}" stroke-width="{s.width}"{_dash(s)}/>'
            for r in runs
            if len(r) > 1
        ]
    markers = [] if s.style == "line" else [_marker(s, float(x), float(y)) for good, x, y in zip(ok, px, py) if good]
    return lines, markers


def _marker(s: Series, x: float, y: float) -> str:
    if s.style == "line+dots":
        return f'<circle cx="{_num(x)}" cy="{_num(y)}" r="2" fill="{s.colour}"/>'
    if s.style == "circles":
        return f'<circle cx="{_num(x)}" cy="{_num(y)}" r="3.2" fill="none" stroke="{s.colour}" stroke-width="1.2"/>'
    return _shape(s.marker, x, y, 6.0, f'fill="{s.colour}" stroke="black" stroke-width="0.6"')


_SHAPES = {
    "X": [(-1, -0.6), (-0.6, -1), (0, -0.4), (0.6, -1), (1, -0.6), (0.4, 0), (1, 0.6), (0.6, 1), (0, 0.4)]
    + [(-0.6, 1), (-1, 0.6), (-0.4, 0)],
    "D": [(0, -1.2), (0.8, 0), (0, 1.2), (-0.8, 0)],
    "s": [(-0.8, -0.8), (0.8, -0.8), (0.8, 0.8), (-0.8, 0.8)],
    "^": [(0, -1), (0.95, 0.8), (-0.95, 0.8)],
    "*": [
        (
            math.sin(k * math.pi / 5) * (1.1 if k % 2 == 0 else 0.45),
            -math.cos(k * math.pi / 5) * (1.1 if k % 2 == 0 else 0.45),
        )
        for k in range(10)
    ],
}


def _shape(marker: str, x: float, y: float, size: float, paint: str) -> str:
    if marker not in _SHAPES:
        return f'<circle cx="{_num(x)}" cy="{_num(y)}" r="{_num(size * 0.8)}" {paint}/>'
    points = " ".join(f"{_num(x + dx * size)},{_num(y + dy * size)}" for dx, dy in _SHAPES[marker])
    return f'<polygon points="{points}" {paint}/>'


def _text(x: float, y: float, text: str, size: int = 11, anchor: str = "start", extra: str = "") -> str:
    return f'<text x="{_num(x)}" y="{_num(y)}" font-size="{size}" text-anchor="{anchor}"{extra}>{svg_text(text)}</text>'


def _axes(frame: _Frame) -> list[str]:
    """Frame, grid, ticks and their labels, and the axis labels."""
    p, left, top, w, h = frame.panel, frame.left, frame.top, frame.width, frame.height
    bottom, right = top + h, left + w
    out = []
    xmajor, xminor = log_ticks(*p.xlim)
    for ticks, grid_alpha in ((xminor, "0.12"), (xmajor, "0.25")):
        for x in frame.px(np.array(ticks, dtype=float)):
            out.append(
                f'<line x1="{_num(x)}" y1="{_num(top)}" x2="{_num(x)}" y2="{_num(bottom)}" '
                f'stroke="#000" stroke-opacity="{grid_alpha}" stroke-width="0.8"/>'
            )
    out += [
        _text(float(x), bottom + 14, decade_label(t), 10, "middle")
        for t, x in zip(xmajor, frame.px(np.array(xmajor, dtype=float)))
    ]
    ymajor: list[float] = []
    yminor: list[float] = []
    if p.series or p.hlines or p.bands:  # else nothing is drawn (a note says why): no y scale to read
        ymajor, yminor = log_ticks(*p.ylim) if p.ylog else (linear_ticks(*p.ylim), [])
    labels = [decade_label(t) for t in ymajor] if p.ylog else [f"{t:g}" for t in ymajor]
    for ticks, grid_alpha in ((yminor, "0.12"), (ymajor, "0.25")):
        for y in frame.py(np.array(ticks, dtype=float)):
            out.append(
                f'<line x1="{_num(left)}" y1="{_num(y)}" x2="{_num(right)}" y2="{_num(y)}" '
                f'stroke="#000" stroke-opacity="{grid_alpha}" stroke-width="0.8"/>'
            )
    out += [
        _text(left - 4, float(y) + 3.5, label, 10, "end")
        for label, y in zip(labels, frame.py(np.array(ymajor, dtype=float)))
    ]
    out.append(
        f'<rect x="{_num(left)}" y="{_num(top)}" width="{_num(w)}" height="{_num(h)}" '
        'fill="none" stroke="#000" stroke-width="0.8"/>'
    )
    out.append(_text(left + w / 2, bottom + 29, p.xlabel, 11, "middle"))
    if p.ylabel:
        out.append(
            _text(
                left - 48,
                top + h / 2,
                p.ylabel,
                11,
                "middle",
                f' transform="rotate(-90 {_num(left - 48)} {_num(top + h / 2)})"',
            )
        )
    return out


def _inside(p: Panel, x0: float | None, x1: float | None) -> np.ndarray:
    """A stretch of frequency cut to the panel's range (None: to its edge), so it can sit on the log axis."""
    lo, hi = p.xlim
    return np.array([lo if x0 is None else min(max(x0, lo), hi), hi if x1 is None else min(max(x1, lo), hi)])


def _content(frame: _Frame, clip: str) -> list[str]:
    """Bands, dashed lines and series, clipped to the plot area; then the notes."""
    p = frame.panel
    out = [f'<g clip-path="url(#{clip})">']
    for b in p.bands:
        xs, ys = frame.px(_inside(p, b.x0, b.x1)), frame.py(np.array([b.y0, b.y1]))
        out.append(
            f'<rect x="{_num(xs.min())}" y="{_num(ys.min())}" width="{_num(np.ptp(xs))}" '
            f'height="{_num(np.ptp(ys))}" fill="{b.colour}" fill-opacity="0.15"/>'
        )
    for line in p.hlines:
        xs = frame.px(_inside(p, line.x0, line.x1))
        y = float(frame.py(np.array([line.y]))[0])
        out.append(
            f'<line x1="{_num(xs[0])}" y1="{_num(y)}" x2="{_num(xs[1])}" y2="{_num(y)}" '
            f'stroke="{line.colour}" stroke-width="1.2" stroke-dasharray="5 3"/>'
        )
    drawn = [_polyline(frame, s) for s in p.series]
    out += [line for lines, _ in drawn for line in lines]
    out.append("</g>")
    out += [marker for _, markers in drawn for marker in markers]
    for text, where in p.notes:
        if where == "centre":
            out.append(_text(frame.left + frame.width / 2, frame.top + frame.height / 2, text, 11, "middle"))
        else:
            out.append(_text(frame.left + 4, frame.top + frame.height - 5, text, 9, "start", ' fill="#555"'))
    return out


def _legend_entries(p: Panel) -> list[tuple[str, str]]:
    """(sample, label) per labelled thing on the panel, once per label, in drawing order."""
    entries: dict[str, str] = {}
    for s in p.series:
        if s.label:
            sample = Series(None, np.array([]), np.array([]), s.colour, s.style, s.marker, s.width)
            parts = (
                []
                if s.style in ("circles", "marker")
                else [f'<line x1="0" y1="-4" x2="16" y2="-4" stroke="{s.colour}" stroke-width="{s.width}"{_dash(s)}/>']
            )
            if s.style != "line":
                parts.append(_marker(sample, 8.0, -4.0))
            entries.setdefault(s.label, "".join(parts))
    for line in p.hlines:
        if line.label:
            entries.setdefault(
                line.label,
                f'<line x1="0" y1="-4" x2="16" y2="-4" stroke="{line.colour}" '
                'stroke-width="1.2" stroke-dasharray="5 3"/>',
            )
    for b in p.bands:
        if b.label:
            entries.setdefault(
                b.label,
                f'<rect x="0" y="-8" width="16" height="9" fill="{b.colour}" '
                f'fill-opacity="0.3" stroke="{b.colour}" stroke-dasharray="3 2"/>',
            )
    return [(sample, label) for label, sample in entries.items()]


def _cut(text: str, limit: int) -> str:
    """At most ``limit`` characters, an ellipsis marking a cut: a line of user text stays on the figure."""
    return text if len(text) <= limit else text[: limit - 1] + "…"


def _legend_rows(p: Panel, width: float) -> list[list[tuple[str, str, float]]]:
    """Entries placed in rows that fit ``width``: (sample, label cut to 80 characters, x offset)."""
    rows: list[list[tuple[str, str, float]]] = []
    x = width
    for sample, label in _legend_entries(p):
        label = _cut(label, 80)
        size = 22 + len(label) * 10 * _CHAR_WIDTH + 12
        if x + size > width and (x > 0 or not rows):
            rows.append([])
            x = 0.0
        rows[-1].append((sample, label, x))
        x += size
    return rows


def _legend(rows: list[list[tuple[str, str, float]]], left: float, top: float) -> list[str]:
    out = []
    for i, row in enumerate(rows):
        y = top + (i + 1) * _LEGEND_LINE - 3
        for sample, label, x in row:
            out.append(f'<g transform="translate({_num(left + x)} {_num(y)})">{sample}</g>')
            out.append(_text(left + x + 22, y, label, 10))
    return out


def _rows(panels: list[Panel]) -> list[list[Panel]]:
    rows: list[list[Panel]] = []
    for p in panels:
        if p.wide or not rows or len(rows[-1]) == 2 or rows[-1][0].wide:
            rows.append([p])
        else:
            rows[-1].append(p)
    return rows


def chart_svg(chart: Chart) -> str:
    """The chart as one SVG document: a title, then its panels two to a row (a wide panel alone)."""
    body = [_text(WIDTH / 2, 20, _cut(chart.title, 110), 13, "middle")]
    top = 34.0
    clip = 0
    for row in _rows(chart.panels):
        cell = WIDTH / len(row)
        plot_width = cell - _LEFT - _RIGHT
        legends = [_legend_rows(p, plot_width) for p in row]
        legend_height = max(len(rows) for rows in legends) * _LEGEND_LINE
        for k, (p, legend) in enumerate(zip(row, legends)):
            left = k * cell + _LEFT
            body.append(_text(left + plot_width / 2, top + 13, p.title, 12, "middle"))
            body += _legend(legend, left, top + _TITLE)
            frame = _Frame(p, left, top + _TITLE + legend_height + 4, plot_width, PLOT_HEIGHT)
            body.append(
                f'<clipPath id="c{clip}"><rect x="{_num(frame.left)}" y="{_num(frame.top)}" '
                f'width="{_num(frame.width)}" height="{_num(frame.height)}"/></clipPath>'
            )
            body += _content(frame, f"c{clip}")
            body += _axes(frame)
            clip += 1
        top += _TITLE + legend_height + 4 + PLOT_HEIGHT + _BELOW + _GAP
    height = int(math.ceil(top))
    return (
        f'<svg xmlns="http://www.w3.org/2000/svg" width="{WIDTH}" height="{height}" '
        f'viewBox="0 0 {WIDTH} {height}" {_FONT}>'
        f'<rect width="{WIDTH}" height="{height}" fill="#fff"/>' + "".join(body) + "</svg>\n"
    )
