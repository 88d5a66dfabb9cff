"""The benchmark's smoke test: `python benchmarks/bench.py --quick` runs and prints every figure.

No timing is asserted here (timing goals live in the benchmark itself); only that each figure's label
and a value under it are printed, so the full run (`make bench`) cannot rot unnoticed.
"""

from __future__ import annotations

import importlib.util
import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from crosscheck.fuzz.large import FAMILIES, build
from crosscheck.model.validation import validate

BENCH = Path(__file__).resolve().parent.parent / "benchmarks" / "bench.py"
_spec = importlib.util.spec_from_file_location("bench", BENCH)
assert _spec is not None and _spec.loader is not None
bench = importlib.util.module_from_spec(_spec)
sys.modules["bench"] = bench  # dataclasses look their module up by name
_spec.loader.exec_module(bench)
fitted_exponent = bench.fitted_exponent

LABELS = (
    "own solver vs SPICE route",
    "SPICE/own",
    "own peak",
    "SPICE peak",
    "agree",
    "growth with node count (fitted exponent, log-log least squares)",
    "condition estimate cost",
    "sparse LU back ends and orderings",
    "COLAMD", "MMD_AT_PLUS_A", "MMD_ATA", "NATURAL", "KLU",
    "batch throughput",
    "verify, local default",
    "verify, each worker holding 1 case",
    "verify, process pool of 2 whole-case tasks",
    "fuzz, local",
    "Dask local cluster",
    "same verdicts: yes",
    "overhead per case",
    "total benchmark time",
    "the SPICE route at scale: power grid",
    "limit per SPICE run: default limits grow with the network",
    "start-up: whole process, best of 3 runs each",
    "small reduce (8 nodes, own)",
    "own route per small case",
    "ngspice's own engine time",
    "whole process, as a user times it",
    "own whole",
    "lines/s",
    "SPICE whole",
)


@pytest.mark.spice
def test_quick_benchmark_prints_every_figure():
    """Every section and column label appears, with a number on each family's rows."""
    done = subprocess.run([sys.executable, str(BENCH), "--quick", "--cases", "40"],
                          capture_output=True, text=True, timeout=900)
    assert done.returncode == 0, done.stderr[-3000:]
    out = done.stdout
    missing = [label for label in LABELS if label not in out]
    assert not missing, f"labels not printed: {missing}\n{out}"
    assert re.search(r"^\s+980\s+1537\s+ac\s+\S+ m?s\s+\S+ m?s\s+\S+ s\s+\d\.\de-\d\d", out, re.MULTILINE), out
    for family in (f for f in FAMILIES if f != "powergrid"):  # the power grid has its own section, above
        rows = re.findall(rf"^{family}\s+(100|1000)\s+\d+\s+30\s+\S+ m?s\s+\S+ m?s\s+\S+x", out, re.MULTILINE)
        assert len(rows) == 2, f"{family}: expected rows at 100 and 1000 nodes with both routes timed\n{out}"
        assert re.search(rf"^{family}\s+own k = -?\d+\.\d\d", out, re.MULTILINE), f"{family}: no fitted exponent"
    for family in ("ladder", "grid", "random"):  # the whole-process rows: own route, peak, reading, SPICE route
        row = rf"^{family}\s+1,000\s+[\d,]+\s+\S+ m?s\s+\d+ MiB\s+\S+ m?s\s+[\d,]+\s+\S+ m?s\s+\S+ m?s\s+\S+x"
        assert re.search(row, out, re.MULTILINE), f"{family}: no whole-process row at 1,000 nodes\n{out}"
    assert re.search(r"overhead per case: [+-]\d+\.\d\d ms", out)
    assert re.search(r"\d+ cases/s", out)


@pytest.mark.parametrize("family", FAMILIES)
def test_benchmark_networks_are_valid_and_sized(family):
    """Each family builds a valid network with the asked number of nodes (a grid rounds to a square)."""
    network, port = build(family, 400)
    validate(network, port)
    # The power grid: 18 rails of 18 nodes and 5 straps of 18 (round(sqrt(400 / 1.25)) = 18).
    assert len(network.nodes) == (18 * (18 + 5) if family == "powergrid" else 400)


def test_fitted_exponent_recovers_a_power_law():
    """The log-log least-squares slope of t = c·n^1.5 is 1.5 (to rounding: 1e-9, common practice)."""
    nodes = np.array([100, 1_000, 10_000, 100_000], dtype=float)
    assert abs(fitted_exponent(nodes, 3e-6 * nodes ** 1.5) - 1.5) <= 1e-9
    assert np.isnan(fitted_exponent([100.0], [1.0]))


def test_a_whole_command_is_timed_with_its_peak_memory_and_failures_named():
    """run_command: a clean exit gives seconds and the child's own peak memory; a failing exit and a command
    stopped at its limit say so (the figures the whole-process rows print)."""
    sys.path.insert(0, str(BENCH.parent))
    from timing import run_command

    grown = run_command([sys.executable, "-c", "b = bytearray(200 * 2**20); b[::4096] = b'x' * len(b[::4096])"], 60)
    assert grown.ok and 0 < grown.seconds < 60
    assert grown.peak_mib >= 200, grown  # the child's 200 MiB, not this process's
    failed = run_command([sys.executable, "-c", "import sys; sys.exit('no such network')"], 60)
    assert not failed.ok and failed.why.startswith("exit 1") and "no such network" in failed.why
    stopped = run_command([sys.executable, "-c", "import time; time.sleep(30)"], 0.5)
    assert not stopped.ok and stopped.why == "> 0.5 s" and stopped.seconds == float("inf")
