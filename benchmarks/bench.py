"""Benchmark: the own solver against the SPICE route, growth with size, sparse back ends, batch throughput, Dask.

    python benchmarks/bench.py            # the usual run (~10 minutes on 2 cores)
    python benchmarks/bench.py --full     # with the whole-process rows at 1,000,000 nodes (`make bench-full`)
    python benchmarks/bench.py --quick    # small sizes only: a smoke test that every figure is printed

Not part of CI: timings belong to this machine at this moment (the load average is printed with them).
It opens with the whole command as a user times it (``whole``: ``crosscheck reduce`` in a child process
per family at 1k/10k/100k nodes, 1M with ``--full``, the SPICE route beside it, the reading rate, and the
two goal ratios), then the in-process figures. Networks come from four topology families (``crosscheck.fuzz.large``), at 100 to 100,000 non-ground nodes
(the fifth, the power grid, has its own section: ``reference_scale``, the SPICE route at 1k/10k/100k nodes
beside the own route, AC and DC):

* ladder: series R, shunt C or L and a shunt R at every node (a cable or filter chain);
* tree: each node hangs from a random one of the 50 before it, R up, C or L down (a distribution feeder);
* grid: a square mesh of resistors, C or R to ground at two nodes in three (a power plane, a substrate);
* random: points scattered in a square, each joined to its three nearest neighbours by R, L or C (a random
  graph with the locality a layout has; a graph with no locality has LU fill ~n² for any direct solver).

Each measurement runs in a fresh child process so that its peak resident memory (VmHWM) is its own; the
SPICE child is sandboxed as the ngspice workers are (empty working directory, private HOME, no SPICE_* or
NGSPICE_* variables). The own route is ``equivalent.thevenin`` (V_th and Z_th, condition estimate
included); the SPICE route is ``reference.solve``, the call an ngspice pool worker makes (deck written,
loaded and run, vectors read), on an engine started beforehand as a pool keeps it. Each timed call gets a
fresh copy of the network (nothing cached), and quick measurements run several rounds of both routes,
alternating, keeping the best of each: the machine's speed drifts, and the best runs are comparable.
"""

from __future__ import annotations

import argparse
import json
import math
import os
import sys
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np

from crosscheck.fuzz.large import FAMILIES, build

sys.path.insert(0, str(Path(__file__).resolve().parent))  # this script's own folder: its batch sections
from reference_scale import QUICK_SIZES as SCALE_QUICK_SIZES  # noqa: E402  (after the line above, which finds it)
from reference_scale import SIZES as SCALE_SIZES  # noqa: E402
from reference_scale import report_reference_scale  # noqa: E402
from startup import report_startup  # noqa: E402
from throughput import report_dask, report_small_cases, report_throughput  # noqa: E402
from timing import run_child, section, timed  # noqa: E402
from whole import FULL_SIZES as WHOLE_FULL_SIZES  # noqa: E402
from whole import SIZES as WHOLE_SIZES  # noqa: E402
from whole import report_ratios, report_whole  # noqa: E402

from crosscheck.model.network import Network

SIZES = (100, 1_000, 10_000, 100_000)
QUICK_SIZES = (100, 1_000)
#: The sweep: 30 points, 6 per decade from 100 Hz (one ``.ac dec`` card for ngspice).
SWEEP_HZ = tuple(float(100.0 * 10 ** (i / 6)) for i in range(30))
#: At and above this many nodes the own route runs at one frequency only, and the SPICE route is not run.
ONE_FREQUENCY_FROM = 100_000
SPICE_LIMIT_S = 60.0
#: Rounds of both routes, alternating, where the SPICE route takes under 5 s; the best of each is kept.
ROUNDS = 3
ORDERINGS = ("COLAMD", "MMD_AT_PLUS_A", "MMD_ATA", "NATURAL")


# --------------------------------------------------------------------------- one measurement (a child process)


def _peak_mib() -> float:
    """This process's peak resident memory so far (VmHWM), in MiB."""
    import resource

    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


