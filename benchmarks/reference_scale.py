"""Benchmark section: the SPICE route at the own route's scale, on the power-grid family, AC and DC.

    python benchmarks/reference_scale.py              # 1k, 10k and 100k nodes (the 100k SPICE run takes long)
    python benchmarks/reference_scale.py --quick      # 1k nodes only
    python benchmarks/bench.py                        # runs this section too (its --quick picks 1k only)

For each size: the own route (``equivalent.thevenin``) and the SPICE route (``engine.solve``, what a pool
worker calls) on the same network at 0 Hz, each in a fresh child process, the SPICE route sandboxed as the
workers are and stopped at the limit a case of that size gets by default (``model.budget``'s size rule,
unless ``--spice-limit`` says otherwise). The AC rows excite the network with AC values equal to the DC
values (``fuzz.large.powergrid(excitation="ac")``); the DC rows (``excitation = "dc"``, sources' DC values,
ngspice's ``.op`` for V_th) run only when the model has ``Network.excitation``, and say so otherwise.
"""

from __future__ import annotations

import argparse
import json
import math
import sys
import time
from collections.abc import Sequence
from dataclasses import fields

from timing import run_child

SIZES = (1_000, 10_000, 100_000)
QUICK_SIZES = (1_000,)


def dc_supported() -> bool:
    """True when the model carries DC excitation (``Network.excitation``)."""
    from crosscheck.model.network import Network

    return "excitation" in {f.name for f in fields(Network)}


def _child(job: dict) -> dict:
    """One route on one grid, in this fresh process: seconds, V_th, Z_th, and for ngspice its version line."""
    from crosscheck.fuzz.large import powergrid

    network, port = powergrid(job["nodes"], 1, excitation=job["excitation"])
    out: dict = {"elements": len(network.elements), "nodes": len(network.nodes)}
    if job["route"] == "own":
        from crosscheck.own.equivalent import thevenin

        started = time.perf_counter()
        eq = thevenin(network, port, [0.0])[0]
        out["seconds"] = time.perf_counter() - started
        vth, zth = eq.vth, eq.zth
    else:
        from crosscheck.spice.engine import Engine, solve

        engine = Engine()
        started = time.perf_counter()
        point = solve(engine, network, port, [0.0]).points[0]
        out["seconds"] = time.perf_counter() - started
        out["engine"] = engine.version
        vth, zth = point.vth, point.zth
    out["vth"] = None if vth is None else [vth.real, vth.imag]
    out["zth"] = None if zth is None else [zth.real, zth.imag]
    return out


def _run_child(job: dict, limit_s: float | None) -> dict:
    """``_child(job)`` in a fresh interpreter, in an empty directory with a private HOME and no SPICE_* variables."""
    return run_child(__file__, job, limit_s)


def _agreement(own: dict, spice: dict) -> float:
    worst = 0.0
    for key in ("vth", "zth"):
        a, b = own.get(key), spice.get(key)
        if a is None or b is None:
            return math.nan
        worst = max(worst, abs(complex(*a) - complex(*b)) / max(abs(complex(*b)), 1e-300))
    return worst


def _fmt_s(x: float | None) -> str:
    if x is None or not math.isfinite(x):
        return "—"
    return f"{x * 1e3:.0f} ms" if x < 1 else f"{x:.1f} s"


def report_reference_scale(sizes: Sequence[int], spice_limit_s: float | None, spice_ok: str | None) -> None:
    """The section: one row per size and excitation, the SPICE route's time beside the own route's."""
    from crosscheck.model.budget import limits_rule, scaled_time_s

    print("\n== the SPICE route at scale: power grid (two layers, vias, pads, loads), one point at 0 Hz ==")
    print(
        f"limit per SPICE run: {'--spice-limit ' + format(spice_limit_s, 'g') + ' s' if spice_limit_s else limits_rule()}"
    )
    print(f"{'nodes':>7} {'elements':>8} {'excitation':>10} {'own':>9} {'SPICE route':>28} {'limit':>8} {'agree':>8}")
    engine_line = ""
    for nodes in sizes:
        for excitation in ("ac", "dc"):
            if excitation == "dc" and not dc_supported():
                print(f"{nodes:>7} {'':>8} {'dc':>10} not run: this model has no Network.excitation yet")
                continue
            job = {"nodes": nodes, "excitation": excitation, "route": "own"}
            own = _run_child(job, None)
            limit = spice_limit_s or scaled_time_s(own.get("elements", 0))
            spice = {"stopped": f"unavailable: {spice_ok}"} if spice_ok else _run_child(dict(job, route="spice"), limit)
            engine_line = spice.get("engine", engine_line)
            agree = _agreement(own, spice) if "seconds" in spice else math.nan
            print(
                f"{own.get('nodes', nodes):>7} {own.get('elements', 0):>8} {excitation:>10} "
                f"{_fmt_s(own.get('seconds')):>9} {(_fmt_s(spice.get('seconds')) if 'seconds' in spice else spice['stopped'])[:28]:>28} "
                f"{_fmt_s(limit):>8} {agree:>8.1e}",
                flush=True,
            )
    print(f"ngspice: {engine_line or 'not run'}; agree: largest |Δ|/|ngspice| of V_th and Z_th")


def main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--quick", action="store_true", help="1,000 nodes only")
    parser.add_argument("--sizes", type=int, nargs="+", metavar="N", help="node counts (default 1000 10000 100000)")
    parser.add_argument(
        "--spice-limit", type=float, default=None, metavar="S", help="seconds per SPICE run (default: the size rule)"
    )
    parser.add_argument("--child", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.child:
        print(json.dumps(_child(json.loads(args.child))))
        return 0
    from crosscheck.spice.engine import ngspice_available

    report_reference_scale(args.sizes or (QUICK_SIZES if args.quick else SIZES), args.spice_limit, ngspice_available())
    return 0


if __name__ == "__main__":
    sys.exit(main())
