"""The multi-port |Z_ij| figure and the spread figure as SVG (``multiport_plots``, ``spread_plots`` through
``svg_chart`` and ``svg_bars``): both engines drawn, bars ranked, histograms that recount to the samples,
limit lines where the limits are, user text inert, and no matplotlib loaded for the HTML report.

Each SVG is read back with ElementTree, as ``test_plot_svg`` does. No timing here:
``benchmarks/report_figures.py`` times the figures.
"""

from __future__ import annotations

import dataclasses
import subprocess
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest
from test_plot_svg import HOSTILE, SVG, _shown

from crosscheck.model.cases import load_case
from crosscheck.report import multiport_plots, spread_plots
from crosscheck.report.spread_json import ranked
from crosscheck.report.svg_bars import Bars, grid_svg
from crosscheck.run.check import run_cases

ROOT = Path(__file__).resolve().parent.parent
SPREAD_CASE = ROOT / "tests" / "data" / "failing_spread" / "hydrophone_adc_filter.toml"
#: Elements the figures write; anything else in a parsed figure came from user text.
WRITTEN = {"svg", "rect", "text", "line", "polyline", "polygon", "circle", "g", "clipPath"}


def _z(freqs: np.ndarray, reciprocal: bool) -> np.ndarray:
    off = 3.0 if reciprocal else 4.0
    return np.stack([np.array([[10 + 1j * f, 3.0], [off, 20 + 0j]]) for f in freqs])


def _inert(svg_text: str) -> ET.Element:
    """The SVG parsed, holding only elements the figure writes and no event attribute."""
    assert "\x1b" not in svg_text and "\u202e" not in svg_text
    svg = ET.fromstring(svg_text)
    assert {element.tag.removeprefix(SVG) for element in svg.iter()} <= WRITTEN
    assert not [a for element in svg.iter() for a in element.attrib if a.lower().startswith("on")]
    return svg


@pytest.mark.parametrize(("reciprocal", "entries"), [(True, 3), (False, 4)])
def test_multiport_figure_draws_both_engines_per_entry(reciprocal: bool, entries: int) -> None:
    """Each entry drawn is a crosscheck polyline through every frequency and an ngspice open circle at every
    frequency in the same colour; a reciprocal 2-port draws three entries, a non-reciprocal one four."""
    f = np.logspace(1, 5, 12)
    z = _z(f, reciprocal)
    svg = _inert(multiport_plots.z_magnitude_figure(f, z, z * (1 + 1e-4), ["a", "b"]))
    lines = [p for p in svg.iter(SVG + "polyline") if p.get("stroke-width") == "1.5"]
    assert len(lines) == entries and all(len(p.get("points", "").split()) == len(f) for p in lines)
    for line in lines:
        colour = line.get("stroke")
        circles = [c for c in svg.iter(SVG + "circle") if c.get("stroke") == colour and c.get("fill") == "none"]
        assert len(circles) == len(f)
    texts = [t.text or "" for t in svg.iter(SVG + "text")]
    assert "lines: crosscheck; open circles: ngspice" in texts and "|Z(a,b)|" in texts


def test_multiport_figure_without_ngspice_says_so_and_skips_dc() -> None:
    """ngspice not run: no circles, and the panel says so; a 0 Hz point is left off the log axis."""
    f = np.array([0.0, 10.0, 100.0, 1000.0])
    svg = _inert(multiport_plots.z_magnitude_figure(f, _z(f, True), None, ["a", "b"]))
    assert not [c for c in svg.iter(SVG + "circle") if c.get("fill") == "none"]
    assert "lines: crosscheck; ngspice not run" in [t.text for t in svg.iter(SVG + "text")]
    lines = [p for p in svg.iter(SVG + "polyline") if p.get("stroke-width") == "1.5"]
    assert lines and all(len(p.get("points", "").split()) == 3 for p in lines)


def test_multiport_port_names_are_inert() -> None:
    """Hostile port names parse as text, cut to ``NAME_CHARS`` characters in the legend."""
    f = np.array([10.0, 100.0, 1000.0])
    svg = _inert(multiport_plots.z_magnitude_figure(f, _z(f, False), None, [HOSTILE, "$\\frac{"]))
    short = HOSTILE[: multiport_plots.NAME_CHARS]
    assert _shown(f"|Z({short},{short})|") in [t.text for t in svg.iter(SVG + "text")]


@pytest.fixture(scope="module")
def spread_result():
    (result,) = run_cases([load_case(SPREAD_CASE)], engine="own")
    assert result.spread is not None and result.spread.histogram is not None
    return result


def _panels(svg: ET.Element, kind: str) -> list[ET.Element]:
    return [g for g in svg.iter(SVG + "g") if g.get("data-panel") == kind]