def _resident_mib() -> float:
    try:
        with open("/proc/self/statm") as fh:
            return int(fh.read().split()[1]) * os.sysconf("SC_PAGE_SIZE") / 2**20
    except OSError:
        return math.nan


def _child(job: dict) -> dict:
    """Run one measurement in this (fresh) process and return its figures."""
    network, port = build(job["family"], job["nodes"])
    freqs = list(SWEEP_HZ[: job["freqs"]])
    out: dict = {"resident_mib": _resident_mib()}
    if job["route"] == "own":
        from crosscheck.model.network import floating_reference
        from crosscheck.own.equivalent import thevenin
        from crosscheck.own.solver import MnaSystem

        thevenin(*build(job["family"], 200), freqs)  # imports and first-call costs (sparse path), untimed
        repeat = _repeats(job["nodes"])
        out["one_frequency_seconds"], eqs = timed(lambda: thevenin(fresh(network), port, freqs[:1]), repeat)
        out["seconds"], eqs = (
            timed(lambda: thevenin(fresh(network), port, freqs), repeat)
            if len(freqs) > 1
            else (out["one_frequency_seconds"], eqs)
        )
        out["vth"] = [[e.vth.real, e.vth.imag] for e in eqs]
        out["zth"] = [[e.zth.real, e.zth.imag] for e in eqs]
        out["condition"] = max(e.condition for e in eqs)
        out["peak_mib"] = _peak_mib()
        ties = [r] if (r := floating_reference(network, port)) is not None else []
        system = MnaSystem(network, ties)
        out["unknowns"] = system.size
        rhs = np.stack([system.source_vector(), system.injection_vector(port.a, port.b)], axis=1)
        for estimate in (True, False):
            key = "solve_with_condition" if estimate else "solve_without_condition"
            out[key], _ = timed(lambda e=estimate: system.solve_many(freqs, rhs, estimate_condition=e), repeat)
    else:
        from crosscheck.spice.engine import Engine, solve

        engine = Engine()
        solve(engine, *build(job["family"], 10), freqs[:1])  # first-call costs, untimed
        started = time.perf_counter()
        result = solve(engine, fresh(network), port, freqs)
        out["seconds"] = time.perf_counter() - started
        if out["seconds"] < 1.0:  # quick enough to repeat, as the own route is: keep the best
            out["seconds"] = min(out["seconds"], timed(lambda: solve(engine, fresh(network), port, freqs), 2)[0])
        out["vth"] = [[p.vth.real, p.vth.imag] if p.vth is not None else None for p in result.points]
        out["zth"] = [[p.zth.real, p.zth.imag] if p.zth is not None else None for p in result.points]
        out["peak_mib"] = _peak_mib()
        out["engine"] = result.ngspice_version
    return out


def fresh(network: Network) -> Network:
    """The same network with nothing derived yet (Network caches its node tables and checks on first
    use): each timed run pays for them, as a network read from a file would."""
    return replace(network)


def _repeats(nodes: int) -> int:
    """How many times to run a measurement and keep the fastest: more where one run is short and noisy."""
    return 5 if nodes <= 1_000 else 2 if nodes <= 10_000 else 1


def _run_child(job: dict, limit_s: float | None) -> dict:
    """``_child(job)`` in a fresh interpreter; for ngspice, in a sandbox like the pool's workers."""
    return run_child(__file__, job, limit_s, sandboxed=job["route"] == "spice")


# --------------------------------------------------------------------------- the report


@dataclass
class _Row:
    family: str
    nodes: int
    freqs: int
    own: dict
    spice: dict | None
    spice_note: str = ""
    spice_limit_s: float = SPICE_LIMIT_S


def _fmt_s(x: float | None) -> str:
    if x is None or not math.isfinite(x):
        return "—"
    return f"{x * 1e3:.1f} ms" if x < 1 else f"{x:.2f} s"


def _agreement(own: dict, spice: dict) -> float:
    """Largest relative difference of V_th and Z_th between the routes, over the sweep."""
    worst = 0.0
    for key in ("vth", "zth"):
        for a, b in zip(own.get(key, []), spice.get(key, [])):
            if a is None or b is None:
                return math.nan
            x, y = complex(*a), complex(*b)
            worst = max(worst, abs(x - y) / max(abs(y), 1e-300))
    return worst


