"""Plots that always show their data and limits, and verdict colours a colour-blind reader can tell apart."""

from __future__ import annotations

import itertools
import math
import re

import numpy as np
import pytest

from crosscheck.judge.records import LimitCheck, PointCheck, QuantityCheck
from crosscheck.judge.result import CaseResult
from crosscheck.model.tolerance import SOLVER_VS_SPICE
from crosscheck.own.equivalent import Equivalent
from crosscheck.report.html import verdict_css
from crosscheck.report.plots import MARGIN, OKABE_ITO, VERDICT_COLOURS, VERDICT_SYMBOLS, case_figure
from crosscheck.vocabulary import Verdict

FREQS = (10.0, 100.0, 1e3, 1e4, 1e5)


def _limit(index: int, function: str, quantity: str, lo: float | None, hi: float | None, verdict: str) -> LimitCheck:
    return LimitCheck(
        index, f"{function}({quantity})", function, quantity, lo, hi, None, None, None, None, Verdict(verdict), ""
    )


def _result(zth: complex, vth: complex, limits: tuple[LimitCheck, ...] = (), compared: bool = True) -> CaseResult:
    own = tuple(Equivalent(f, vth, zth, vth / zth, 1 / zth, 1.0) for f in FREQS)
    points = ()
    if compared:
        points = tuple(
            PointCheck(
                f,
                tuple(
                    QuantityCheck(q, z, z, 1e-12 * (i + 1), 1e-12, 0.0, 0.0, Verdict.PASS, "")
                    for q, z in (("vth", vth), ("zth", zth), ("in", vth / zth))
                ),
                Verdict.PASS,
                "",
                1.0,
            )
            for i, f in enumerate(FREQS)
        )
    return CaseResult("c.toml", "flat", ("a", "0"), FREQS, SOLVER_VS_SPICE, own=own, points=points, limits=limits)


def _panel_data(panel) -> np.ndarray:
    return np.concatenate([np.asarray(s.ys, dtype=float) for s in panel.series])


def _assert_holds(panel, values, what: str) -> None:
    lo, hi = panel.ylim
    for v in values:
        assert lo < v < hi, f"{what}: {v} outside the y range {lo} … {hi} of {panel.title!r}"


CASES = {
    "flat, limits far above and below": _result(
        50 + 0j,
        1 + 0j,
        (_limit(1, "abs", "zth", 1.0, 1e4, "pass"), _limit(2, "phase", "vth", -90.0, 45.0, "pass")),
    ),
    "flat, dB limit": _result(50 + 0j, 2 + 0j, (_limit(1, "db", "vth", -40.0, 20.0, "pass"),)),
    "flat, limit failed above the data": _result(50 + 0j, 1 + 0j, (_limit(1, "abs", "zth", 60.0, 80.0, "fail"),)),
    "flat, no limits": _result(50 + 0j, 1 + 0j),
    "zero phase, not compared": _result(50 + 0j, 1 + 0j, compared=False),
    "other quantity limited": _result(50 + 0j, 1 + 0j, (_limit(1, "real", "zth", 70.0, None, "fail"),)),
}


@pytest.mark.parametrize("name", sorted(CASES))
def test_every_panel_holds_its_data_and_limit_bounds(name: str) -> None:
    """Each panel's y range holds every drawn value and every limit bound, strictly inside (no value on
    the frame), with a span above zero even for a flat curve."""
    chart = case_figure(CASES[name])
    assert chart is not None
    for panel in chart.panels:
        data = _panel_data(panel) if panel.series else np.array([])
        data = data[np.isfinite(data)]
        if panel.ylog:
            data = data[data > 0]
        _assert_holds(panel, data, "data")
        lo, hi = panel.ylim
        assert hi > lo
        _assert_holds(panel, [line.y for line in panel.hlines], "limit bound or tolerance (dashed line)")


def test_flat_curve_sits_inside_with_margin() -> None:
    """A flat |Z_th| of 50 Ω with no limit gets a range around it, not a zero span on the frame:
    at least MARGIN of the span clear on each side (tolerance: 1e-9 relative)."""
    panel = case_figure(CASES["flat, no limits"]).panels[0]
    lo, hi = panel.ylim
    if panel.ylog:
        lo, hi, v = math.log10(lo), math.log10(hi), math.log10(50.0)
    else:
        v = 50.0
    assert v - lo >= MARGIN * (hi - lo) * (1 - 1e-9) and hi - v >= MARGIN * (hi - lo) * (1 - 1e-9)


def test_limit_bounds_of_the_fixture_are_drawn_inside() -> None:
    """The 1 Ω … 10 kΩ band of a flat 50 Ω |Z_th| shows both bounds inside the |Z_th| panel."""
    panel = case_figure(CASES["flat, limits far above and below"]).panels[0]
    assert panel.title == "|Z_th|"
    _assert_holds(panel, [1.0, 50.0, 1e4], "bounds and data")


def test_verdict_colours_are_distinct_okabe_ito_colours() -> None:
    """Every verdict has its own colour, and each is one of the Okabe–Ito colour-blind-safe palette."""
    colours = [VERDICT_COLOURS[v] for v in ("pass", "fail", "error", "unavailable", "drift")]
    assert len(set(c.lower() for c in colours)) == len(colours)
    assert set(colours) <= set(OKABE_ITO.values())
    for a, b in itertools.combinations(colours, 2):
        assert a.lower() != b.lower()


def _luminance(hex_colour: str) -> float:
    channels = [int(hex_colour[i : i + 2], 16) / 255 for i in (1, 3, 5)]
    lin = [c / 12.92 if c <= 0.03928 else ((c + 0.055) / 1.055) ** 2.4 for c in channels]
    return 0.2126 * lin[0] + 0.7152 * lin[1] + 0.0722 * lin[2]


def test_badges_carry_a_symbol_and_readable_text() -> None:
    """Each HTML badge rule has its verdict's palette colour, a distinct symbol, and text at WCAG
    contrast 4.5:1 or more against its fill (tolerance: none, the ratio is computed exactly)."""
    css = verdict_css()
    assert len(set(VERDICT_SYMBOLS.values())) == len(VERDICT_SYMBOLS)
    for verdict, colour in VERDICT_COLOURS.items():
        rule = re.search(rf"\.v-{verdict} {{ background: (#[0-9A-Fa-f]{{6}}); color: (\w+); }}", css)
        assert rule is not None and rule.group(1) == colour
        text = "#000000" if rule.group(2) == "black" else "#FFFFFF"
        light, dark = sorted((_luminance(colour), _luminance(text)), reverse=True)
        assert (light + 0.05) / (dark + 0.05) >= 4.5
        assert f'.v-{verdict}::before {{ content: "{VERDICT_SYMBOLS[verdict]} "; }}' in css
