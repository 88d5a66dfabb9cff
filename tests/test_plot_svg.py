"""The HTML report's figures as SVG (``plots.case_figure_svg`` through ``svg_chart.chart_svg``): both engines
drawn, limits and hand values marked, user text inert, the same bytes for the same case.

Each SVG is read back with ElementTree, so a figure that is not well-formed XML fails here. No timing here:
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
from test_plot_ranges import CASES, FREQS, _limit

from crosscheck.judge.records import ExpectationCheck
from crosscheck.report import plots
from crosscheck.report.svg_chart import Chart, Panel, Series, chart_svg, decade_label, linear_ticks, log_ticks
from crosscheck.report.untrusted import svg_text
from crosscheck.vocabulary import Verdict

SVG = "{http://www.w3.org/2000/svg}"
ROOT = Path(__file__).resolve().parent.parent
HOSTILE = '</text><script>alert(1)</script><text x="0">&amp; ]]> \x1b[31mred\x1b[0m \u202eevil & "q" \'s\''


def _svg(result) -> ET.Element:
    text = plots.case_figure_svg(result)
    assert text is not None
    return ET.fromstring(text)


def _texts(svg: ET.Element) -> list[str]:
    return [t.text or "" for t in svg.iter(SVG + "text")]


def test_both_engines_are_drawn_on_each_route_panel() -> None:
    """crosscheck is a polyline through every frequency on each of the four route panels, ngspice an open
    circle at every frequency on each (plus one circle per legend); both are named in the legends."""
    svg = _svg(CASES["flat, no limits"])
    own = [
        p for p in svg.iter(SVG + "polyline") if (p.get("stroke"), p.get("stroke-width")) == (plots._OWN_COLOUR, "1.6")
    ]
    assert len(own) == 4 and all(len(p.get("points", "").split()) == len(FREQS) for p in own)
    circles = [
        c for c in svg.iter(SVG + "circle") if c.get("stroke") == plots._SPICE_COLOUR and c.get("fill") == "none"
    ]
    assert len(circles) == 4 * len(FREQS) + 4
    texts = _texts(svg)
    assert texts.count("crosscheck") == 4 and texts.count("ngspice") == 4


def test_a_case_not_compared_draws_crosscheck_alone_and_says_so() -> None:
    svg = _svg(CASES["zero phase, not compared"])
    assert not [c for c in svg.iter(SVG + "circle") if c.get("stroke") == plots._SPICE_COLOUR]
    assert "ngspice" not in _texts(svg) and "not compared with ngspice" in _texts(svg)


def test_a_failed_limit_is_shaded_dashed_and_named_in_its_verdict_colour() -> None:
    """The forbidden side of a failed |Z_th| limit: a shaded band and a dashed line in the fail colour,
    and a legend entry that names the limit and its verdict."""
    svg = _svg(CASES["flat, limit failed above the data"])
    fail = plots.VERDICT_COLOURS["fail"]
    assert [r for r in svg.iter(SVG + "rect") if r.get("fill") == fail and r.get("fill-opacity") == "0.15"]
    assert [line for line in svg.iter(SVG + "line") if line.get("stroke") == fail and line.get("stroke-dasharray")]
    assert "limit[1] abs(zth) (fail)" in _texts(svg)


def test_hand_values_are_marked_with_their_verdict_shape() -> None:
    """A hand value of Z_th is a filled marker in its verdict's colour on the magnitude and the phase panel."""
    expectation = ExpectationCheck(1, 1e3, "zth", 60 + 0j, 50 + 0j, 0.2, 20.0, 1.58, 0.0, Verdict.FAIL, None, "")
    svg = _svg(dataclasses.replace(CASES["flat, no limits"], expectations=(expectation,)))
    colour = plots.VERDICT_COLOURS["fail"]
    marks = [p for p in svg.iter(SVG + "polygon") if p.get("fill") == colour and p.get("stroke") == "black"]
    assert len(marks) == 4  # on the magnitude and the phase panel, and in each one's legend
    assert "expect[1] by hand (fail)" in _texts(svg)


def test_user_text_is_inert_in_the_svg() -> None:
    """Markup, entities, control and bidirectional characters in a title, the port's node names and a
    limit's text stay text: the SVG parses, holds no element the figure did not write, and shows them."""
    limit = dataclasses.replace(_limit(1, "abs", "zth", 1.0, 1e4, "pass"), text=HOSTILE)
    result = dataclasses.replace(CASES["flat, no limits"], title=HOSTILE, port=(HOSTILE, "0"), limits=(limit,))
    text = plots.case_figure_svg(result)
    assert text is not None and "\x1b" not in text and "\u202e" not in text
    svg = ET.fromstring(text)
    written = {"svg", "rect", "text", "line", "polyline", "polygon", "circle", "g", "clipPath"}
    assert {element.tag.removeprefix(SVG) for element in svg.iter()} <= written
    assert not [a for element in svg.iter() for a in element.attrib if a.lower().startswith("on")]
    assert _shown(f"{HOSTILE}  (port {HOSTILE} → 0)"[:109] + "…") in _texts(svg)  # the title, cut to 110
    label = f"limit[1] {HOSTILE} (pass)"
    assert _shown(label[:79] + "…") in _texts(svg)  # a legend entry is cut to 80 characters


def _shown(text: str) -> str:
    """What a reader sees of ``text`` in the figure: its controls shown as escapes, its markup as written."""
    shown = svg_text(text).replace("&lt;", "<").replace("&gt;", ">").replace("&quot;", '"').replace("&#x27;", "'")
    return shown.replace("&amp;", "&")