def fitted_exponent(nodes: Sequence[float], seconds: Sequence[float]) -> float:
    """The slope of log(seconds) against log(nodes), by least squares: cost ∝ nodes^slope."""
    pairs = [(math.log(n), math.log(s)) for n, s in zip(nodes, seconds) if s and s > 0 and math.isfinite(s)]
    if len(pairs) < 2:
        return math.nan
    x, y = np.array(pairs).T
    return float(np.polyfit(x, y, 1)[0])


def run_routes(families: Sequence[str], sizes: Sequence[int], spice_limit_s: float, spice_ok: str | None) -> list[_Row]:
    section("own solver vs SPICE route (same networks, same frequencies)")
    print(
        f"{'family':8} {'nodes':>7} {'unknowns':>8} {'freqs':>5} {'own':>10} {'SPICE route':>20} "
        f"{'SPICE/own':>10} {'own peak':>10} {'SPICE peak':>11} {'agree':>8} {'condition':>10}"
    )
    rows = []
    for family in families:
        spice_before: float | None = None
        for nodes in sizes:
            freqs = 1 if nodes >= ONE_FREQUENCY_FROM else len(SWEEP_HZ)
            own_job = {"family": family, "nodes": nodes, "freqs": freqs, "route": "own"}
            spice_job = dict(own_job, route="spice")
            own, spice, note = _run_child(own_job, None), None, ""
            if spice_ok is not None:
                note = f"unavailable: {spice_ok}"
            elif nodes >= ONE_FREQUENCY_FROM:
                note = "skipped: not run at this size"
            elif spice_before is not None and spice_before * 10 > spice_limit_s:
                note = f"skipped: {_fmt_s(spice_before)} at a tenth of the size"
            else:
                spice = _run_child(spice_job, spice_limit_s)
                # Where both routes are quick, more rounds, the routes alternating: this machine's speed
                # drifts (up to 2x between seconds on a shared host), and the best of each route's
                # rounds compares them at the same, least disturbed speed.
                for _ in range(ROUNDS - 1 if spice.get("seconds", math.inf) < 5.0 else 0):
                    own = _faster(own, _run_child(own_job, None))
                    spice = _faster(spice, _run_child(spice_job, spice_limit_s))
                note = spice.get("stopped", "")
                spice_before = spice.get("seconds", spice_limit_s)
            rows.append(_Row(family, nodes, freqs, own, spice, note, spice_limit_s))
            _print_row(rows[-1])
    print(
        "peak: the measuring process's peak resident memory (interpreter, network and solve), MiB; "
        "agree: largest |Δ|/|ngspice| of V_th and Z_th over the sweep"
    )
    print(
        f"times: the best of each route's runs; where the SPICE route takes under 5 s, {ROUNDS} rounds of "
        "both routes, alternating, each in a fresh process"
    )
    return rows


def _faster(first: dict, second: dict) -> dict:
    """Of two measurements of one route, the one that took less time (a stopped one never wins)."""
    return second if second.get("seconds", math.inf) < first.get("seconds", math.inf) else first


def _print_row(row: _Row) -> None:
    own, spice = row.own, row.spice or {}
    if "stopped" in own:
        print(f"{row.family:8} {row.nodes:>7} own route {own['stopped']}")
        return
    s_time = spice.get("seconds")
    ratio = (
        f"{s_time / own['seconds']:.1f}x"
        if s_time
        else (
            f"> {row.spice_limit_s / own['seconds']:.0f}x"
            if "stopped" in spice and "s (stopped)" in spice["stopped"]
            else "—"
        )
    )
    spice_text = _fmt_s(s_time) if s_time else (row.spice_note or "—")
    agree = f"{_agreement(own, spice):.1e}" if s_time else "—"
    print(
        f"{row.family:8} {row.nodes:>7} {own['unknowns']:>8} {row.freqs:>5} {_fmt_s(own['seconds']):>10} "
        f"{spice_text[:40]:>20} {ratio:>10} {own['peak_mib']:>7.0f} MiB "
        f"{(str(round(spice['peak_mib'])) + ' MiB') if s_time else '—':>11} {agree:>8} {own['condition']:>10.2g}",
        flush=True,
    )


