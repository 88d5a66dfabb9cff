"""Benchmark section: the whole command as a user times it, beside the in-process figures, and the goal ratios.

    python benchmarks/whole.py                 # ladder, grid, random at 1k/10k/100k nodes, then the two ratios
    python benchmarks/whole.py --full          # the same with 1,000,000-node rows (several minutes more)
    python benchmarks/whole.py --ratios-only   # only the two done-when ratios
    python benchmarks/bench.py                 # runs this section too (``--full`` there adds the 1M rows)

Each network (``fuzz.large.build``) is written to a netlist file by the project's writer, then
``crosscheck reduce NET --port A B --freq F --engine own`` runs in a child process exactly as a user
types it (the venv's ``crosscheck`` script, Python start-up, imports, reading, validation, solving and
the text report included); its wall time and peak resident memory (``wait4``'s rusage of the child)
are the whole-process row. Beside it, a fresh child reads the same file in-process
(``read_netlist_file_reading``, lines per second) and solves it (``thevenin``). The SPICE route is
``reduce --engine spice`` in a child the same way (the ngspice pool started, the deck written, run and
read), stopped at ``--spice-limit`` and not run at a size above one it did not finish.

The ratios are the whole-process own route against the whole-process SPICE route, each the best of
``ROUNDS`` alternating runs: a 10,000-node RC grid at 10 frequencies (goal 15x) and a 1,000-node
ladder at 30 frequencies (goal 10x).
"""

from __future__ import annotations

import argparse
import json
import math
import os
import sys
import tempfile
import time
from collections.abc import Sequence
from pathlib import Path

from timing import Finished, run_child, run_command, section

FAMILIES = ("ladder", "grid", "random")
SIZES = (1_000, 10_000, 100_000)
FULL_SIZES = (*SIZES, 1_000_000)
SPICE_LIMIT_S = 120.0
ROUNDS = 3
#: 10 frequencies, 100 Hz to 100 kHz (3 a decade), and 30 (6 a decade from 100 Hz), as the ratios ask.
TEN_HZ = tuple(100.0 * 10 ** (i / 3) for i in range(10))
THIRTY_HZ = tuple(100.0 * 10 ** (i / 6) for i in range(30))
#: Limits raised for these trusted networks (a 1M-node ladder has 3M element cards, 113 MiB).
LIMIT_FLAGS = ("--max-elements", "10000000", "--max-netlist-mib", "1024")


def crosscheck_command() -> list[str]:
    """The ``crosscheck`` script installed beside this interpreter, as a user runs it."""
    script = Path(sys.executable).with_name("crosscheck")
    return [str(script)] if script.exists() else [sys.executable, "-m", "crosscheck"]


def write_network(family: str, nodes: int, folder: str) -> tuple[str, tuple[str, str], int]:
    """The network written as a netlist file by a child process: its path, port and line count.

    Built in a child so that this process stays small: Linux carries a process's peak resident memory
    across ``fork`` and ``exec``, so a child started from a large parent would report the parent's peak."""
    done = run_child(__file__, {"write": [family, nodes, folder]}, None, sandboxed=False)
    if "stopped" in done:
        raise RuntimeError(f"writing the {family} network of {nodes} nodes failed: {done['stopped']}")
    return done["path"], (done["port"][0], done["port"][1]), done["lines"]


def _write(family: str, nodes: int, folder: str) -> dict:
    """In the child: build the network, write it with the project's writer."""
    from crosscheck.fuzz.large import build
    from crosscheck.model.netlist_writer import write_netlist

    network, port = build(family, nodes)
    text = write_netlist(network)
    path = os.path.join(folder, f"{family}_{nodes}.cir")
    with open(path, "w") as fh:
        fh.write(text)
    return {"path": path, "port": [port.a, port.b], "lines": text.count("\n")}


def reduce_run(
    path: str, port: tuple[str, str], freqs: Sequence[float], engine: str, limit_s: float | None
) -> Finished:
    """``crosscheck reduce`` on the file, one child process, timed whole."""
    args = ["reduce", path, "--port", *port, "--freq", *(f"{f:.6g}" for f in freqs), "--engine", engine]
    return run_command([*crosscheck_command(), *args, *LIMIT_FLAGS], limit_s)


def _child(job: dict) -> dict:
    """In this fresh process: read the file (seconds, lines per second), then the equivalents (seconds)."""
    if "write" in job:
        return _write(*job["write"])
    from crosscheck.model.netlist import read_netlist_file_reading
    from crosscheck.model.network import Port
    from crosscheck.model.read_limits import ReadLimits
    from crosscheck.own.equivalent import thevenin

    port = Port(*job["port"])
    started, cpu = time.perf_counter(), time.process_time()
    network, _ = read_netlist_file_reading(job["path"], port=port, limits=ReadLimits(10**8, 4096))
    read_s, read_cpu_s = time.perf_counter() - started, time.process_time() - cpu
    started = time.perf_counter()
    thevenin(network, port, job["freqs"])
    return {"read_s": read_s, "read_cpu_s": read_cpu_s, "solve_s": time.perf_counter() - started}


def _fmt(x: float | None) -> str:
    if x is None or not math.isfinite(x):
        return "—"
    return f"{x * 1e3:.0f} ms" if x < 1 else f"{x:.1f} s"


