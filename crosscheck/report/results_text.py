"""Terminal report of checked cases: a table per case's points, a summary line, the caution."""

from __future__ import annotations

import math
from typing import Sequence

from rich.console import Console
from rich.table import Table

from ..caution import CAUTION
from ..check import CaseResult
from ..values import format_eng, format_polar
from .results_json import ngspice_version, summary

STYLE = {"pass": "green", "fail": "bold red", "error": "bold magenta", "unavailable": "yellow"}


def _v(verdict: str) -> str:
    return f"[{STYLE.get(verdict, '')}]{verdict}[/]"


def _z(z: complex | None, unit: str) -> str:
    return "—" if z is None else format_polar(z, 6, unit)


def _err(x: float) -> str:
    return "—" if x is None or math.isnan(x) else f"{x:.2e}"


UNITS = {"vth": " V", "zth": " Ω", "in": " A"}


def comparison_table(result: CaseResult) -> Table:
    table = Table(title=f"{result.title}  [dim]({result.name}, port {result.port[0]} → {result.port[1]})[/]",
                  title_justify="left")
    for h in ("f", "qty", "crosscheck", "ngspice", "err", "verdict"):
        table.add_column(h, justify="right" if h in ("f", "err") else "left", no_wrap=h != "f")
    for p in result.points:
        for i, q in enumerate(p.quantities):
            table.add_row(format_eng(p.freq_hz, 4, " Hz") if i == 0 else "", q.quantity, _z(q.own, UNITS[q.quantity]),
                          _z(q.ref, UNITS[q.quantity]), _err(q.err), _v(q.verdict))
    return table


def summary_table(results: Sequence[CaseResult]) -> Table:
    table = Table(title="crosscheck: solver vs ngspice", title_justify="left")
    for h in ("case", "port", "points", "worst err", "verdict", "why"):
        table.add_column(h, overflow="fold")
    for r in results:
        errs = [q.err for p in r.points for q in p.quantities if not math.isnan(q.err)]
        table.add_row(r.name, f"{r.port[0]} → {r.port[1]}", str(len(r.freqs_hz)),
                      f"{max(errs):.1e}" if errs else "—", _v(r.verdict), r.explanation[:300])
    return table


def summary_line(results: Sequence[CaseResult]) -> str:
    s = summary(results)
    parts = ", ".join(f"{s[v]} {v}" for v in ("pass", "fail", "error", "unavailable"))
    version = ngspice_version(results)
    return f"{s['cases']} case(s): {parts}" + (f"  ({version})" if version else "")


def print_results(console: Console, results: Sequence[CaseResult], detail: bool) -> None:
    if detail:
        for r in results:
            if r.points:
                console.print(comparison_table(r))
            for p in r.points:
                if p.explanation and p.verdict != "pass":
                    console.print(f"[{STYLE[p.verdict]}]{format_eng(p.freq_hz, 4, ' Hz')}: {p.explanation}[/]")
            if r.error:
                console.print(f"[bold magenta]error: {r.error}[/]")
    else:
        console.print(summary_table(results))
    console.print(summary_line(results))
    console.print(f"[dim]Caution: {CAUTION}[/]")
