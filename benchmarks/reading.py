"""Benchmark: reading large netlists (lines per second) and drawing the HTML report's figures (seconds each).

    python benchmarks/reading.py            # both parts
    python benchmarks/reading.py --quick    # smaller netlists, four corpus cases

Not part of CI: timings belong to this machine at this moment (the load average is printed with them).
Reading: ``read_netlist_reading`` on a 44,809-line RC grid (``fuzz.large`` grid of 17,000 nodes, values as
the writer prints them) and on a 50,000-line ladder whose values carry engineering suffixes (4.7k, 10n),
with the fast path (``model.fast_cards``) and with every line read as a card (``_Reader(file, fast=False)``);
CPU time, best of five, the previous network freed outside the timed call. Figures: the corpus's cases run
through both engines once, then ``plots.case_figure_svg`` per swept case (best of three per case) and the
whole ``html.html_report``.
"""

from __future__ import annotations

import argparse
import glob
import os
import time
from collections.abc import Callable
from functools import partial
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


def _best(call: Callable[[], object], rounds: int) -> float:
    best = float("inf")
    for _ in range(rounds):
        start = time.process_time()
        result = call()
        best = min(best, time.process_time() - start)
        del result
    return best


def _grid_text(nodes: int) -> str:
    from crosscheck.fuzz.large import build
    from crosscheck.model.netlist_writer import write_netlist

    return write_netlist(build("grid", nodes)[0])


def _suffixed_ladder_text(lines: int) -> str:
    """A ladder of ``lines`` lines: V source, then R in series and C to ground, values with suffixes."""
    out = ["suffixed ladder", "V1 n0 0 DC 0 AC 1"]
    k = 0
    while len(out) < lines:
        out.append(f"R{k} n{k} n{k + 1} {1 + k % 97}.{k % 10}k")
        out.append(f"C{k} n{k + 1} 0 {1 + k % 89}n")
        k += 1
    return "\n".join(out[:lines]) + "\n"


def reading(quick: bool) -> None:
    from crosscheck.model import netlist

    def careful(text: str) -> object:
        with netlist.no_cyclic_gc():
            return netlist._Reader("bench.cir", fast=False).read(text, False, None)

    texts = {
        "RC grid (writer's values)": _grid_text(1_700 if quick else 17_000),
        "ladder (suffixed values)": _suffixed_ladder_text(5_000 if quick else 50_000),
    }
    for name, text in texts.items():
        lines = text.count("\n")
        fast = _best(lambda text=text: netlist.read_netlist_reading(text, "bench.cir"), 5)
        slow = _best(lambda text=text: careful(text), 3)
        print(
            f"reading {name}, {lines:,} lines: fast path {fast:.3f} s ({lines / fast:,.0f} lines/s); "
            f"every line as a card {slow:.3f} s ({lines / slow:,.0f} lines/s)"
        )


def figures(quick: bool) -> None:
    from crosscheck.api import run_case_files
    from crosscheck.report import html, plots

    files = sorted(glob.glob(str(ROOT / "corpus" / "**" / "*.toml"), recursive=True))
    results = run_case_files(files[:4] if quick else files)
    swept = [r for r in results if plots.is_swept(r)]
    if not swept:
        print("figures: no swept case in the corpus")
        return
    plots.case_figure_svg(swept[0])  # imports are set-up, not per figure
    times = sorted(_best(partial(plots.case_figure_svg, r), 3) for r in swept)
    median = times[len(times) // 2]
    print(
        f"figures: {len(swept)} swept cases, seconds per figure: min {times[0]:.3f}, median {median:.3f}, "
        f"max {times[-1]:.3f}"
    )
    page = _best(lambda: html.html_report(results), 1)
    print(f"html_report of {len(results)} cases: {page:.2f} s")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="small sizes: a smoke test")
    parser.add_argument("--only", choices=("reading", "figures"), help="run one part")
    args = parser.parse_args()
    print(f"load average {os.getloadavg()[0]:.2f} on {os.cpu_count()} cores")
    if args.only in (None, "reading"):
        reading(args.quick)
    if args.only in (None, "figures"):
        figures(args.quick)


if __name__ == "__main__":
    main()
