"""Plots of a swept case for the HTML report: both engines against frequency, the error, limits and hand values.

One figure per case (magnitude and phase of Z_th and V_th, and the solver-vs-SPICE error
against its tolerance), rendered with matplotlib's Agg canvas straight to PNG bytes. The
figure is a plain ``Figure``, never registered with pyplot, so nothing global changes and
nothing stays open after the call.
"""

from __future__ import annotations

import io
import math
import threading
from collections.abc import Sequence
from typing import Any

import numpy as np

from crosscheck.judge.records import LimitCheck
from crosscheck.judge.result import CaseResult

#: A case needs at least this many frequencies to be drawn as a sweep.
MIN_SWEEP_POINTS = 3
#: Errors of exactly zero cannot sit on a log axis; they are drawn here and the axis says so.
ERROR_FLOOR = 1e-18

#: Okabe & Ito's colour-blind-safe palette ("Color Universal Design", Okabe and Ito 2008): eight colours
#: that stay distinct under protanopia, deuteranopia and tritanopia.
OKABE_ITO = {
    "black": "#000000",
    "orange": "#E69F00",
    "sky blue": "#56B4E9",
    "bluish green": "#009E73",
    "yellow": "#F0E442",
    "blue": "#0072B2",
    "vermillion": "#D55E00",
    "reddish purple": "#CC79A7",
}
#: One colour per verdict, each a different Okabe–Ito colour; reports also spell the verdict (and the HTML
#: badge adds a symbol), so colour is never the only sign.
VERDICT_COLOURS = {
    "pass": OKABE_ITO["bluish green"],
    "fail": OKABE_ITO["vermillion"],
    "error": OKABE_ITO["reddish purple"],
    "unavailable": OKABE_ITO["black"],
    "drift": OKABE_ITO["sky blue"],
}
#: A symbol per verdict, so that a verdict is told by shape as well as by colour (and its word).
VERDICT_SYMBOLS = {"pass": "✓", "fail": "✗", "error": "!", "unavailable": "∅", "drift": "Δ"}
#: Matplotlib markers per verdict, for hand values drawn on the plots.
_VERDICT_MARKERS = {"pass": "o", "fail": "X", "error": "D", "unavailable": "s", "drift": "^"}
#: Fraction of the y span left free above and below the data and limits.
MARGIN = 0.05

_OWN: dict[str, Any] = dict(color=OKABE_ITO["blue"], lw=1.6, label="crosscheck")
_SPICE: dict[str, Any] = dict(
    color=OKABE_ITO["orange"], marker="o", ms=4.5, ls="none", mfc="none", mew=1.2, label="ngspice"
)
_VERDICT_COLOUR = VERDICT_COLOURS
_FAIL = VERDICT_COLOURS["fail"]
_ERR_COLOURS = {"vth": OKABE_ITO["blue"], "zth": OKABE_ITO["orange"], "in": OKABE_ITO["bluish green"]}
_PANELS = {
    ("abs", "zth"): "zmag",
    ("abs", "vth"): "vmag",
    ("phase", "zth"): "zph",
    ("phase", "vth"): "vph",
    ("db", "zth"): "zmag",
    ("db", "vth"): "vmag",
}


def is_swept(result: CaseResult) -> bool:
    return result.own is not None and sum(1 for eq in result.own if eq.freq_hz > 0) >= MIN_SWEEP_POINTS


def _series(values: Sequence[complex | None]) -> np.ndarray:
    return np.array([complex("nan+nanj") if v is None else v for v in values], dtype=np.complex128)


def _spice_values(result: CaseResult, quantity: str) -> np.ndarray | None:
    if not result.points:
        return None
    return _series([next((q.ref for q in p.quantities if q.quantity == quantity), None) for p in result.points])


def _magnitude_axis(ax, *arrays: np.ndarray) -> None:
    values = np.concatenate([np.abs(a[np.isfinite(a)]) for a in arrays if a is not None])
    values = values[values > 0]
    if values.size and values.max() / values.min() > 20:
        ax.set_yscale("log")


def _limit_bounds(check: LimitCheck) -> tuple[float | None, float | None]:
    """Bounds in the panel's unit: a dB limit is drawn on the magnitude axis."""
    if check.function == "db":
        lo, hi = check.minimum, check.maximum
        return (None if lo is None else 10 ** (lo / 20), None if hi is None else 10 ** (hi / 20))
    return check.minimum, check.maximum


