"""The HTML report's figures drawn on a kept figure (``plots._template``) are the figures drawn new.

``case_figure_png`` draws each case on a figure kept from the last case of the same layout, emptied
first; here every case of ``test_plot_ranges`` is drawn in two orders on the kept figures, and each PNG
must be byte for byte the PNG of the same case drawn on a new figure (``case_figure``). No timing here:
``benchmarks/reading.py`` times the figures.
"""

from __future__ import annotations

import io

import pytest
from test_plot_ranges import CASES

from crosscheck.report import plots


def _fresh_png(result) -> bytes:
    fig = plots.case_figure(result)
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=80, metadata={"Software": None})
    return buffer.getvalue()


@pytest.mark.parametrize("order", ["forward", "backward"])
def test_a_kept_figure_draws_the_same_png_as_a_new_one(order: str) -> None:
    names = sorted(CASES) if order == "forward" else sorted(CASES, reverse=True)
    for name in names:
        kept = plots.case_figure_png(CASES[name])
        assert kept is not None
        assert kept == _fresh_png(CASES[name]), f"{name}: the figure drawn on a kept figure differs"


def test_the_cases_use_both_layouts() -> None:
    """Both kept layouts are exercised above: with and without the other-limits panel (six or five axes)."""
    counts = {len(plots.case_figure(result).axes) for result in CASES.values()}
    assert counts == {5, 6}


@pytest.mark.parametrize(
    ("value", "label"),
    [(1e3, "10³"), (1e-12, "10⁻¹²"), (1.0, "10⁰"), (20.0, "20"), (0.0, ""), (-5.0, "")],
)
def test_log_tick_labels_are_plain_text_powers_of_ten(value: float, label: str) -> None:
    """Decades as 10 with a superscript exponent (what matplotlib's own labels show); others as numbers."""
    assert plots._decade_label(value) == label
