"""The fuzz run's summary on the terminal, and its progress bar (on stderr).

Reasons quote engine output and error messages: they reach rich through ``untrusted.markup_text``
(imported as ``escape``), which shows control characters as text and escapes markup.
"""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager

from rich.console import Console
from rich.progress import BarColumn, MofNCompleteColumn, Progress, ProgressColumn, TextColumn, TimeRemainingColumn
from rich.table import Table
from rich.text import Text

from crosscheck.fuzz.faults import FAULTS
from crosscheck.fuzz.reproducer import regenerate_command
from crosscheck.fuzz.summary import FuzzSummary
from crosscheck.report.results_text import whole_words
from crosscheck.report.untrusted import markup_text as escape
from crosscheck.vocabulary import COMPARED

#: How many explained cases the terminal lists (the JSON lists all).
_SHOWN = 10


def _e(x: float | None) -> str:
    return "—" if x is None else f"{x:.1e}"


def print_summary(console: Console, s: FuzzSummary) -> None:
    """The run on the terminal: what ran, the tallies, the error percentiles, then every problem."""
    _print_header(console, s)
    console.print(_error_table(s))
    _print_problems(console, s)
    verdict = "no unexplained disagreement" if not s.problems else f"{len(s.problems)} unexplained"
    console.print(f"[bold]{verdict}[/]" + (" (with a fault injected)" if s.faults else ""))


def _print_header(console: Console, s: FuzzSummary) -> None:
    """What ran, any fault injected on purpose, the tallies and the rate."""
    k = s.options.knobs
    what = (
        f"{len(s.options.case_seeds)} chosen case seed(s)"
        if s.options.case_seeds
        else f"{s.cases_run} case(s), seed {s.options.seed}"
    )
    console.print(
        f"[bold]crosscheck fuzz[/]: {what}; family {k.family}, nodes {k.min_nodes}..{k.max_nodes}, "
        f"kinds {k.kinds}; tolerance rel {s.options.tolerance.rel:g}"
    )
    for f in s.faults:
        console.print(f"[bold red]FAULT INJECTED[/]: {f}: {escape(FAULTS[f])}. The own solver was broken on purpose.")
    if s.stopped_early:
        console.print(f"Stopped after {s.cases_run} case(s): the failure limit was reached.")
    c, x = s.counts, s.explained
    line = Text.assemble(
        ("pass ", ""),
        (str(c["pass"]), "green"),
        ("  ·  fail ", ""),
        (str(c["fail"]), "bold red" if c["fail"] else ""),
        (f" ({x['fail']} explained: roundoff or an ngspice limitation)", "dim"),
        ("  ·  unavailable ", ""),
        (str(c["unavailable"]), "yellow" if c["unavailable"] else ""),
        (f" ({x['unavailable']} expected by the case's caveat)", "dim"),
        ("  ·  error ", ""),
        (str(c["error"]), "bold magenta" if c["error"] else ""),
    )
    console.print(line)
    shrinking = f"; shrinking {s.shrink_s:.1f} s" if s.shrink_s else ""
    console.print(
        f"{s.rate:.1f} cases/s through both engines ({s.workers} ngspice worker(s); "
        f"{s.elapsed_s:.1f} s, own solver {s.own_s:.1f} s of it){shrinking}"
        f"{'; ' + escape(s.ngspice_version) if s.ngspice_version else ''}"
    )


def _error_table(s: FuzzSummary) -> Table:
    """Percentiles of the judged error per compared quantity, and where the worst one was."""
    table = Table(title="judged error |Δ| / max(|ref|, roundoff floor) per compared value", title_justify="left")
    for h in ("quantity", "compared", "p50", "p90", "p99", "p99.9", "max", "worst at (case seed, f)"):
        # Headers and numbers keep their width; the place of the worst case wraps at its spaces; anything
        # that still cannot fit folds rather than losing letters to "…".
        where = h == "worst at (case seed, f)"
        table.add_column(h, justify="left" if h == "quantity" or where else "right", no_wrap=not where, overflow="fold")
    for q in COMPARED:
        p = s.percentiles(q)
        worst = s.worst.get(q)
        table.add_row(
            q,
            str(len(s.errors[q])),
            *(_e(p.get(n)) for n in ("p50", "p90", "p99", "p99.9", "max")),
            f"{worst[1]}, {worst[2]:g} Hz" if worst else "—",
        )
    return table


def _print_problems(console: Console, s: FuzzSummary) -> None:
    """Unexplained cases with how to rerun them, the shrunk reproducers, and the explained cases in brief."""
    if s.problems:
        t = Table(title=f"unexplained: {len(s.problems)} case(s)", title_justify="left")
        for h in ("case seed", "family", "status", "why"):
            t.add_column(h, overflow="fold")
        for o in s.problems:
            t.add_row(str(o.case.seed), o.case.family, o.status, escape(whole_words(o.reason, 400)))
        console.print(t)
        console.print("Seeds of the failures: " + " ".join(str(o.case.seed) for o in s.problems))
        console.print(f"Rerun one alone: {regenerate_command(s.problems[0].case.seed, s.options.knobs)}")
    for r in s.reproducers:
        files = f" → {escape(r.files[1])}" if r.files else ""
        console.print(
            f"shrunk {r.seed}: {r.shrunk.original_size[0]} elements, {r.shrunk.original_size[1]} nodes, "
            f"{r.shrunk.original_size[2]} freq → {r.shrunk.size[0]}, {r.shrunk.size[1]}, {r.shrunk.size[2]} "
            f"(still {r.outcome.status}){files}"
        )
    if s.explained_cases:
        console.print(f"[dim]Explained ({len(s.explained_cases)}; first {min(_SHOWN, len(s.explained_cases))}):[/]")
        for o in s.explained_cases[:_SHOWN]:
            console.print(f"[dim]  {o.case.seed} {o.status}: {escape(whole_words(o.reason, 240))}[/]")


class _Rate(ProgressColumn):
    def render(self, task) -> Text:
        return Text(f"{task.speed:.1f} cases/s" if task.speed else "", style="cyan")


@contextmanager
def fuzz_progress(total: int, console: Console | None = None) -> Iterator:
    """A progress bar with rate and time left on stderr; yields the ``on_progress`` callback for ``run_fuzz``."""
    console = console or Console(stderr=True)
    progress = Progress(
        TextColumn("fuzz"),
        BarColumn(),
        MofNCompleteColumn(),
        _Rate(),
        TimeRemainingColumn(),
        TextColumn("{task.fields[problems]}"),
        console=console,
        transient=True,
        disable=not console.is_terminal,
    )
    with progress:
        task = progress.add_task("cases", total=total, problems="")
        seen = [0]

        def advance(done: int, _total: int, outcome) -> None:
            seen[0] += outcome.problem
            progress.update(task, completed=done, problems=f"[bold red]{seen[0]} unexplained[/]" if seen[0] else "")

        yield advance