def _shade_limit(ax, check: LimitCheck, lo_hz: float, hi_hz: float, lower: float | None, upper: float | None) -> None:
    """The forbidden side of each bound, shaded over the limit's band; the bound itself as a dashed line.

    Call after ``fit_y``: the shading runs from the bound to the panel's edge."""
    colour = _VERDICT_COLOUR.get(check.verdict, _FAIL)
    lower, upper = _drawable(ax, lower), _drawable(ax, upper)
    bottom, top = ax.get_ylim()
    label: str | None = f"limit[{check.index}] {check.text} ({check.verdict})"
    for bound, edge in ((upper, top), (lower, bottom)):
        if bound is None:
            continue
        ax.fill_between([lo_hz, hi_hz], [bound, bound], [edge, edge], color=colour, alpha=0.15, lw=0, label=label)
        ax.hlines(bound, lo_hz, hi_hz, colors=colour, linestyles="--", lw=1.2)
        label = None
    ax.set_ylim(bottom, top)


def _drawable(ax, bound: float | None) -> float | None:
    """A bound that can sit on this axis: finite, and above zero on a log axis."""
    if bound is None or not math.isfinite(bound) or (ax.get_yscale() == "log" and bound <= 0):
        return None
    return bound


def fit_y(ax, bounds: Sequence[float | None] = ()) -> tuple[float, float]:
    """Set the y range to hold every drawn line's data and each bound, with ``MARGIN`` of the span
    either side (in decades on a log axis). A flat curve gets a span of its own: 10 % of its value
    (1 for zero) on a linear axis, one decade on a log axis. Returns the range set."""
    log = ax.get_yscale() == "log"
    ys = [np.asarray(line.get_ydata(), dtype=float) for line in ax.lines]
    values = np.concatenate([*ys, np.array([b for b in bounds if _drawable(ax, b) is not None], dtype=float)])
    values = values[np.isfinite(values) & ((values > 0) if log else True)]
    if not values.size:
        return ax.get_ylim()
    lo, hi = (np.log10(values.min()), np.log10(values.max())) if log else (values.min(), values.max())
    span = hi - lo
    if span <= 0:
        span = 1.0 if log else (0.1 * abs(hi) or 1.0)
        lo, hi = lo - span / 2, hi + span / 2
    lo, hi = lo - MARGIN * span, hi + MARGIN * span
    limits = (10**lo, 10**hi) if log else (lo, hi)
    ax.set_ylim(*limits)
    return limits


def _expectation_points(axes: dict, result: CaseResult) -> None:
    for e in result.expectations:
        if e.quantity not in ("vth", "zth") or e.at_hz <= 0:
            continue
        prefix = "z" if e.quantity == "zth" else "v"
        colour = _VERDICT_COLOUR.get(e.verdict, _FAIL)
        style = dict(
            marker=_VERDICT_MARKERS.get(e.verdict, "*"),
            ms=10,
            ls="none",
            color=colour,
            mec="black",
            mew=0.6,
            zorder=5,
            label=f"expect[{e.index}] by hand ({e.verdict})",
        )
        axes[prefix + "mag"].plot([e.at_hz], [abs(e.expected)], **style)
        axes[prefix + "ph"].plot([e.at_hz], [math.degrees(np.angle(e.expected))], **style)


def _error_panel(ax, result: CaseResult, freqs: np.ndarray, keep: np.ndarray) -> None:
    ax.set_title("solver vs SPICE: judged relative error", y=1.0)  # y given: no title placement pass
    ax.set_xscale("log")
    ax.set_xlabel("frequency (Hz)")
    if not result.points:
        ax.text(0.5, 0.5, "not compared with ngspice", ha="center", va="center", transform=ax.transAxes)
        return
    ax.set_yscale("log")
    drew_floor = False
    for quantity, colour in _ERR_COLOURS.items():
        errs = np.array(
            [next((q.err for q in p.quantities if q.quantity == quantity), math.nan) for p in result.points]
        )[keep]
        if np.all(np.isnan(errs)):
            continue
        drew_floor |= bool(np.any(errs == 0))
        ax.plot(freqs, np.where(errs == 0, ERROR_FLOOR, errs), marker=".", color=colour, lw=1, label=quantity)
    ax.axhline(result.tolerance.rel, color=_FAIL, ls="--", lw=1.2, label=f"tolerance {result.tolerance.rel:.3g}")
    fit_y(ax)
    if drew_floor:
        ax.text(
            0.01, 0.02, f"exact agreement drawn at {ERROR_FLOOR:g}", transform=ax.transAxes, fontsize=8, color="#555555"
        )
    ax.legend(fontsize=8, loc="best", ncol=4)


