"""Benchmark: what the HTML report costs, per figure and for the whole command.

    python benchmarks/report_figures.py            # the corpus, three rounds of each command
    python benchmarks/report_figures.py --rounds 1 # a smoke test

Not part of CI: timings belong to this machine at this moment (the load average is printed with them).
In one run: the corpus's cases through both engines once, then ``plots.case_figure_svg`` per swept case
(best of five per case; the median over the cases against the goal of 0.1 s per case) and the whole
``html.html_report`` (best of three); then ``crosscheck verify corpus --output x.html`` against
``--output x.json`` as a user runs them (whole process, wall clock and CPU time, the two alternating,
best of ``--rounds``), and the HTML's extra time per swept case. Between them, the multi-port |Z_ij|
figure and the spread figure per case: the SVG the report writes against the same panels drawn by
matplotlib as before (``matplotlib_figures.py``), best of five per case each, the ratio and the goal, and
what importing matplotlib costs a new process (which the SVG figures no longer pay).
"""

from __future__ import annotations

import argparse
import glob
import os
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable
from functools import partial
from pathlib import Path
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from crosscheck.judge.result import CaseResult

ROOT = Path(__file__).resolve().parent.parent
#: The goal of issue 16 part 4: the HTML report's figures under this many seconds per case.
GOAL_PER_FIGURE_S = 0.1


def _best(call: Callable[[], object], rounds: int) -> float:
    best = float("inf")
    for _ in range(rounds):
        start = time.perf_counter()
        call()
        best = min(best, time.perf_counter() - start)
    return best


def _median_times(draw: Callable[[CaseResult], object], results: list[CaseResult]) -> list[float]:
    """Best of five seconds of ``draw`` per case, sorted (one call first: imports are not per figure)."""
    draw(results[0])
    return sorted(_best(partial(draw, r), 5) for r in results)


def _import_matplotlib_s(rounds: int = 3) -> float:
    """Wall-clock seconds a new process spends importing what the matplotlib figures needed (best of
    ``rounds``, less an empty interpreter's start)."""
    code = "import matplotlib.figure, matplotlib.backends.backend_agg"
    times = {}
    for label, body in (("empty", "pass"), ("matplotlib", code)):
        times[label] = _best(partial(subprocess.run, [sys.executable, "-c", body], check=True), rounds)
    return times["matplotlib"] - times["empty"]


def newer_figures(results: list[CaseResult]) -> None:
    """The multi-port and the spread figure per case: SVG (as the report writes them) against matplotlib
    drawing the same panels to PNG (as the report did), in this process; medians over the cases."""
    import matplotlib_figures  # beside this script; loads matplotlib

    from crosscheck.report import multiport_plots, spread_plots

    kinds = (
        ("multi-port |Z_ij|", multiport_plots.case_z_figure, matplotlib_figures.multiport_png),
        ("spread", spread_plots.spread_figure_svg, matplotlib_figures.spread_png),
    )
    for name, svg, png in kinds:
        cases = [r for r in results if svg(r) is not None]
        if not cases:
            print(f"{name} figures: no case in the corpus draws one")
            continue
        after, before = _median_times(svg, cases), _median_times(png, cases)
        new, old = statistics.median(after), statistics.median(before)
        print(
            f"{name} figures, {len(cases)} cases, median seconds per figure: matplotlib PNG {old:.4f} "
            f"(max {before[-1]:.4f}), SVG {new:.4f} (max {after[-1]:.4f}); SVG {old / new:.0f}x faster; "
            f"goal {GOAL_PER_FIGURE_S} s: SVG median {GOAL_PER_FIGURE_S / new:.0f}x under it"
        )
    print(f"importing matplotlib for those figures cost a new process {_import_matplotlib_s():.3f} s (SVG: none)")


def figures() -> int:
    """Per-figure and whole-page times in this process; returns the number of swept cases."""
    from crosscheck.api import run_case_files
    from crosscheck.report import html, plots

    files = sorted(glob.glob(str(ROOT / "corpus" / "**" / "*.toml"), recursive=True))
    results = run_case_files(files)
    swept = [r for r in results if plots.is_swept(r)]
    if not swept:
        print("figures: no swept case in the corpus")
        return 0
    plots.case_figure_svg(swept[0])  # first call: imports, not per figure
    times = sorted(_best(partial(plots.case_figure_svg, r), 5) for r in swept)
    median = statistics.median(times)
    sizes = sorted(len(plots.case_figure_svg(r) or "") for r in swept)
    print(
        f"figures (SVG): {len(swept)} swept cases of {len(results)}; seconds per figure: min {times[0]:.4f}, "
        f"median {median:.4f}, max {times[-1]:.4f}; goal {GOAL_PER_FIGURE_S} s: median is "
        f"{GOAL_PER_FIGURE_S / median:.0f}x under it; SVG median {sizes[len(sizes) // 2] / 1024:.0f} KiB"
    )
    page = _best(lambda: html.html_report(results), 3)
    print(f"html_report of {len(results)} cases: {page:.3f} s, of which sweep figures {sum(times):.3f} s")
    newer_figures(results)
    return len(swept)


def _command(output: Path) -> tuple[float, float]:
    """Wall-clock and CPU seconds (user + system, the process and the workers it waited for) of
    ``crosscheck verify corpus --output output`` in a new process."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    start = time.perf_counter()
    done = subprocess.run(
        [sys.executable, "-m", "crosscheck", "verify", str(ROOT / "corpus"), "--output", str(output)],
        cwd=ROOT,
        capture_output=True,
        text=True,
        check=False,
    )
    elapsed = time.perf_counter() - start
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    if not output.is_file():
        raise SystemExit(f"verify corpus wrote no {output.name} (exit {done.returncode}):\n{done.stderr[-2000:]}")
    output.unlink()
    return elapsed, cpu


def whole_command(rounds: int, swept: int) -> None:
    """``verify corpus`` writing HTML against writing JSON, alternating, best of ``rounds`` each (wall clock
    and CPU time separately: on a shared machine CPU time is the steadier of the two)."""
    best = {(fmt, kind): float("inf") for fmt in ("html", "json") for kind in ("wall", "cpu")}
    with tempfile.TemporaryDirectory() as folder:
        for _ in range(rounds):
            for fmt in ("json", "html"):
                wall, cpu = _command(Path(folder) / f"r.{fmt}")
                best[fmt, "wall"] = min(best[fmt, "wall"], wall)
                best[fmt, "cpu"] = min(best[fmt, "cpu"], cpu)
    for kind in ("wall", "cpu"):
        html, json = best["html", kind], best["json", kind]
        per_case = f", {(html - json) / swept:+.3f} s per swept case" if swept else ""
        print(
            f"verify corpus, whole process, {kind} time (best of {rounds}): --output x.json {json:.2f} s, "
            f"--output x.html {html:.2f} s; ratio html/json {html / json:.2f}, HTML costs {html - json:+.2f} s"
            f"{per_case}"
        )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rounds", type=int, default=3, help="runs of each whole command (best is kept)")
    args = parser.parse_args()
    print(f"load average {os.getloadavg()[0]:.2f} on {os.cpu_count()} cores")
    swept = figures()
    whole_command(args.rounds, swept)


if __name__ == "__main__":
    main()