def report_whole(sizes: Sequence[int], spice_limit_s: float, spice_ok: str | None) -> None:
    """One row per family and size at one frequency (1 kHz): whole process, in-process, SPICE route."""
    section("whole process, as a user times it: `crosscheck reduce NET --freq 1k` (child process), 1 frequency")
    print(
        f"{'family':7} {'nodes':>9} {'lines':>9} {'own whole':>10} {'peak':>9} {'read':>8} {'lines/s':>9} "
        f"{'solve':>8} {'SPICE whole':>12} {'SPICE/own':>9}"
    )
    failures: list[str] = []
    with tempfile.TemporaryDirectory(prefix="crosscheck-whole-") as folder:
        for family in FAMILIES:
            spice_done = spice_ok is None
            for nodes in sizes:
                path, port, lines = write_network(family, nodes, folder)
                own = reduce_run(path, port, [1e3], "own", None)
                inner = run_child(__file__, {"path": path, "port": port, "freqs": [1e3]}, None, sandboxed=False)
                spice_text, ratio = "not run", "—"
                if spice_done:
                    spice = reduce_run(path, port, [1e3], "spice", spice_limit_s)
                    spice_done = spice.ok
                    spice_text = _fmt(spice.seconds) if spice.ok else "failed" if spice.why[0] == "e" else spice.why
                    failures += [f"{family} {nodes:,}: SPICE route {spice.why}"] if not spice.ok else []
                    ratio = f"{spice.seconds / own.seconds:.1f}x" if spice.ok and own.ok else "—"
                read_s, read_cpu_s = inner.get("read_s", math.nan), inner.get("read_cpu_s", math.nan)
                print(
                    f"{family:7} {nodes:>9,} {lines:>9,} {_fmt(own.seconds) if own.ok else 'failed':>10} "
                    f"{own.peak_mib:>5.0f} MiB {_fmt(read_s):>8} {lines / read_cpu_s:>9,.0f} "
                    f"{_fmt(inner.get('solve_s')):>8} {spice_text:>12} {ratio:>9}",
                    flush=True,
                )
                failures += [f"{family} {nodes:,}: own route {own.why}"] if not own.ok else []
                os.remove(path)
    for failure in failures:
        print(f"failed: {failure}")
    print(
        "own whole: wall time of the whole command; peak: its peak resident memory; read, solve: the same file "
        "read (validation included) and solved in a fresh process, wall time; lines/s: lines over the reading's "
        "CPU time (less disturbed by a shared machine); SPICE whole: `reduce --engine spice`, stopped at "
        f"{spice_limit_s:g} s ('not run' above a size it did not finish or where ngspice is missing)"
    )


def report_ratios(spice_ok: str | None) -> None:
    """The two done-when ratios, each from runs alternating in one sitting, best of ``ROUNDS`` per route."""
    section(f"goal ratios: whole-process SPICE route / whole-process own route (best of {ROUNDS}, alternating)")
    if spice_ok is not None:
        print(f"not run: ngspice is unavailable ({spice_ok})")
        return
    with tempfile.TemporaryDirectory(prefix="crosscheck-ratio-") as folder:
        for family, nodes, freqs, goal in (("grid", 10_000, TEN_HZ, 15.0), ("ladder", 1_000, THIRTY_HZ, 10.0)):
            path, port, _ = write_network(family, nodes, folder)
            own, spice, why = math.inf, math.inf, []
            for _ in range(ROUNDS):
                for route, kept in (("own", own), ("spice", spice)):
                    run = reduce_run(path, port, freqs, route, None if route == "own" else SPICE_LIMIT_S)
                    why += [f"{route}: {run.why}"] if not run.ok else []
                    best = min(kept, run.seconds) if run.ok else kept
                    own, spice = (best, spice) if route == "own" else (own, best)
            ratio = spice / own
            print(
                f"{family} {nodes:,} nodes, {len(freqs)} frequencies: own {_fmt(own)}, SPICE route {_fmt(spice)}: "
                f"{ratio:.1f}x (goal {goal:g}x: {'met' if ratio >= goal else 'not met'})"
                + (f"; runs that failed: {'; '.join(why)}" if why else ""),
                flush=True,
            )


def main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--full", action="store_true", help="add the 1,000,000-node rows")
    parser.add_argument("--sizes", type=int, nargs="+", metavar="N", help="node counts (default 1000 10000 100000)")
    parser.add_argument("--ratios-only", action="store_true", help="only the two goal ratios")
    parser.add_argument("--spice-limit", type=float, default=SPICE_LIMIT_S, metavar="S")
    parser.add_argument("--child", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.child:
        print(json.dumps(_child(json.loads(args.child))))
        return 0
    from crosscheck.spice.engine import ngspice_available

    spice_ok = ngspice_available()
    print(f"load average at start: {', '.join(f'{x:.1f}' for x in os.getloadavg())} (2-core machine)")
    if not args.ratios_only:
        report_whole(args.sizes or (FULL_SIZES if args.full else SIZES), args.spice_limit, spice_ok)
    report_ratios(spice_ok)
    return 0


if __name__ == "__main__":
    sys.exit(main())