def report_growth(rows: list[_Row]) -> None:
    section("growth with node count (fitted exponent, log-log least squares)")
    print(
        "cost ∝ nodes^k; own: the equivalent at one frequency (network set-up included); SPICE: the whole 30-point run"
    )
    for family in sorted({r.family for r in rows}, key=FAMILIES.index):
        mine = [r for r in rows if r.family == family and "seconds" in r.own]
        own_k = fitted_exponent([r.nodes for r in mine], [r.own["one_frequency_seconds"] for r in mine])
        spiced = [r for r in mine if r.spice and "seconds" in r.spice]
        spice_k = fitted_exponent([r.nodes for r in spiced], [r.spice["seconds"] for r in spiced])
        sizes = ", ".join(f"{r.nodes:,}" for r in mine)
        print(
            f"{family:8} own k = {own_k:.2f} (sizes {sizes});  SPICE route k = {spice_k:.2f} "
            f"(sizes {', '.join(f'{r.nodes:,}' for r in spiced) or 'none'})"
        )


def report_condition_cost(rows: list[_Row]) -> None:
    section("condition estimate cost (solve_many with and without it)")
    for r in rows:
        own = r.own
        if "solve_with_condition" not in own or r.nodes < 1000:
            continue
        extra = own["solve_with_condition"] - own["solve_without_condition"]
        share = extra / own["solve_with_condition"] if own["solve_with_condition"] > 0 else math.nan
        print(
            f"{r.family:8} {r.nodes:>7} nodes, {r.freqs:>2} freqs: with {_fmt_s(own['solve_with_condition'])}, "
            f"without {_fmt_s(own['solve_without_condition'])} (estimate {share:.0%} of the solve)"
        )


def report_backends(families: Sequence[str], sizes: Sequence[int]) -> None:
    from scipy.sparse.linalg import splu

    from crosscheck.own import sparse_backends
    from crosscheck.own.solver import MnaSystem

    section("sparse LU back ends and orderings (one numeric factorization + a 2-column solve, at 1 kHz)")
    print(
        f"{'family':8} {'nodes':>7} "
        + " ".join(f"{name:>14}" for name in ("KLU", *ORDERINGS))
        + "  (SuperLU's orderings; KLU's analysis is timed apart, once per network)"
    )
    for family in families:
        for nodes in sizes:
            network, port = build(family, nodes)
            system = MnaSystem(network)
            a = system.matrix(1e3)
            rhs = np.stack([system.source_vector(), system.injection_vector(port.a, port.b)], axis=1)
            cells = []
            if "klu" in sparse_backends.available():
                sparse_backends.analyse(
                    MnaSystem(build(family, 200)[0])._pattern, "klu"
                )  # load the KLU library, untimed
                started = time.perf_counter()
                analysis = sparse_backends.analyse(system._pattern, "klu")
                symbolic = time.perf_counter() - started
                cells.append(
                    _best(lambda an=analysis, m=a, b=rhs: an.factor(m.data).solve(b)) + f" +{_fmt_s(symbolic)}"
                )
            else:
                cells.append("not installed")
            for ordering in ORDERINGS:
                if nodes > 10_000 and ordering != sparse_backends.SUPERLU_ORDERING:
                    cells.append("—")
                    continue
                with sparse_backends._one_blas_thread():  # as the solver runs SuperLU
                    cells.append(
                        _best(
                            lambda m=a, o=ordering, b=rhs: splu(m, permc_spec=o).solve(b),
                            repeat=1 if nodes >= 10_000 else 3,
                        )
                    )
            print(f"{family:8} {nodes:>7} " + " ".join(f"{c:>14}" for c in cells), flush=True)
    print(
        f"default: {sparse_backends.default_backend()} (auto: SuperLU from {sparse_backends.SUPERLU_FLOPS[0]:.0e} estimated flops; it orders with "
        f"{sparse_backends.SUPERLU_ORDERING}); at 100,000 nodes only the default SuperLU ordering is timed"
    )


