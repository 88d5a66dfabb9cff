"""The spread as terminal text: limits over the spread, a ranked sensitivity table and the worst-case table.

Shown after a case's other checks. Without ``detail`` (``verify`` without ``--detail``) only the limits over
the spread and ngspice's failed confirmations; with it (and in ``reduce``) every table. Part names come from
the netlist (user text) and go through ``untrusted.markup_text`` like every other name.
"""

from __future__ import annotations

import cmath
import math
from collections.abc import Mapping

from rich.console import Console
from rich.table import Table

from crosscheck.judge.result import CaseResult
from crosscheck.judge.spread import SpreadResult, quantity_of
from crosscheck.model.values import format_eng
from crosscheck.report.spread_json import ranked
from crosscheck.report.untrusted import markup_text as escape
from crosscheck.vocabulary import quantity_name, quantity_unit

#: Rows of a sensitivity table; the rest are counted below it.
MAX_PARTS_SHOWN = 12
#: Sensitivity tables printed per case at most before text picks a few frequencies (the JSON has them all).
MAX_TABLES = 4
_FUNCTIONS = (("abs", "|q|"), ("phase_deg", "∠q"), ("re", "Re q"), ("im", "Im q"))


def spread_summary(spread: SpreadResult) -> str:
    """One line: how many parts vary, Monte Carlo, and what ngspice confirmed."""
    parts = spread.own.parts
    samples = next(
        (qs.monte_carlo for p in spread.points for qs in (p.vth, p.zth, p.in_) if qs and qs.monte_carlo), None
    )
    mc = f"{samples.samples} Monte Carlo samples (seed {samples.seed})" if samples else "no Monte Carlo"
    failed = sum(1 for c in spread.checks if c.verdict == "fail")
    spice = (
        f"ngspice: {len(spread.checks)} confirmations, {failed} failed"
        if spread.checks
        else f"ngspice: {spread.spice_note or 'no confirmations'}"
    )
    return f"spread: {len(parts)} varied part(s), {mc}; {spice}; verdict {spread.verdict}"


def corner_words(corner: Mapping[str, float] | None, limit: int = 4) -> str:
    """``r1=1.01k c1=95n …`` for a table cell."""
    if not corner:
        return "—"
    items = [f"{k}={format_eng(v, 4)}" for k, v in corner.items()]
    return " ".join(items[:limit]) + (f" +{len(items) - limit}" if len(items) > limit else "")


def sensitivity_table(result: CaseResult, index: int) -> Table | None:
    """Parts ranked by their largest |% per %| over V_th, Z_th, I_N at one frequency."""
    spread = result.spread
    if spread is None or index >= len(spread.points):
        return None
    point = spread.points[index]
    present = [(q, qs) for q in ("vth", "zth", "in") if (qs := quantity_of(q, point)) is not None]
    if not present:
        return None
    order = ranked(_largest(present))
    table = Table(
        title=f"sensitivities at {format_eng(point.freq_hz, 5, ' Hz')}, ranked  [dim]({escape(result.name)}; "
        "% of |q| per % of the part, ° per %)[/]",
        title_justify="left",
    )
    table.add_column("part")
    for q, _ in present:
        table.add_column(f"{quantity_name(q)} %/%", justify="right")
        table.add_column(f"{quantity_name(q)} °/%", justify="right")
    for name, _, _ in order[:MAX_PARTS_SHOWN]:
        cells = []
        for _, qs in present:
            a, b = qs.sensitivities.get(name, (float("nan"), float("nan")))
            cells += [f"{a:+.4g}", f"{b:+.4g}"]
        table.add_row(escape(name), *cells)
    if len(order) > MAX_PARTS_SHOWN:
        table.caption = f"{len(order) - MAX_PARTS_SHOWN} smaller part(s) left out (every one is in the JSON report)"
    return table


