"""Terminal report of checked cases: a table per case's points, a summary line, the caution.

Every user string (title, file and node names, explanations, errors) reaches rich through
``untrusted.markup_text`` (imported as ``escape``): control characters shown as text, markup escaped.
"""

from __future__ import annotations

import math
import os
from collections.abc import Sequence
from typing import IO

from rich.console import Console
from rich.table import Table

from crosscheck.judge.limits import unit
from crosscheck.judge.result import CaseResult
from crosscheck.judge.stated import format_value
from crosscheck.model.values import format_eng, format_polar
from crosscheck.report.caution import CAUTION, case_cautions
from crosscheck.report.multiport_reduction import print_multiport_points
from crosscheck.report.read_warnings import ACKNOWLEDGE, shown_notes, warned, warning_words
from crosscheck.report.results_json import ngspice_version, summary
from crosscheck.report.spread_text import print_spread
from crosscheck.report.untrusted import markup_text as escape
from crosscheck.vocabulary import quantity_unit

#: Width of report text written to a file or a pipe (a CI log, the main place it is read) when the
#: ``COLUMNS`` environment variable does not give one: wide enough that case paths, table headers and
#: explanations print whole instead of being cut or folded at a terminal's 80 columns.
PIPE_WIDTH = 200


def pipe_width() -> int:
    """``COLUMNS`` when it is a whole number above 0, else ``PIPE_WIDTH``."""
    text = os.environ.get("COLUMNS", "").strip()
    return int(text) if text.isdigit() and int(text) > 0 else PIPE_WIDTH


def report_console(*, stderr: bool = False, file: IO[str] | None = None) -> Console:
    """A console for report text: a terminal's own width; anywhere else ``pipe_width()`` columns."""
    console = Console(stderr=stderr, file=file)
    return console if console.is_terminal else Console(stderr=stderr, file=file, width=pipe_width())


def whole_words(text: str, limit: int) -> str:
    """``text`` up to ``limit`` characters, shortened only at a space (never mid-word) and marked with …."""
    if len(text) <= limit:
        return text
    cut = text.rfind(" ", 0, limit)
    return text[: cut if cut > 0 else limit].rstrip() + " …"


STYLE = {"pass": "green", "fail": "bold red", "error": "bold magenta", "unavailable": "yellow", "drift": "bold yellow"}


def _v(verdict: str) -> str:
    return f"[{STYLE.get(verdict, '')}]{verdict}[/]"


def _z(z: complex | None, unit: str) -> str:
    return "—" if z is None else format_polar(z, 6, unit)


def _err(x: float) -> str:
    return "—" if x is None or math.isnan(x) else f"{x:.2e}"


def comparison_table(result: CaseResult) -> Table:
    table = Table(
        title=f"{escape(result.title)}  [dim]({escape(result.name)}, port {escape(result.port[0])} → "
        f"{escape(result.port[1])}{', DC excitation' if result.excitation == 'dc' else ''})[/]",
        title_justify="left",
    )
    for h in ("f", "qty", "crosscheck", "ngspice", "err", "verdict"):
        # On a narrow terminal the long phasors fold at their spaces; the frequency, quantity, error and
        # verdict keep their width (rich otherwise squeezed the frequency column to nothing), and fold
        # rather than lose characters to "…" if even they cannot fit.
        folds = h in ("crosscheck", "ngspice")
        table.add_column(h, justify="right" if h in ("f", "err") else "left", no_wrap=not folds, overflow="fold")
    for p in result.points:
        for i, q in enumerate(p.quantities):
            table.add_row(
                format_eng(p.freq_hz, 4, " Hz") if i == 0 else "",
                q.quantity,
                _z(q.own, " " + quantity_unit(q.quantity)),
                _z(q.ref, " " + quantity_unit(q.quantity)),
                _err(q.err),
                _v(q.verdict),
            )
    return table


