"""The spread's figure for the HTML report: ranked sensitivities and Monte Carlo histograms with limit lines.

One figure per case, at one frequency (``run.spread.figure_frequency``: where a limit over the spread fails,
else where |V_th| spreads most): a row of ranked sensitivity bars (% of |q| per % of the part) for V_th, Z_th
and I_N, and a row each of histograms of |q| and of its phase over every Monte Carlo sample, with the design
limits on that quantity and function drawn as dashed lines. Built as ``svg_bars`` panels and written as SVG
text by ``svg_bars.grid_svg`` (no plotting library is loaded); part names and the case title reach the SVG
only through ``untrusted.svg_text`` there.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from crosscheck.judge.result import CaseResult
from crosscheck.judge.spread import SampleValues, quantity_of
from crosscheck.model.cases import Limit
from crosscheck.model.values import format_eng
from crosscheck.report.plots import OKABE_ITO
from crosscheck.report.spread_json import ranked
from crosscheck.report.svg_bars import Bars, Histogram, grid_svg
from crosscheck.vocabulary import quantity_name, quantity_unit, same_frequency

#: Bars per sensitivity chart (the largest parts; the JSON report has all).
BARS = 8
_BINS = 40
_QUANTITIES = ("vth", "zth", "in")


def _samples(h: SampleValues, q: str) -> np.ndarray:
    v, z = np.asarray(h.vth), np.asarray(h.zth)
    if q == "vth":
        return v
    if q == "zth":
        return z
    with np.errstate(all="ignore"):
        return v / z


def _limit_lines(limits: Sequence[Limit], q: str, function: str, f: float) -> list[float]:
    """Bounds of the limits on ``function(q)`` whose band holds ``f``."""
    out: list[float] = []
    for lim in limits:
        in_band = lim.band is None or lim.band[0] <= f <= lim.band[1] or any(same_frequency(f, b) for b in lim.band)
        if lim.quantity == q and lim.function == function and in_band:
            out += [b for b in (lim.minimum, lim.maximum) if b is not None]
    return out


def _bars(result: CaseResult, index: int, q: str) -> Bars:
    """The parts that move |q| most at the figure's frequency, largest |% per %| at the top."""
    assert result.spread is not None
    qs = quantity_of(q, result.spread.points[index])
    panel = Bars(
        f"{quantity_name(q)}: sensitivity, % per %", [], [], OKABE_ITO["blue"], note=f"no {quantity_name(q)} here"
    )
    if qs is not None:
        rows = [r for r in ranked(qs.sensitivities) if np.isfinite(r[1])][:BARS]
        panel.labels, panel.values = [str(r[0]) for r in rows], [float(r[1]) for r in rows]
    return panel


def _histogram(values: np.ndarray, title: str, unit: str, lines: list[float]) -> Histogram:
    """The finite ``values`` in ``_BINS`` bins (one bin when they are equal to rounding)."""
    finite = values[np.isfinite(values)]
    if not len(finite):
        return Histogram(title, np.array([0.0, 1.0]), np.zeros(1, dtype=int), OKABE_ITO["sky blue"], unit, lines)
    # Values equal to rounding (the phase of a real I_N, say) cannot make 40 distinct bins: one bar then, of
    # width 1 % of the value (at least 1), so the axis reads the value and not the rounding.
    middle = float(np.median(finite))
    if np.ptp(finite) > 1e-9 * max(1.0, float(np.abs(finite).max())):
        counts, edges = np.histogram(finite, bins=_BINS)
    else:
        half = 0.5 * max(1.0, 0.01 * abs(middle))
        counts, edges = np.histogram(
            np.clip(finite, middle - half, middle + half), bins=1, range=(middle - half, middle + half)
        )
    return Histogram(title, edges, counts, OKABE_ITO["sky blue"], unit, lines, OKABE_ITO["vermillion"])


def spread_panels(result: CaseResult) -> tuple[str, list[list[Bars | Histogram]]] | None:
    """The figure's title and rows of panels (bars; then histograms of |q| and of phase when the samples were
    kept); None without a spread."""
    spread = result.spread
    if spread is None or not spread.points:
        return None
    h = spread.histogram
    index = 0 if h is None else min(range(len(spread.points)), key=lambda i: abs(spread.points[i].freq_hz - h.freq_hz))
    f = spread.points[index].freq_hz
    limits = result.case.limits if result.case is not None else ()
    rows: list[list[Bars | Histogram]] = [[_bars(result, index, q) for q in _QUANTITIES]]
    if h is not None:
        magnitude: list[Bars | Histogram] = []
        phase: list[Bars | Histogram] = []
        for q in _QUANTITIES:
            values, name, unit = _samples(h, q), quantity_name(q), quantity_unit(q)
            magnitude.append(_histogram(np.abs(values), f"|{name}| over {len(values)} samples", unit,
                                        _limit_lines(limits, q, "abs", f)))  # fmt: skip
            phase.append(_histogram(np.degrees(np.angle(values)), f"phase of {name}", "°",
                                    _limit_lines(limits, q, "phase", f)))  # fmt: skip
        rows += [magnitude, phase]
    return f"component spread at {format_eng(f, 5, ' Hz')}: {result.title}", rows


def spread_figure_svg(result: CaseResult) -> str | None:
    """The case's spread figure as SVG text; None without a spread."""
    panels = spread_panels(result)
    return None if panels is None else grid_svg(*panels)