def _largest(present: list) -> dict[str, tuple[float, float]]:
    """Each part's largest sensitivities over the quantities, for ranking."""
    out: dict[str, tuple[float, float]] = {}
    for _, qs in present:
        for p, (a, b) in qs.sensitivities.items():
            old = out.get(p, (0.0, 0.0))
            out[p] = (max(old[0], abs(a)), max(old[1], abs(b)))
    return out


def worst_case_table(result: CaseResult) -> Table | None:
    """Each point's worst-case |q| and phase with the corners and the method that found them."""
    spread = result.spread
    if spread is None or not spread.points:
        return None
    table = Table(title=f"worst case over the tolerance box  [dim]({escape(result.name)})[/]", title_justify="left")
    for h in ("f", "qty", "fn", "nominal", "min", "min corner", "max", "max corner", "found by"):
        table.add_column(h, justify="right" if h in ("f", "nominal", "min", "max") else "left", overflow="fold")
    for point in spread.points:
        for q in ("vth", "zth", "in"):
            qs = quantity_of(q, point)
            if qs is None:
                continue
            for fn, label in _FUNCTIONS[:2]:
                e = qs.worst_case.get(fn)
                if e is None:
                    continue
                u = " °" if fn == "phase_deg" else " " + quantity_unit(q)
                nominal = abs(qs.nominal) if fn == "abs" else _phase(qs.nominal)
                table.add_row(
                    format_eng(point.freq_hz, 5, " Hz"),
                    quantity_name(q),
                    label,
                    format_eng(nominal, 5, u),
                    format_eng(e.minimum, 5, u),
                    escape(corner_words(e.min_corner)),
                    format_eng(e.maximum, 5, u),
                    escape(corner_words(e.max_corner)),
                    escape(e.min_method if e.min_method == e.max_method else f"{e.min_method} / {e.max_method}"),
                )
    return table


def _phase(z: complex) -> float:
    return math.degrees(cmath.phase(z))


def shown_points(spread: SpreadResult) -> list[int]:
    """The points whose sensitivity tables text shows: all of up to ``MAX_TABLES``, else the first, the last and
    the one the HTML figure shows (where a limit fails, or |V_th| spreads most)."""
    n = len(spread.points)
    if n <= MAX_TABLES:
        return list(range(n))
    picked = {0, n - 1}
    if spread.histogram is not None:
        f = spread.histogram.freq_hz
        picked.add(min(range(n), key=lambda i: abs(spread.points[i].freq_hz - f)))
    return sorted(picked)


def print_spread(console: Console, result: CaseResult, detail: bool, style: Mapping[str, str]) -> None:
    """The case's spread: summary line, limits over the spread, failed confirmations, and (``detail``) the tables."""
    spread = result.spread
    if spread is None:
        return
    console.print(f"[{style.get(spread.verdict, '')}]{escape(spread_summary(spread), keep_layout=False)}[/]")
    for lim in spread.limits:
        console.print(f"[{style.get(lim.verdict, '')}]limit over spread: {lim.verdict}: {escape(lim.explanation)}[/]")
    failed = [c for c in spread.checks if c.verdict != "pass"]
    for c in failed[:10]:
        console.print(f"[{style.get(c.verdict, '')}]ngspice {c.kind} check: {c.verdict}: {escape(c.explanation)}[/]")
    if len(failed) > 10:
        console.print(f"[dim]{len(failed) - 10} more confirmation(s) not passing: see the JSON report[/]")
    if detail:
        shown = shown_points(spread)
        for i in shown:
            table = sensitivity_table(result, i)
            if table is not None:
                console.print(table)
        if len(shown) < len(spread.points):
            console.print(
                f"[dim]sensitivities shown at {len(shown)} of {len(spread.points)} frequencies (the first, the last "
                "and the figure's); every one is in the JSON report[/]"
            )
        table = worst_case_table(result)
        if table is not None:
            console.print(table)
    for note in spread.notes:
        console.print(f"[dim]spread note: {escape(note, keep_layout=False)}[/]")
