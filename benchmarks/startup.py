"""Whole-process start-up: `crosscheck --version` and a small `reduce --engine own`, as a user times them.

    python benchmarks/startup.py             # best of 10 runs of each command
    python benchmarks/startup.py --runs 3    # fewer (bench.py --quick)

Each command runs in a fresh process, both through the installed `crosscheck` script (beside this
interpreter) and as `python -m crosscheck`; the best of N runs is printed (the machine may be shared,
and the best runs are the least disturbed). The small network is an 8-node scenario of our own (a
sensor's RC anti-alias filter and cable), written to a temporary folder. Then the modules each command
imported are listed: the third-party packages, and whether pandas, matplotlib, PySpice or scipy.sparse
was among them (none of them is needed by these two commands).
"""

from __future__ import annotations

import argparse
import json
import math
import os
import subprocess
import sys
import tempfile
import time
from collections.abc import Sequence
from pathlib import Path

#: Our own small scenario: a strain-gauge amplifier's output through a two-pole RC filter and a cable.
SMALL_NETLIST = """\
Strain-gauge amplifier output, anti-alias filter and 2 m of cable, seen from the ADC input
Vamp amp 0 AC 1 0
Rout amp n1 50
R1 n1 n2 1k
C1 n2 0 100n
R2 n2 n3 1k
C2 n3 0 47n
Rc1 n3 n4 0.1
Lc1 n4 n5 0.4u
Cc1 n5 0 100p
Rc2 n5 n6 0.1
Lc2 n6 adc 0.4u
Cc2 adc 0 100p
Rin adc 0 1Meg
.end
"""
#: Packages these commands should not load.
HEAVY = ("pandas", "matplotlib", "PySpice", "scipy.sparse")
_PROBE = """
import runpy, sys
sys.argv = ["crosscheck", *{args!r}]
try:
    runpy.run_module("crosscheck", run_name="__main__")
except SystemExit:
    pass
sys.__stdout__.write("\\n@@" + "\\n@@".join(sorted(sys.modules)) + "\\n")
"""


def best_of(command: Sequence[str], runs: int, cwd: str) -> float:
    """The fastest of ``runs`` whole-process runs of ``command`` (output discarded), in seconds."""
    best = math.inf
    for _ in range(runs):
        started = time.perf_counter()
        subprocess.run(command, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, check=True, cwd=cwd)
        best = min(best, time.perf_counter() - started)
    return best


def modules_loaded(python: str, args: Sequence[str], cwd: str) -> list[str]:
    """Every module ``python -m crosscheck ARGS`` has loaded by the time it exits."""
    out = subprocess.run(
        [python, "-c", _PROBE.format(args=list(args))], capture_output=True, text=True, check=True, cwd=cwd
    ).stdout
    return [line[2:] for line in out.splitlines() if line.startswith("@@")]


def report_startup(runs: int, python: str = sys.executable) -> dict[str, float]:
    """Print the start-up figures; return the best times by command."""
    script = str(Path(python).with_name("crosscheck"))
    work = tempfile.mkdtemp(prefix="crosscheck-startup-")
    netlist = os.path.join(work, "adc_input.cir")
    Path(netlist).write_text(SMALL_NETLIST, encoding="utf-8")
    commands = {
        "--version": ["--version"],
        "small reduce (8 nodes, own)": ["reduce", netlist, "--port", "adc", "0", "--freq", "1k", "--engine", "own"],
    }
    print(f"start-up: whole process, best of {runs} runs each (interpreter: {python})")
    print(f"{'command':30} {'crosscheck script':>18} {'python -m crosscheck':>21}")
    times: dict[str, float] = {}
    baseline = best_of([python, "-c", "pass"], runs, work)
    for name, args in commands.items():
        via_script = best_of([script, *args], runs, work) if os.path.exists(script) else math.nan
        via_module = best_of([python, "-m", "crosscheck", *args], runs, work)
        times[name] = min(via_script, via_module)
        print(f"{name:30} {via_script * 1e3:>15.0f} ms {via_module * 1e3:>18.0f} ms")
    print(f"{'(python -c pass)':30} {baseline * 1e3:>15.0f} ms  (the interpreter alone)")
    for name, args in commands.items():
        loaded = modules_loaded(python, args, work)
        roots = sorted({m.split(".")[0] for m in loaded if not m.startswith("_")} - set(sys.stdlib_module_names))
        heavy = [h for h in HEAVY if any(m == h or m.startswith(h + ".") for m in loaded)]
        own = sum(m.startswith("crosscheck.") for m in loaded)
        print(
            f"{name}: {len(loaded)} modules ({own} of crosscheck); third-party: {', '.join(roots) or 'none'}; "
            f"of {', '.join(HEAVY)}: {', '.join(heavy) or 'none'}"
        )
    return times


def main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--runs", type=int, default=10, help="runs of each command; the best is kept (default 10)")
    parser.add_argument("--python", default=sys.executable, help="the interpreter whose crosscheck is timed")
    parser.add_argument("--json", action="store_true", help="also print the best times as one JSON line")
    args = parser.parse_args(argv)
    times = report_startup(args.runs, args.python)
    if args.json:
        print(json.dumps(times))
    return 0


if __name__ == "__main__":
    sys.exit(main())