def summary_table(results: Sequence[CaseResult]) -> Table:
    table = Table(title="crosscheck: solver vs ngspice", title_justify="left")
    for h in ("case", "port", "points", "worst err", "verdict", "why"):
        # Paths and ports keep their width (a path folded mid-name cannot be pasted); the explanation
        # wraps at its spaces. When even the paths cannot fit, they fold rather than lose characters.
        table.add_column(h, overflow="fold", no_wrap=h != "why")
    for r in results:
        errs = [q.err for p in r.points for q in p.quantities if not math.isnan(q.err)]
        table.add_row(
            escape(r.name),
            escape(f"{r.port[0]} → {r.port[1]}"),
            str(len(r.freqs_hz)),
            f"{max(errs):.1e}" if errs else "—",
            _v(r.verdict),
            "" if r.verdict == "pass" else escape(whole_words(r.explanation, 600)),
        )
    return table


def expectation_table(result: CaseResult, detail: bool, wide: bool = True) -> Table | None:
    """Hand-calculated values against crosscheck's solver; without ``detail`` only the ones not passing.
    A narrow table leaves the slip out: the explanation printed under the table names it."""

    rows = [e for e in result.expectations if detail or e.verdict != "pass"]
    if not rows:
        return None
    table = Table(title=f"hand calculations  [dim]({escape(result.name)})[/]", title_justify="left")
    headers = ("at", "stated", "crosscheck", "Δ mag", "Δ phase", "verdict") + (("slip",) if wide else ())
    for h in headers:
        table.add_column(
            h,
            justify="right" if h in ("Δ mag", "Δ phase") else "left",
            no_wrap=h in ("Δ mag", "Δ phase", "verdict") or (wide and h != "slip"),
            overflow="fold",
        )
    for e in rows:
        mag = "—" if math.isnan(e.mag_err_pct) else f"{e.mag_err_pct:+.3g} %"
        phase = "—" if math.isnan(e.phase_err_deg) else f"{e.phase_err_deg:+.3g}°"
        cells = [
            f"{format_eng(e.at_hz, 4, ' Hz')} {e.quantity}",
            format_value(e.quantity, e.expected),
            format_value(e.quantity, e.obtained),
            mag,
            phase,
            _v(e.verdict),
        ]
        table.add_row(*cells, *((escape(e.slip or ""),) if wide else ()))
    return table


def limit_table(result: CaseResult, detail: bool) -> Table | None:
    """Design limits: worst point and margin; without ``detail`` only the ones not passing."""

    rows = [lim for lim in result.limits if detail or lim.verdict != "pass"]
    if not rows:
        return None
    table = Table(title=f"design limits  [dim]({escape(result.name)})[/]", title_justify="left")
    for h in ("#", "limit", "band", "worst at", "worst value", "margin", "verdict"):
        table.add_column(
            h, justify="right" if h in ("#", "worst at", "worst value", "margin") else "left", overflow="fold"
        )
    for lim in rows:
        u = " " + unit(lim.function, lim.quantity)
        bounds = " ≤ ".join(
            x
            for x in (
                None if lim.minimum is None else format_eng(lim.minimum, 4, u),
                lim.text,
                None if lim.maximum is None else format_eng(lim.maximum, 4, u),
            )
            if x
        )
        band = (
            "all" if lim.band is None else f"{format_eng(lim.band[0], 4, ' Hz')} – {format_eng(lim.band[1], 4, ' Hz')}"
        )
        table.add_row(
            str(lim.index),
            escape(bounds),
            band,
            "—" if lim.worst_freq_hz is None else format_eng(lim.worst_freq_hz, 4, " Hz"),
            "—" if lim.worst_value is None else format_eng(lim.worst_value, 5, u),
            "—" if lim.margin is None else format_eng(lim.margin, 4, u),
            _v(lim.verdict),
        )
    return table


def drift_table(result: CaseResult, detail: bool) -> Table | None:
    """Quantities against the stored baseline; without ``detail`` only the ones that moved."""
    rows = [d for d in result.drift if detail or d.verdict != "pass"]
    if not rows:
        return None
    table = Table(title=f"baseline drift  [dim]({escape(result.name)})[/]", title_justify="left")
    for h in ("f", "qty", "baseline", "now", "rel change", "verdict"):
        table.add_column(h, justify="right" if h in ("f", "rel change") else "left", overflow="fold")
    for d in rows:
        table.add_row(
            format_eng(d.freq_hz, 6, " Hz"),
            d.quantity,
            _z(d.baseline, " " + quantity_unit(d.quantity)),
            _z(d.obtained, " " + quantity_unit(d.quantity)),
            _err(d.rel_err),
            _v(d.verdict),
        )
    return table


