"""A readable table of equivalents for the terminal, ready to paste into a design review.

The title, node names and notes reach rich through ``untrusted.markup_text``: control characters
shown as text, markup escaped.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

from rich.console import Console
from rich.table import Table

from crosscheck.model.values import format_element_form, format_eng, format_polar, format_rect
from crosscheck.own.equivalent import Equivalent
from crosscheck.report.caution import CAUTION
from crosscheck.report.untrusted import markup_text


def _element_form(z: complex | None, freq_hz: float, series: bool) -> str:
    """Z_th as R + L or C (Y_N as G ‖ C or L); a near-resistive one as R alone, saying so."""
    return "—" if z is None else format_element_form(z, freq_hz, series=series)


def _cell(z: complex | None, unit: str, polar: bool) -> str:
    if z is None:
        return "— (none)"
    return format_polar(z, 4, unit) if polar else format_rect(z, 4, unit.strip())


def _condition(kappa: float) -> str:
    """The matrix condition number, or — when the engine does not report one (ngspice)."""
    return "—" if math.isnan(kappa) else f"{kappa:.1g}"


def equivalents_table(title: str, port: tuple[str, str], points: Sequence[Equivalent], wide: bool = False) -> Table:
    """One row per frequency; the parallel (Norton admittance) form only on wide terminals."""
    where = f"{markup_text(title)}\nport {markup_text(port[0])} → {markup_text(port[1])}"
    table = Table(title=where, title_justify="left", show_lines=False)
    headers = ["f", "V_th", "Z_th", "Z_th as R + L or C", "I_N"] + (["Y_N as G ‖ C or L"] if wide else []) + ["cond"]
    for header in headers:
        table.add_column(header, justify="right" if header in ("f", "cond") else "left", no_wrap=True, overflow="fold")
    for eq in points:
        row = [
            format_eng(eq.freq_hz, 4, " Hz"),
            _cell(eq.vth, " V", polar=True),
            _cell(eq.zth, " Ω", polar=False),
            _element_form(eq.zth, eq.freq_hz, series=True),
            _cell(eq.in_, " A", polar=True),
        ]
        if wide:
            row.append(_element_form(eq.yn, eq.freq_hz, series=False))
        table.add_row(*row, _condition(eq.condition))
    return table


def equivalents_blocks(console: Console, title: str, port: tuple[str, str], points: Sequence[Equivalent]) -> None:
    """The same numbers as the table, one block per frequency, for narrow terminals and pipes."""
    console.print(f"[bold]{markup_text(title)}[/]\nport {markup_text(port[0])} → {markup_text(port[1])}")
    for eq in points:
        console.print(
            f"\n[bold]f = {format_eng(eq.freq_hz, 6, ' Hz')}[/]   [dim](matrix condition {_condition(eq.condition)})[/]"
        )
        series = eq.series_form()
        parallel = eq.parallel_form()
        console.print(f"  V_th  {_cell(eq.vth, ' V', polar=True)}")
        console.print(
            f"  Z_th  {_cell(eq.zth, ' Ω', polar=False)}"
            + (f"  =  {_element_form(eq.zth, eq.freq_hz, True)}" if series else "")
        )
        console.print(f"  I_N   {_cell(eq.in_, ' A', polar=True)}")
        console.print(
            f"  Y_N   {_cell(eq.yn, ' S', polar=False)}"
            + (f"  =  {_element_form(eq.yn, eq.freq_hz, False)}" if parallel else "")
        )


def print_equivalents(
    console: Console,
    title: str,
    port: tuple[str, str],
    points: Sequence[Equivalent],
    source_note: str,
    caution: bool = True,
) -> None:
    if console.width >= 110:
        console.print(equivalents_table(title, port, points, wide=console.width >= 140))
    else:
        equivalents_blocks(console, title, port, points)
    for eq in points:
        if eq.note:
            console.print(f"[yellow]{format_eng(eq.freq_hz, 4, ' Hz')}: {markup_text(eq.note)}[/]")
    console.print(f"[dim]{source_note}[/]")
    if caution:
        console.print(f"[dim]Caution: {CAUTION}[/]")
