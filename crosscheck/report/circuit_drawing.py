"""A drawing of the equivalent circuit at one frequency, as SVG text, for the HTML report.

Drawn with schemdraw (a dependency of crosscheck) on its SVG canvas, imported without matplotlib:
the Thevenin source with its V_th in series with Z_th as R + L or C, to the port
terminals a and b. Where the port has no Thevenin form (Y_N = 0, an ideal current
source at the port) the Norton current source is drawn instead.
"""

from __future__ import annotations

import math
import sys
from collections.abc import Sequence
from typing import Any

from crosscheck.judge.result import CaseResult
from crosscheck.model.values import format_eng, format_polar
from crosscheck.own.equivalent import Equivalent
from crosscheck.report.untrusted import terminal_text
from crosscheck.vocabulary import same_frequency


def representative(result: CaseResult) -> Equivalent | None:
    """The frequency to draw: the first hand-checked one if any, else the middle of the sweep (log scale)."""
    points = [eq for eq in (result.own or []) if eq.vth is not None or eq.in_ is not None]
    if not points:
        return None
    for e in result.expectations:
        match = [eq for eq in points if same_frequency(eq.freq_hz, e.at_hz)]
        if match:
            return match[0]
    positive = [eq for eq in points if eq.freq_hz > 0]
    if len(positive) < 2:
        return points[0]
    middle = math.exp(sum(math.log(eq.freq_hz) for eq in positive) / len(positive))
    return min(positive, key=lambda eq: abs(math.log(eq.freq_hz / middle)))


def _series_elements(eq: Equivalent) -> Sequence[tuple[str, str]]:
    """(kind, label) of the series elements of Z_th: R, then L or C; nothing for Z_th = 0."""
    form = eq.series_form()
    if form is None or eq.zth == 0:
        return ()
    parts = []
    if form.resistance != 0 or form.reactive_kind is None:
        parts.append(("R", f"R = {format_eng(form.resistance, 4, ' Ω')}"))
    if form.reactive_kind is not None and form.reactive_value is not None:
        unit = " H" if form.reactive_kind == "L" else " F"
        parts.append((form.reactive_kind, f"{form.reactive_kind} = {format_eng(form.reactive_value, 4, unit)}"))
    return parts


def _schemdraw() -> tuple[Any, Any]:
    """schemdraw and its elements, imported without its matplotlib canvas when it is not loaded yet.

    schemdraw imports matplotlib.pyplot whenever it can (about half a second) although we draw on its
    SVG canvas only; its imports catch ImportError and fall back to SVG, and a ``None`` in
    ``sys.modules`` makes an import raise ImportError (Python's import system). The entry is removed
    again at once, and a schemdraw already imported by someone else is used as it is."""
    if "schemdraw" not in sys.modules:
        sys.modules["schemdraw.backends.mpl"] = None  # type: ignore[assignment]
        try:
            import schemdraw  # start-up time: the HTML report's drawing only
        finally:
            del sys.modules["schemdraw.backends.mpl"]
    import schemdraw  # start-up time: the HTML report's drawing only
    import schemdraw.elements as elm  # start-up time: the HTML report's drawing only

    return schemdraw, elm


def equivalent_svg(eq: Equivalent, port: tuple[str, str], sources: str = "peak") -> str:
    """SVG text of the equivalent at ``eq.freq_hz``; terminals named after the port's nodes."""
    schemdraw, elm = _schemdraw()
    drawing = schemdraw.Drawing(canvas="svg", show=False)
    drawing.config(unit=2.6, fontsize=12, margin=0.6)
    at = "at DC" if eq.freq_hz == 0 else f"at {format_eng(eq.freq_hz, 4, ' Hz')}"
    if eq.vth is not None:
        source = drawing.add(
            elm.SourceV().up().label(f"V_th = {format_polar(eq.vth, 4, ' V')}\n{sources} {at}", loc="top")
        )
        parts = _series_elements(eq)
        for kind, label in parts:
            element = {"R": elm.Resistor, "L": elm.Inductor2, "C": elm.Capacitor}[kind]()
            drawing.add(element.right().label(label))
        if not parts:
            drawing.add(elm.Line().right().label("Z_th = 0"))
    else:
        source = drawing.add(
            elm.SourceI().up().label(f"I_N = {format_polar(eq.in_ or 0j, 4, ' A')}\n{sources} {at}", loc="top")
        )
        drawing.add(elm.Line().right().label("Y_N = 0: no Thevenin form"))
    # Node names are user text: control characters (which no SVG can hold) shown as text; schemdraw escapes the rest.
    drawing.add(elm.Dot(open=True).label(f"a ({terminal_text(port[0])})", loc="right"))
    drawing.add(elm.Gap().down().toy(source.start).label(["+", "port", "−"]))
    drawing.add(elm.Dot(open=True).label(f"b ({terminal_text(port[1])})", loc="right"))
    drawing.add(elm.Line().left().tox(source.start))
    return drawing.get_imagedata("svg").decode("utf-8")