def _other_limits_panel(ax, result: CaseResult, checks: list[LimitCheck]) -> None:
    ax.set_title("other limited quantities", y=1.0)
    ax.set_xscale("log")
    ax.set_xlabel("frequency (Hz)")
    for c in checks:
        if c.values:
            f, v = zip(*c.values)
            ax.plot(f, v, color=_VERDICT_COLOUR.get(c.verdict, _FAIL), marker=".", lw=1, label=c.text)
    fit_y(ax, [b for c in checks for b in (c.minimum, c.maximum)])
    for c in checks:
        band = c.band or (min(result.freqs_hz), max(result.freqs_hz))
        _shade_limit(ax, c, band[0], band[1], c.minimum, c.maximum)
    ax.legend(fontsize=8, loc="best")


def _draw_routes(
    axes: dict[str, Any], freqs: np.ndarray, own: dict[str, np.ndarray], ref: dict[str, np.ndarray | None], sources: str
) -> None:
    """|Z_th|, |V_th| and their phases against frequency: crosscheck as lines, ngspice as circles."""
    titles = {
        "zmag": ("|Z_th|", "Ω"),
        "vmag": ("|V_th|", f"V {sources}"),
        "zph": ("phase of Z_th", "°"),
        "vph": ("phase of V_th", "°"),
    }
    for key, ax in axes.items():
        quantity = "zth" if key.startswith("z") else "vth"
        transform = np.abs if key.endswith("mag") else (lambda z: np.angle(z, deg=True))
        ax.plot(freqs, transform(own[quantity]), **_OWN)
        reference = ref[quantity]
        if reference is not None:
            ax.plot(freqs, transform(reference), **_SPICE)
        ax.set_xscale("log")
        if key.endswith("mag"):
            _magnitude_axis(ax, own[quantity], *([] if reference is None else [reference]))
        ax.set_title(titles[key][0], y=1.0)
        ax.set_ylabel(titles[key][1])
        ax.set_xlabel("frequency (Hz)")
        ax.grid(True, which="both", alpha=0.25)


def case_figure(result: CaseResult) -> Any:
    """The case's matplotlib ``Figure`` (not rendered), or None when the case is not a sweep (fewer than 3
    frequencies > 0). Every panel's y range holds its data and its limits (``fit_y``)."""
    if not is_swept(result):
        return None
    other = any((c.function, c.quantity) not in _PANELS for c in result.limits)
    return _draw_case(_new_figure(other), result)


