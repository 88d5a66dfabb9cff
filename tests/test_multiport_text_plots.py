"""The multi-port matrix in text (folded at the width) and its |Z_ij| figure for the HTML report."""

from __future__ import annotations

import xml.etree.ElementTree as ET

import numpy as np
import pytest

from crosscheck.model.values import parse_phasor
from crosscheck.report.multiport_plots import z_magnitude_figure
from crosscheck.report.multiport_text import matrix_lines

SVG = "{http://www.w3.org/2000/svg}"


def _polylines(svg_text: str) -> int:
    """Polylines in the figure (it must parse as XML)."""
    return len(list(ET.fromstring(svg_text).iter(SVG + "polyline")))


def _matrix(n: int) -> np.ndarray:
    rng = np.random.default_rng(n)
    return rng.normal(size=(n, n)) * 1e3 + 1j * rng.normal(size=(n, n)) * 1e-2


@pytest.mark.parametrize("n", [1, 2, 3, 6, 9])
def test_every_line_fits_and_every_entry_is_shown_once(n: int) -> None:
    """No line passes 80 columns; each entry appears once, in its row, and reads back to 4 figures."""
    z = _matrix(n)
    names = [f"p{k}" for k in range(n)]
    lines = matrix_lines("Z (ohm) at 50 Hz", z, names)
    assert max(len(line) for line in lines) <= 80
    found = np.full((n, n), np.nan, dtype=complex)
    header_cols: list[int] = []
    for line in lines:
        if line.startswith("Z (ohm)"):
            continue
        fields = line.split()
        if all(f in names for f in fields):  # a column heading line
            header_cols = [names.index(f) for f in fields]
            continue
        i = names.index(fields[0])
        cells = line[len(fields[0]) :].split("  ")
        values = [c.strip() for c in cells if c.strip()]
        assert len(values) == len(header_cols)
        for j, text in zip(header_cols, values, strict=True):
            assert np.isnan(found[i, j]), f"entry ({i},{j}) shown twice"
            found[i, j] = parse_phasor(text.replace(" ", ""))
    np.testing.assert_allclose(found, z, rtol=1e-3)  # 4 significant figures per part, rel 1e-3 of |z_ij|
    assert (len([ln for ln in lines if ln.startswith("Z (ohm)")]) > 1) == (n > 3)


def test_a_vector_is_one_row_and_user_names_are_inert() -> None:
    """A vector (voc) prints as one row; an escape sequence in a port name is shown, not obeyed."""
    lines = matrix_lines("voc (V)", np.array([1 + 2j, 3.0]), ["a\x1b[31m", "b"])
    assert len(lines) == 3 and "\x1b" not in "".join(lines)


def test_figure_is_an_svg_with_and_without_spice() -> None:
    """Both engines and ngspice missing draw a line per entry (three of a reciprocal 2-port); one frequency
    with a missing entry (NaN) still gives a well-formed SVG."""
    f = np.logspace(1, 5, 12)
    z = np.stack([np.array([[10 + 1j * x, 3.0], [3.0, 20 + 0j]]) for x in f])
    for spice in (z * (1 + 1e-4), None):
        assert _polylines(z_magnitude_figure(f, z, spice, ["a", "b"])) == 3
    z[0, 0, 1] = np.nan
    assert _polylines(z_magnitude_figure(f[:1], z[:1], None, ["a", "b"])) == 0  # one point: dots, no line


def test_case_figure_from_a_multiport_result() -> None:
    """A three-port case run by the own route gives an SVG; a one-port result gives None."""
    from pathlib import Path

    from crosscheck.model.cases import load_case
    from crosscheck.report.multiport_plots import case_z_figure
    from crosscheck.run.check import run_cases

    corpus = Path(__file__).resolve().parent.parent / "corpus"
    three, one = run_cases(
        [load_case(corpus / "power_distribution/cold_store_feeder.toml"), load_case(corpus / "rf/whip_l_match.toml")],
        engine="own",
    )
    svg = case_z_figure(three)
    assert svg is not None and ET.fromstring(svg).tag == SVG + "svg"
    assert case_z_figure(one) is None


def test_html_report_holds_the_multiport_figure_and_port_names_stay_text() -> None:
    """The HTML report of a multi-port case embeds one |Z_ij| SVG (no PNG); a port name with $ is plain text."""
    from pathlib import Path

    from crosscheck.model.cases import load_case
    from crosscheck.report.html import html_report
    from crosscheck.report.multiport_plots import CAPTION
    from crosscheck.run.check import run_cases

    corpus = Path(__file__).resolve().parent.parent / "corpus"
    (result,) = run_cases([load_case(corpus / "audio/chapel_mic_input.toml")], engine="own")
    page = html_report([result])
    assert page.count(CAPTION) == 1 and "data:image/png" not in page
    assert page.count('<figure class="sweep"><img class="plot" src="data:image/svg+xml;base64,') >= 1
    f = np.array([10.0, 100.0, 1000.0])
    z = np.ones((3, 2, 2), dtype=complex)
    svg = ET.fromstring(z_magnitude_figure(f, z, None, ["$\\frac{", "b$"]))
    assert "|Z($\\frac{,b$)|" in [t.text for t in svg.iter(SVG + "text")]