def print_checks(console: Console, result: CaseResult, detail: bool) -> None:
    """Expectation, limit and drift tables of one case, each failing row's explanation under its table."""
    for table, records in (
        (expectation_table(result, detail, wide=console.width >= 110), result.expectations),
        (limit_table(result, detail), result.limits),
        (drift_table(result, detail), result.drift),
    ):
        if table is None:
            continue
        console.print(table)
        for r in records:
            if r.verdict != "pass" and r.explanation:
                console.print(f"[{STYLE[r.verdict]}]{escape(r.explanation)}[/]")
    print_spread(console, result, detail, STYLE)
    note = getattr(result, "baseline_note", "")
    if note:
        console.print(f"[dim]baseline: {escape(note)}[/]")
    reading = reading_line(result)
    if reading is not None:
        console.print(reading)


def reading_line(result: CaseResult) -> str | None:
    """The reading check in one line (ngspice reading the netlist's own lines), or None when it was not made."""
    r = result.reading
    if r is None:
        return None
    if r.verdict == "pass":
        at = f" at {format_eng(r.freq_hz, 4, ' Hz')}" if r.freq_hz is not None else ""
        text = f"ngspice reads the netlist's own lines alike: worst V_th difference {_err(r.worst_rel_err)}{at}"
    else:
        text = r.explanation
    label = escape(result.name, keep_layout=False)
    return f"[{STYLE[r.verdict]}]reading check ({label}): {r.verdict}: {escape(text)}[/]"


def summary_line(results: Sequence[CaseResult]) -> str:
    s = summary(results)
    parts = ", ".join(f"{s[v]} {v}" for v in ("pass", "fail", "error", "unavailable", "drift") if v != "drift" or s[v])
    version = ngspice_version(results)
    return f"{s['cases']} case(s): {parts}" + (f"  ({escape(version)})" if version else "")


def print_results(
    console: Console, results: Sequence[CaseResult], detail: bool, header: str = "", reading: bool = True
) -> None:
    """The checked cases as tables; ``header`` (when given) first, e.g. which command-line options
    overrode the case files' own settings. ``reading``: include reading's warnings and notes (off when
    the caller prints them itself, as ``reduce`` does around its equivalents)."""
    if header:
        console.print(escape(header))
    for c in case_cautions(results):
        for line in c.lines():
            console.print(
                f"[bold yellow]Caution ({escape(c.name, keep_layout=False)}):[/] {escape(line, keep_layout=False)}"
            )
    if reading:
        print_read_warnings(console, results)
    if detail:
        for r in results:
            if r.points:
                console.print(comparison_table(r))
            for p in r.points:
                if p.explanation and p.verdict != "pass":
                    console.print(f"[{STYLE[p.verdict]}]{format_eng(p.freq_hz, 4, ' Hz')}: {escape(p.explanation)}[/]")
            if r.error:
                console.print(f"[bold magenta]error: {escape(r.error)}[/]")
            print_multiport_points(console, r)  # several ports: the matrices and their judgements
            print_checks(console, r, detail=True)
    else:
        console.print(summary_table(results))
        for r in results:
            print_checks(console, r, detail=False)
    if reading:
        print_read_notes(console, results)
    console.print(summary_line(results))
    console.print(f"[dim]Caution: {CAUTION}[/]")


def print_read_warnings(console: Console, results: Sequence[CaseResult]) -> None:
    """Every unacknowledged reading warning, near the top and in bold (``report.read_warnings``), then how to answer."""
    found = warned(results)
    for _i, r in found:
        for w in r.open_warnings:
            console.print(
                f"[bold yellow]Warning ({escape(r.name, keep_layout=False)}):[/] "
                f"{escape(warning_words(w), keep_layout=False)}"
            )
    if found:
        console.print(f"[yellow]{ACKNOWLEDGE}[/]")


def print_read_notes(console: Console, results: Sequence[CaseResult]) -> None:
    """The notes from reading, dim, after the tables: read, and no effect on an AC answer."""
    for r in results:
        for note in shown_notes(r.read_notes):
            console.print(f"[dim]note: {escape(note, keep_layout=False)}[/]")