def test_spread_bars_are_ranked_largest_first(spread_result) -> None:
    """Each bar panel's bars, top to bottom, are the parts of ``spread_json.ranked`` in its order, their
    values as ranked (to the 6 figures written), labelled with the part names."""
    svg = _inert(spread_plots.spread_figure_svg(spread_result) or "")
    panels = _panels(svg, "bars")
    assert len(panels) == 3
    spread = spread_result.spread
    point = min(spread.points, key=lambda p: abs(p.freq_hz - spread.histogram.freq_hz))
    for panel, qs in zip(panels, (point.vth, point.zth, point.in_)):
        bars = sorted(
            (float(r.get("y", "")), float(r.get("data-value", "")))
            for r in panel.iter(SVG + "rect")
            if r.get("data-value")
        )
        expected = [(p, a) for p, a, _ in ranked(qs.sensitivities)][: spread_plots.BARS]
        assert [v for _, v in bars] == pytest.approx([a for _, a in expected], rel=1e-5)
        magnitudes = [abs(v) for _, v in bars]
        assert magnitudes == sorted(magnitudes, reverse=True) and magnitudes[0] > 0
        labels = [t.text for t in panel.iter(SVG + "text") if t.get("text-anchor") == "end"]
        assert [name for name, _ in expected] == [label for label in labels if label in dict(expected)]


def test_spread_histograms_recount_to_the_samples_and_draw_the_limit(spread_result) -> None:
    """Six histograms (|q| and phase of V_th, Z_th, I_N), each bin counts summing to the number of samples;
    the |Z_th| limit of the case is a dashed line at its bound inside that histogram's plot."""
    svg = _inert(spread_plots.spread_figure_svg(spread_result) or "")
    histograms = _panels(svg, "histogram")
    samples = len(spread_result.spread.histogram.zth)
    assert len(histograms) == 6
    for panel in histograms:
        assert sum(int(r.get("data-count", "0")) for r in panel.iter(SVG + "rect")) == samples
    [zth_abs] = [p for p in histograms if any(t.text == f"|Z_th| over {samples} samples" for t in p.iter(SVG + "text"))]
    bounds = [lim.maximum for lim in spread_result.case.limits if lim.quantity == "zth" and lim.function == "abs"]
    lines = [line for line in zth_abs.iter(SVG + "line") if line.get("data-limit")]
    assert bounds and [float(line.get("data-limit", "")) for line in lines] == pytest.approx(bounds, rel=1e-9)
    assert all(line.get("stroke-dasharray") for line in lines) and "limit" in [
        t.text for t in zth_abs.iter(SVG + "text")
    ]
    frame = [r for r in zth_abs.iter(SVG + "rect") if r.get("fill") == "none"][-1]
    left, width = float(frame.get("x", "")), float(frame.get("width", ""))
    assert all(left <= float(line.get("x1", "")) <= left + width for line in lines)
    others = [p for p in histograms if p is not zth_abs]
    assert not [line for p in others for line in p.iter(SVG + "line") if line.get("data-limit")]


def test_spread_figure_user_text_is_inert(spread_result) -> None:
    """A hostile case title and hostile part names parse as text, cut where the figure cuts them."""
    svg = _inert(spread_plots.spread_figure_svg(dataclasses.replace(spread_result, title=HOSTILE)) or "")
    texts = [t.text for t in svg.iter(SVG + "text")]
    assert any(text and text.startswith("component spread at ") and _shown(HOSTILE[:40]) in text for text in texts)
    bars = Bars("parts", [HOSTILE, "r1"], [2.0, -1.0], "#0072B2")
    svg = _inert(grid_svg(HOSTILE, [[bars]]))
    assert _shown(HOSTILE[:12] + "…") in [t.text for t in svg.iter(SVG + "text")]


def test_html_reports_of_multiport_and_spread_cases_load_no_matplotlib() -> None:
    """Writing the HTML report of a multi-port case and of a spread case in a new process embeds both
    figures as SVG data URIs and leaves matplotlib unloaded."""
    code = (
        "import sys\n"
        "from crosscheck.model.cases import load_case\n"
        "from crosscheck.run.check import run_cases\n"
        "from crosscheck.report.html import html_report\n"
        "files = ['corpus/audio/chapel_mic_input.toml', 'tests/data/failing_spread/hydrophone_adc_filter.toml']\n"
        "results = run_cases([load_case(f) for f in files], engine='own')\n"
        "assert results[0].multiport is not None and results[1].spread is not None\n"
        "page = html_report(results)\n"
        "assert 'figure class=\"spread\"' in page and 'data:image/png' not in page\n"
        "print(page.count('data:image/svg+xml'))\n"
        "print(sorted(m for m in sys.modules if m.split('.')[0] == 'matplotlib'))\n"
    )
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=False, cwd=ROOT)
    assert done.returncode == 0, done.stderr
    count, loaded = done.stdout.split("\n")[:2]
    assert int(count) >= 2 and loaded == "[]"


def test_spread_figure_without_kept_samples_is_the_bars_alone(spread_result) -> None:
    """No samples kept (no Monte Carlo): one row of three bar panels and no histogram."""
    spread = dataclasses.replace(spread_result.spread, histogram=None)
    svg = _inert(spread_plots.spread_figure_svg(dataclasses.replace(spread_result, spread=spread)) or "")
    assert len(_panels(svg, "bars")) == 3 and not _panels(svg, "histogram")


def test_multiport_figure_of_dc_only_says_why_it_is_empty() -> None:
    """Only 0 Hz: nothing on the log frequency axis, and a note saying so."""
    f = np.array([0.0])
    svg = _inert(multiport_plots.z_magnitude_figure(f, _z(f, True), None, ["a", "b"]))
    assert not list(svg.iter(SVG + "polyline"))
    assert "no frequency above 0 Hz to draw" in [t.text for t in svg.iter(SVG + "text")]