def _best(fn: Callable[[], object], repeat: int = 3) -> str:
    best = math.inf
    for _ in range(repeat):
        started = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - started)
    return _fmt_s(best)


# --------------------------------------------------------------------------- main


def main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="python -m crosscheck.bench", description=__doc__.split("\n\n")[0])
    parser.add_argument(
        "--quick", action="store_true", help=f"sizes {', '.join(map(str, QUICK_SIZES))} only, fewer cases: a smoke test"
    )
    parser.add_argument("--sizes", type=int, nargs="+", metavar="N", help="node counts (default 100 1000 10000 100000)")
    parser.add_argument(
        "--families", nargs="+", choices=FAMILIES, default=[f for f in FAMILIES if f != "powergrid"]
    )  # the power grid (DC values) has its own section, at 0 Hz: reference_scale
    parser.add_argument(
        "--spice-limit",
        type=float,
        default=SPICE_LIMIT_S,
        metavar="S",
        help=f"seconds the SPICE route may take on one network (default {SPICE_LIMIT_S:g})",
    )
    parser.add_argument(
        "--cases",
        type=int,
        default=None,
        metavar="N",
        help="small random cases for the throughput and Dask figures (default 400, quick 60)",
    )
    parser.add_argument(
        "--full", action="store_true", help="whole-process rows at 1,000,000 nodes too (`make bench-full`)"
    )
    parser.add_argument("--child", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.child:
        print(json.dumps(_child(json.loads(args.child))))
        return 0
    sizes = tuple(args.sizes or (QUICK_SIZES if args.quick else SIZES))
    count = args.cases or (60 if args.quick else 400)
    started = time.perf_counter()
    _header()
    from crosscheck.spice.engine import ngspice_available

    spice_ok = ngspice_available()
    whole_sizes = WHOLE_SIZES[:1] if args.quick else WHOLE_FULL_SIZES if args.full else WHOLE_SIZES
    report_whole(whole_sizes, args.spice_limit, spice_ok)
    if not args.quick:
        report_ratios(spice_ok)
    rows = run_routes(args.families, sizes, args.spice_limit, spice_ok)
    report_reference_scale(SCALE_QUICK_SIZES if args.quick else SCALE_SIZES, None, spice_ok)
    report_growth(rows)
    report_condition_cost(rows)
    report_backends(args.families, [n for n in sizes if n <= 10_000] + ([100_000] if 100_000 in sizes else []))
    section("start-up (whole process)")
    report_startup(3 if args.quick else 10)
    report_small_cases(60 if args.quick else 300)
    local = report_throughput(count, spice_ok)
    report_dask(local, count)
    section("total")
    print(f"total benchmark time: {time.perf_counter() - started:.0f} s")
    return 0


def _header() -> None:
    import platform

    import scipy

    from crosscheck.own import sparse_backends, sweep_kernel

    backend = sparse_backends.default_backend()
    loop = "compiled" if backend in ("klu", "auto") and sweep_kernel.load() is not None else "Python"
    print("crosscheck benchmark")
    print(
        f"machine: {os.cpu_count()} cores, Python {platform.python_version()}, numpy {np.__version__}, "
        f"scipy {scipy.__version__}, sparse LU: {backend}, sweep loop: {loop}; "
        f"load average at start: {', '.join(f'{x:.1f}' for x in os.getloadavg())}"
    )
    print(
        f"sweep: {len(SWEEP_HZ)} frequencies, {SWEEP_HZ[0]:g} Hz to {SWEEP_HZ[-1]:.4g} Hz; from "
        f"{ONE_FREQUENCY_FROM:,} nodes one frequency ({SWEEP_HZ[0]:g} Hz)"
    )


if __name__ == "__main__":
    sys.exit(main())
