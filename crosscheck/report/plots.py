"""Plots of a swept case for the HTML report: both engines against frequency, the error, limits and hand values.

One figure per case (magnitude and phase of Z_th and V_th, and the solver-vs-SPICE error
against its tolerance, plus a panel for limits on other quantities), built here as a
``svg_chart.Chart`` (plain data: what each panel shows and its range) and written as SVG text
by ``svg_chart.chart_svg``; no plotting library is loaded.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from crosscheck.judge.records import LimitCheck
from crosscheck.judge.result import CaseResult
from crosscheck.report.svg_chart import Band, Chart, HLine, Panel, Series, chart_svg

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
#: Marker shapes per verdict (``svg_chart`` draws them), for hand values drawn on the plots.
_VERDICT_MARKERS = {"pass": "o", "fail": "X", "error": "D", "unavailable": "s", "drift": "^"}
#: Fraction of the y span left free above and below the data and limits.
MARGIN = 0.05

_VERDICT_COLOUR = VERDICT_COLOURS
_FAIL = VERDICT_COLOURS["fail"]
_OWN_COLOUR, _SPICE_COLOUR = OKABE_ITO["blue"], OKABE_ITO["orange"]
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


def _wide_range(values: Sequence[float]) -> bool:
    """Positive values spanning more than a factor of 20: shown on a log axis."""
    positive = [v for v in values if v is not None and math.isfinite(v) and v > 0]
    return bool(positive) and max(positive) / min(positive) > 20


def _limit_bounds(check: LimitCheck) -> tuple[float | None, float | None]:
    """Bounds in the panel's unit: a dB limit is drawn on the magnitude axis."""
    if check.function == "db":
        lo, hi = check.minimum, check.maximum
        return (None if lo is None else 10 ** (lo / 20), None if hi is None else 10 ** (hi / 20))
    return check.minimum, check.maximum


def _shade_limit(
    panel: Panel, check: LimitCheck, lo_hz: float, hi_hz: float, lower: float | None, upper: float | None
) -> None:
    """The forbidden side of each bound, shaded over the limit's band; the bound itself as a dashed line.

    Call after ``fit_y``: the shading runs from the bound to the panel's edge."""
    colour = _VERDICT_COLOUR.get(check.verdict, _FAIL)
    lower, upper = _drawable(panel, lower), _drawable(panel, upper)
    bottom, top = panel.ylim
    label: str | None = f"limit[{check.index}] {check.text} ({check.verdict})"
    for bound, edge in ((upper, top), (lower, bottom)):
        if bound is None:
            continue
        panel.bands.append(Band(lo_hz, hi_hz, bound, edge, colour, label))
        panel.hlines.append(HLine(bound, colour, lo_hz, hi_hz))
        label = None


def _drawable(panel: Panel, bound: float | None) -> float | None:
    """A bound that can sit on this axis: finite, and above zero on a log axis."""
    if bound is None or not math.isfinite(bound) or (panel.ylog and bound <= 0):
        return None
    return bound


def fit_y(panel: Panel, bounds: Sequence[float | None] = ()) -> tuple[float, float]:
    """Set the y range to hold every series' data and each bound, with ``MARGIN`` of the span
    either side (in decades on a log axis). A flat curve gets a span of its own: 10 % of its value
    (1 for zero) on a linear axis, one decade on a log axis. Returns the range set."""
    log = panel.ylog
    ys = [np.asarray(s.ys, dtype=float) for s in panel.series]
    drawable = [b for b in bounds if _drawable(panel, b) is not None]
    values = np.concatenate([*ys, np.array(drawable, dtype=float)])
    values = values[np.isfinite(values) & ((values > 0) if log else True)]
    if not values.size:
        return panel.ylim
    lo, hi = (math.log10(values.min()), math.log10(values.max())) if log else (float(values.min()), float(values.max()))
    span = hi - lo
    if not math.isfinite(span):  # ends near ±1.8e308: no room for margins
        panel.ylim = (lo, hi)
        return panel.ylim
    if span <= 0:
        span = 1.0 if log else (0.1 * abs(hi) or 1.0)
        lo, hi = lo - span / 2, hi + span / 2
    lo, hi = lo - MARGIN * span, hi + MARGIN * span
    panel.ylim = (float(10**lo), float(10**hi)) if log else (float(lo), float(hi))
    return panel.ylim


def _expectation_points(panels: dict[str, Panel], result: CaseResult) -> None:
    for e in result.expectations:
        if e.quantity not in ("vth", "zth") or e.at_hz <= 0:
            continue
        prefix = "z" if e.quantity == "zth" else "v"
        colour = _VERDICT_COLOUR.get(e.verdict, _FAIL)
        marker = _VERDICT_MARKERS.get(e.verdict, "*")
        label = f"expect[{e.index}] by hand ({e.verdict})"
        at = np.array([e.at_hz])
        for key, value in (("mag", abs(e.expected)), ("ph", math.degrees(np.angle(e.expected)))):
            panels[prefix + key].series.append(Series(label, at, np.array([value]), colour, "marker", marker))


