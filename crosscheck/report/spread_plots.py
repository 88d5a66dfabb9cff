"""The spread's figure for the HTML report: ranked sensitivities and Monte Carlo histograms with limit lines.

One figure per case, at one frequency (``run.spread.figure_frequency``: where a limit over the spread fails,
else where |V_th| spreads most): a row of ranked sensitivity bars (% of |q| per % of the part) for V_th, Z_th
and I_N, and a row each of histograms of |q| and of its phase over every Monte Carlo sample, with the design
limits on that quantity and function drawn as dashed lines. A plain matplotlib ``Figure`` on the Agg canvas,
never registered with pyplot, written straight to PNG bytes; nothing stays open after the call.
"""

from __future__ import annotations

import io
from collections.abc import Sequence
from typing import Any

import numpy as np

from crosscheck.judge.result import CaseResult
from crosscheck.judge.spread import SampleValues, quantity_of
from crosscheck.model.cases import Limit
from crosscheck.model.values import format_eng
from crosscheck.report.plots import OKABE_ITO
from crosscheck.report.spread_json import ranked
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


def _bars(ax: Any, result: CaseResult, index: int, q: str) -> None:
    assert result.spread is not None
    qs = quantity_of(q, result.spread.points[index])
    ax.set_title(f"{quantity_name(q)}: sensitivity, % per %", fontsize=9)
    if qs is None:
        ax.text(0.5, 0.5, f"no {quantity_name(q)} here", ha="center", va="center", transform=ax.transAxes)
        return
    rows = ranked(qs.sensitivities)[:BARS][::-1]
    ax.barh([r[0] for r in rows], [r[1] for r in rows], color=OKABE_ITO["blue"])
    ax.axvline(0.0, color=OKABE_ITO["black"], lw=0.6)
    ax.tick_params(labelsize=8)


def _histogram(ax: Any, values: np.ndarray, title: str, unit: str, lines: list[float]) -> None:
    finite = values[np.isfinite(values)]
    ax.set_title(title, fontsize=9)
    if not len(finite):
        ax.text(0.5, 0.5, "no samples", ha="center", va="center", transform=ax.transAxes)
        return
    # Values equal to rounding (the phase of a real I_N, say) cannot make 40 distinct bins: one bar then.
    spread_out = np.ptp(finite) > 1e-9 * max(1.0, float(np.abs(finite).max()))
    ax.hist(finite, bins=_BINS if spread_out else 1, color=OKABE_ITO["sky blue"], edgecolor="none")
    for bound in lines:
        ax.axvline(bound, color=OKABE_ITO["vermillion"], ls="--", lw=1.4, label="limit")
    ax.set_xlabel(unit, fontsize=8)
    ax.tick_params(labelsize=7)


def spread_figure_png(result: CaseResult) -> bytes | None:
    """The case's spread figure as PNG bytes; None without a spread."""
    spread = result.spread
    if spread is None or not spread.points:
        return None
    from matplotlib.backends.backend_agg import FigureCanvasAgg  # start-up time: matplotlib only for HTML
    from matplotlib.figure import Figure  # start-up time: matplotlib only for HTML

    h = spread.histogram
    index = 0 if h is None else min(range(len(spread.points)), key=lambda i: abs(spread.points[i].freq_hz - h.freq_hz))
    rows = 3 if h is not None else 1
    fig = Figure(figsize=(10.5, 2.6 * rows), dpi=80, layout="constrained")
    FigureCanvasAgg(fig)
    axes = fig.subplots(rows, 3, squeeze=False)
    limits = result.case.limits if result.case is not None else ()
    fig.suptitle(f"component spread at {format_eng(spread.points[index].freq_hz, 5, ' Hz')}", fontsize=10)
    for col, q in enumerate(_QUANTITIES):
        _bars(axes[0][col], result, index, q)
        if h is None:
            continue
        values = _samples(h, q)
        name, unit = quantity_name(q), quantity_unit(q)
        f = spread.points[index].freq_hz
        _histogram(axes[1][col], np.abs(values), f"|{name}| over {len(values)} samples", unit,
                   _limit_lines(limits, q, "abs", f))  # fmt: skip
        _histogram(axes[2][col], np.degrees(np.angle(values)), f"phase of {name}", "°",
                   _limit_lines(limits, q, "phase", f))  # fmt: skip
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png")
    return buffer.getvalue()
