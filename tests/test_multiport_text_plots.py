"""The multi-port matrix in text (folded at the width) and its |Z_ij| figure for the HTML report."""

from __future__ import annotations

import numpy as np
import pytest

from crosscheck.model.values import parse_phasor
from crosscheck.report.multiport_plots import z_magnitude_figure
from crosscheck.report.multiport_text import matrix_lines

PNG_MAGIC = b"\x89PNG\r\n\x1a\n"


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


def test_figure_is_a_png_with_and_without_spice() -> None:
    """Both engines, ngspice missing, and a missing entry (NaN) all draw a PNG."""
    f = np.logspace(1, 5, 12)
    z = np.stack([np.array([[10 + 1j * x, 3.0], [3.0, 20 + 0j]]) for x in f])
    for spice in (z * (1 + 1e-4), None):
        assert z_magnitude_figure(f, z, spice, ["a", "b"]).startswith(PNG_MAGIC)
    z[0, 0, 1] = np.nan
    assert z_magnitude_figure(f[:1], z[:1], None, ["a", "b"]).startswith(PNG_MAGIC)


def test_case_figure_from_a_multiport_result() -> None:
    """A three-port case run by the own route gives a PNG; a one-port result gives None."""
    from pathlib import Path

    from crosscheck.model.cases import load_case
    from crosscheck.report.multiport_plots import case_z_figure
    from crosscheck.run.check import run_cases

    corpus = Path(__file__).resolve().parent.parent / "corpus"
    three, one = run_cases(
        [load_case(corpus / "power_distribution/cold_store_feeder.toml"), load_case(corpus / "rf/whip_l_match.toml")],
        engine="own",
    )
    png = case_z_figure(three)
    assert png is not None and png.startswith(PNG_MAGIC)
    assert case_z_figure(one) is None


def test_html_report_holds_the_multiport_figure_and_port_names_stay_text() -> None:
    """The HTML report of a multi-port case embeds one |Z_ij| PNG; a port name with $ draws (no math mode)."""
    from pathlib import Path

    from crosscheck.model.cases import load_case
    from crosscheck.report.html import html_report
    from crosscheck.report.multiport_plots import CAPTION
    from crosscheck.run.check import run_cases

    corpus = Path(__file__).resolve().parent.parent / "corpus"
    (result,) = run_cases([load_case(corpus / "audio/chapel_mic_input.toml")], engine="own")
    page = html_report([result])
    assert page.count(CAPTION) == 1 and page.count("data:image/png;base64,") == 1
    f = np.array([10.0, 100.0, 1000.0])
    z = np.ones((3, 2, 2), dtype=complex)
    assert z_magnitude_figure(f, z, None, ["$\\frac{", "b$"]).startswith(PNG_MAGIC)