def _error_panel(result: CaseResult, freqs: np.ndarray, keep: np.ndarray) -> Panel:
    panel = Panel("solver vs SPICE: judged relative error", wide=True)
    if not result.points:
        panel.notes.append(("not compared with ngspice", "centre"))
        return panel
    panel.ylog = True
    drew_floor = False
    for quantity, colour in _ERR_COLOURS.items():
        errs = np.array(
            [next((q.err for q in p.quantities if q.quantity == quantity), math.nan) for p in result.points]
        )[keep]
        if np.all(np.isnan(errs)):
            continue
        drew_floor |= bool(np.any(errs == 0))
        panel.series.append(Series(quantity, freqs, np.where(errs == 0, ERROR_FLOOR, errs), colour, "line+dots"))
    tol = result.tolerance.rel
    panel.hlines.append(HLine(tol, _FAIL, label=f"tolerance {tol:.3g}"))
    fit_y(panel, [tol])
    if drew_floor:
        panel.notes.append((f"exact agreement drawn at {ERROR_FLOOR:g}", "corner"))
    return panel


def _other_limits_panel(result: CaseResult, checks: list[LimitCheck]) -> Panel:
    panel = Panel("other limited quantities")
    for c in checks:
        if c.values:
            f, v = zip(*c.values)
            colour = _VERDICT_COLOUR.get(c.verdict, _FAIL)
            panel.series.append(Series(c.text, np.array(f, dtype=float), np.array(v, dtype=float), colour, "line+dots"))
    fit_y(panel, [b for c in checks for b in (c.minimum, c.maximum)])
    for c in checks:
        band = c.band or (min(result.freqs_hz), max(result.freqs_hz))
        _shade_limit(panel, c, band[0], band[1], c.minimum, c.maximum)
    return panel


def _route_panels(
    freqs: np.ndarray, own: dict[str, np.ndarray], ref: dict[str, np.ndarray | None], sources: str
) -> dict[str, Panel]:
    """|Z_th|, |V_th| and their phases against frequency: crosscheck as lines, ngspice as circles."""
    titles = {
        "zmag": ("|Z_th|", "Ω"),
        "vmag": ("|V_th|", f"V {sources}"),
        "zph": ("phase of Z_th", "°"),
        "vph": ("phase of V_th", "°"),
    }
    panels = {}
    for key, (title, unit) in titles.items():
        quantity = "zth" if key.startswith("z") else "vth"
        transform = np.abs if key.endswith("mag") else (lambda z: np.angle(z, deg=True))
        panel = panels[key] = Panel(title, ylabel=unit)
        panel.series.append(Series("crosscheck", freqs, transform(own[quantity]), _OWN_COLOUR, "line", width=1.6))
        reference = ref[quantity]
        if reference is not None:
            panel.series.append(Series("ngspice", freqs, transform(reference), _SPICE_COLOUR, "circles"))
        if key.endswith("mag"):
            panel.ylog = _wide_range([float(y) for s in panel.series for y in s.ys])
    return panels


def case_figure(result: CaseResult) -> Chart | None:
    """The case's chart (not yet written as SVG), or None when the case is not a sweep (fewer than 3
    frequencies > 0). Every panel's y range holds its data and its limits (``fit_y``)."""
    if not is_swept(result):
        return None
    own_points = result.own or ()
    freqs_all = np.array([eq.freq_hz for eq in own_points])
    keep = freqs_all > 0  # DC cannot sit on a log axis; it stays in the points table
    freqs = freqs_all[keep]
    own = {"vth": _series([eq.vth for eq in own_points])[keep], "zth": _series([eq.zth for eq in own_points])[keep]}
    ref = {q: (None if (s := _spice_values(result, q)) is None else s[keep]) for q in ("vth", "zth")}

    panels = _route_panels(freqs, own, ref, result.sources)
    _expectation_points(panels, result)
    _limits_on_panels(panels, result, freqs)
    chart = Chart(f"{result.title}  (port {result.port[0]} → {result.port[1]})", list(panels.values()))
    chart.panels.append(_error_panel(result, freqs, keep))
    other = [c for c in result.limits if (c.function, c.quantity) not in _PANELS]
    if other:
        chart.panels[-1].wide = False
        chart.panels.append(_other_limits_panel(result, other))
    for panel in chart.panels:  # one frequency range everywhere
        panel.xlim = (float(freqs.min()), float(freqs.max()))
    return chart


def _limits_on_panels(panels: dict[str, Panel], result: CaseResult, freqs: np.ndarray) -> None:
    """Fit each route panel to its data and the bounds of the limits drawn on it, then shade the limits."""
    on_panel: dict[str, list[LimitCheck]] = {key: [] for key in panels}
    for c in result.limits:
        where = _PANELS.get((c.function, c.quantity))
        if where is not None:
            on_panel[where].append(c)
    for key, panel in panels.items():
        bounds = [b for c in on_panel[key] for b in _limit_bounds(c)]
        if key.endswith("mag") and not panel.ylog:  # bounds decades from the data: a log axis shows both
            panel.ylog = _wide_range([*_panel_values(panel), *(b for b in bounds if b is not None)])
        fit_y(panel, bounds)
        for c in on_panel[key]:
            band = c.band or (float(freqs.min()), float(freqs.max()))
            _shade_limit(panel, c, band[0], band[1], *_limit_bounds(c))


def _panel_values(panel: Panel) -> list[float]:
    return [float(y) for s in panel.series for y in np.asarray(s.ys, dtype=float)]


def case_figure_svg(result: CaseResult) -> str | None:
    """The case's figure (``case_figure``) as SVG text, or None when the case is not a sweep."""
    chart = case_figure(result)
    return None if chart is None else chart_svg(chart)