def _new_figure(other: bool) -> Any:
    """The empty figure: four route panels, the error panel, and the other limits' panel when ``other``."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(10, 9.5))
    FigureCanvasAgg(fig)
    grid = fig.add_gridspec(3, 2)
    for spec in (grid[0, 0], grid[0, 1], grid[1, 0], grid[1, 1], grid[2, 0] if other else grid[2, :]):
        fig.add_subplot(spec)
    if other:
        fig.add_subplot(grid[2, 1])
    return fig


def _draw_case(fig: Any, result: CaseResult) -> Any:
    """Draw the case on an empty figure from ``_new_figure`` (or a ``_template`` emptied)."""
    from matplotlib.ticker import FuncFormatter, LogLocator, NullFormatter

    own_points = result.own or ()
    freqs_all = np.array([eq.freq_hz for eq in own_points])
    keep = freqs_all > 0  # DC cannot sit on a log axis; it stays in the points table
    freqs = freqs_all[keep]
    own = {"vth": _series([eq.vth for eq in own_points])[keep], "zth": _series([eq.zth for eq in own_points])[keep]}
    ref = {q: (None if (s := _spice_values(result, q)) is None else s[keep]) for q in ("vth", "zth")}

    axes = dict(zip(("zmag", "vmag", "zph", "vph"), fig.axes[:4]))
    other = [c for c in result.limits if (c.function, c.quantity) not in _PANELS]
    error_ax = fig.axes[4]
    _draw_routes(axes, freqs, own, ref, result.sources)
    _expectation_points(axes, result)
    _limits_on_panels(axes, result, freqs)
    _error_panel(error_ax, result, freqs, keep)
    error_ax.grid(True, which="both", alpha=0.25)
    if other:
        _other_limits_panel(fig.axes[5], result, other)
    fig.suptitle(f"{result.title}  (port {result.port[0]} → {result.port[1]})", fontsize=11)
    # Fixed margins: a layout engine measures every tick label and costs seconds per figure.
    fig.subplots_adjust(left=0.08, right=0.98, bottom=0.06, top=0.93, hspace=0.45, wspace=0.22)
    for ax in fig.axes:  # one frequency range everywhere; few minor ticks, unlabelled (each is laid out)
        ax.set_xlim(float(freqs.min()), float(freqs.max()))
        for axis in (ax.xaxis, ax.yaxis):
            if axis.get_scale() == "log":
                axis.set_minor_locator(LogLocator(subs=(2.0, 5.0)))
                axis.set_major_formatter(FuncFormatter(_decade_label))
            axis.set_minor_formatter(NullFormatter())
    return fig


def _limits_on_panels(axes: dict[str, Any], result: CaseResult, freqs: np.ndarray) -> None:
    """Fit each route panel to its data and the bounds of the limits drawn on it, then shade the limits."""
    on_panel: dict[str, list[LimitCheck]] = {key: [] for key in axes}
    for c in result.limits:
        panel = _PANELS.get((c.function, c.quantity))
        if panel is not None:
            on_panel[panel].append(c)
    for key, ax in axes.items():
        bounds = [b for c in on_panel[key] for b in _limit_bounds(c)]
        if key.endswith("mag") and ax.get_yscale() != "log":  # bounds decades from the data: a log axis shows both
            positive = [v for v in (*_panel_values(ax), *bounds) if v is not None and math.isfinite(v) and v > 0]
            if positive and max(positive) / min(positive) > 20:
                ax.set_yscale("log")
        fit_y(ax, bounds)
        for c in on_panel[key]:
            band = c.band or (float(freqs.min()), float(freqs.max()))
            _shade_limit(ax, c, band[0], band[1], *_limit_bounds(c))
        ax.legend(fontsize=8, loc="best")


_SUPERSCRIPT = str.maketrans("-0123456789", "⁻⁰¹²³⁴⁵⁶⁷⁸⁹")


def _decade_label(x: float, pos: int | None = None) -> str:
    """A log axis's tick label in plain text: 10³ for a decade (as matplotlib's own labels, which go
    through its slow math-text parser), the number itself between decades."""
    if not x > 0 or not math.isfinite(x):
        return ""
    exponent = round(math.log10(x))
    if abs(math.log10(x) - exponent) < 1e-9:
        return "10" + str(exponent).translate(_SUPERSCRIPT)
    return f"{x:g}"


#: One emptied figure per layout and thread, drawn on again for each case (``case_figure_png``).
_TEMPLATES = threading.local()


def _template(other: bool) -> Any:
    """A figure of this layout to draw on, emptied (``_empty``) of the last case drawn on it."""
    figures = getattr(_TEMPLATES, "figures", None)
    if figures is None:
        figures = _TEMPLATES.figures = {}
    fig = figures.get(other)
    if fig is None:
        fig = figures[other] = _new_figure(other)
    else:
        _empty(fig)
    return fig


def _empty(fig: Any) -> None:
    """Back to what ``_new_figure`` gives: every artist a case added removed, scales, limits and
    autoscaling as on new axes. The tick and grid artists stay: making them is most of a figure's cost.
    ``tests/test_plot_template.py`` checks that a figure drawn on a template is the same PNG as on a new one."""
    from matplotlib.transforms import Bbox

    for ax in fig.axes:
        for artist in (*ax.lines, *ax.collections, *ax.texts, *ax.patches):
            artist.remove()
        if ax.legend_ is not None:
            ax.legend_.remove()
        ax.set_title("")
        ax.set_xlabel("")
        ax.set_ylabel("")
        ax.grid(False, which="both")
        ax.set_xscale("linear")
        ax.set_yscale("linear")
        ax.relim()  # no data: the data limits as on new axes
        ax.set_autoscale_on(True)
        ax.viewLim.set_points(Bbox.unit().get_points())  # new axes show 0 … 1 until data asks for more
        ax._stale_viewlims = dict.fromkeys(ax._stale_viewlims, False)
    if fig._suptitle is not None:
        fig._suptitle.set_text("")


def _panel_values(ax) -> list[float]:
    return [float(y) for line in ax.lines for y in np.asarray(line.get_ydata(), dtype=float)]


def case_figure_png(result: CaseResult, dpi: int = 80) -> bytes | None:
    """The case's figure (``case_figure``) as PNG bytes, or None when the case is not a sweep.

    Drawn on a figure kept from the last case of the same layout (``_template``): its axes, ticks and
    text measurements are reused, which takes most of the time out of a figure."""
    if not is_swept(result):
        return None
    other = any((c.function, c.quantity) not in _PANELS for c in result.limits)
    fig = _draw_case(_template(other), result)
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=dpi, metadata={"Software": None})
    return buffer.getvalue()