def test_svg_text_escapes_markup_and_shows_controls() -> None:
    assert svg_text('<a href="x">&\x1b\n') == "&lt;a href=&quot;x&quot;&gt;&amp;\\x1b\\x0a"


def test_the_same_case_gives_the_same_bytes_in_any_order() -> None:
    """No state is kept between figures: each case's SVG is the same drawn first or after every other."""
    first = {name: plots.case_figure_svg(CASES[name]) for name in sorted(CASES)}
    again = {name: plots.case_figure_svg(CASES[name]) for name in sorted(CASES, reverse=True)}
    assert first == again


def test_the_cases_use_both_layouts() -> None:
    """With and without the other-limits panel: six panels or five, the error panel wide when alone."""
    counts = {len(plots.case_figure(result).panels) for result in CASES.values()}
    assert counts == {5, 6}
    assert plots.case_figure(CASES["flat, no limits"]).panels[4].wide
    assert not plots.case_figure(CASES["other quantity limited"]).panels[4].wide


@pytest.mark.parametrize(
    ("value", "label"),
    [(1e3, "10³"), (1e-12, "10⁻¹²"), (1.0, "10⁰"), (20.0, "20"), (0.0, ""), (-5.0, "")],
)
def test_log_tick_labels_are_plain_text_powers_of_ten(value: float, label: str) -> None:
    """Decades as 10 with a superscript exponent; others as numbers."""
    assert decade_label(value) == label


def test_ticks() -> None:
    """Decades over a wide log range (every k-th exponent when there are more than seven), 1-2-5 inside one
    decade, linear steps inside a narrow range; about five linear ticks at any scale."""
    assert log_ticks(10.0, 1e5) == ([10.0, 100.0, 1e3, 1e4, 1e5], [20.0, 50.0, 200.0, 500.0, 2e3, 5e3, 2e4, 5e4])
    assert log_ticks(1e-20, 1e-5)[0] == pytest.approx([1e-18, 1e-15, 1e-12, 1e-9, 1e-6], rel=1e-12)
    assert log_ticks(3e3, 3e4 * 0.9)[0] == [5e3, 1e4, 2e4]
    assert log_ticks(1000.0, 1200.0)[0] == pytest.approx([1000.0, 1050.0, 1100.0, 1150.0, 1200.0], rel=1e-12)
    assert linear_ticks(0.0, 1.0) == [0.0, 0.2, 0.4, 0.6, 0.8, 1.0]
    assert linear_ticks(1e-14, 2e-14) == pytest.approx([1e-14, 1.2e-14, 1.4e-14, 1.6e-14, 1.8e-14, 2e-14], rel=1e-12)
    assert linear_ticks(-95.0, 5.0) == [-80.0, -60.0, -40.0, -20.0, 0.0]


def test_the_html_report_loads_neither_matplotlib_nor_pandas() -> None:
    """Writing a page with a sweep figure and a circuit drawing in a new process leaves matplotlib and pandas
    unloaded (schemdraw is imported without its matplotlib canvas: ``circuit_drawing._schemdraw``; only
    ``frame.verdict_frame`` loads pandas)."""
    code = (
        "import sys\n"
        "sys.path.insert(0, 'tests')\n"
        "from test_plot_ranges import CASES\n"
        "from crosscheck.report.html import html_report\n"
        "page = html_report([CASES['flat, no limits']])\n"
        "assert 'class=\"plot\"' in page and 'data:image/svg+xml' in page\n"
        "print(sorted(m for m in sys.modules if m.split('.')[0] in ('matplotlib', 'schemdraw', 'pandas')))\n"
    )
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=False, cwd=ROOT)
    assert done.returncode == 0, done.stderr
    loaded = done.stdout.strip()
    assert "'schemdraw'" in loaded and "schemdraw.backends.mpl" not in loaded
    assert "matplotlib" not in loaded and "pandas" not in loaded


def test_a_gap_in_a_series_breaks_its_line() -> None:
    """A missing value (NaN) splits the curve into two polylines instead of joining across it."""
    panel = Panel("gap", xlim=(1.0, 1e4), ylim=(0.0, 5.0))
    panel.series.append(
        Series("s", np.array([1.0, 10.0, 100.0, 1e3, 1e4]), np.array([1, 2, np.nan, 3, 4.0]), "#123456")
    )
    svg = ET.fromstring(chart_svg(Chart("t", [panel])))
    runs = [p.get("points", "").split() for p in svg.iter(SVG + "polyline") if p.get("stroke") == "#123456"]
    assert [len(r) for r in runs] == [2, 2]


@pytest.mark.parametrize(
    ("ylog", "ylim"),
    [
        (False, (-1e308, 1e308)),
        (False, (5.0, 5.0)),
        (True, (1e-300, 1e300)),
        (True, (1.0, 1.0)),
        (False, (0.0, 1e-300)),
    ],
)
def test_extreme_or_empty_ranges_still_give_a_well_formed_svg(ylog: bool, ylim: tuple[float, float]) -> None:
    """Ranges at the ends of double precision, or of zero span, give a few ticks at most and well-formed XML."""
    panel = Panel("edge", ylog=ylog, xlim=(1.0, 1e6), ylim=ylim)
    panel.series.append(Series("s", np.array([1.0, 1e6]), np.array(ylim), "#123456"))
    svg = ET.fromstring(chart_svg(Chart("t", [panel])))
    assert len(list(svg.iter(SVG + "text"))) < 40
