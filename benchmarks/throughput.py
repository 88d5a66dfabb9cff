"""The benchmark's batch sections: small cases through both engines, locally, in a process pool and on Dask.

Run by ``bench.py`` (``make bench``); not a module of the package.
"""

from __future__ import annotations

import math
import time

from timing import section, timed


def _small_cases(count: int, seed: int = 11):
    from crosscheck.fuzz.generate import case_seed, generate_case
    from crosscheck.model.netlist_writer import write_netlist
    from crosscheck.run.check import case_from_netlist

    out = []
    for i in range(count):
        g = generate_case(case_seed(seed, i))
        out.append(case_from_netlist(f"random-{i}.cir", write_netlist(g.network), (g.port.a, g.port.b), g.freqs_hz))
    return out


def _workers_cpu_s(pool) -> float:
    """CPU seconds (user + system) used so far by the pool's live worker processes, from /proc (Linux)."""
    import os

    total = 0.0
    for worker in list(pool._live):
        try:
            with open(f"/proc/{worker.process.pid}/stat") as fh:
                fields = fh.read().rsplit(")", 1)[1].split()
        except (OSError, AttributeError):
            return math.nan
        total += (int(fields[11]) + int(fields[12])) / os.sysconf("SC_CLK_TCK")
    return total


def _verify_run(cases: list, pool) -> dict:
    """One timed ``run_cases`` through ``pool``: seconds, results, and CPU per case in this process and in workers."""
    from crosscheck.run.check import run_cases

    cpu, workers, started = time.process_time(), _workers_cpu_s(pool), time.perf_counter()
    results = run_cases(cases, pool=pool)
    seconds = time.perf_counter() - started
    count = len(cases)
    return {
        "seconds": seconds,
        "results": results,
        "main_ms": (time.process_time() - cpu) / count * 1e3,
        "workers_ms": (_workers_cpu_s(pool) - workers) / count * 1e3,
    }


def _held_ahead_runs(cases: list, pool, rounds: int = 3) -> dict[int, list[dict]]:
    """``run_cases`` with each worker holding 1 case (nothing sent ahead) and the default ``AHEAD_CASES``,
    alternating on one pool, ``rounds`` times each: the machine may be shared, so compare the best."""
    from crosscheck.spice import workers

    default = workers.AHEAD_CASES
    runs: dict[int, list[dict]] = {1: [], default: []}
    try:
        for _ in range(rounds):
            for ahead in runs:
                workers.AHEAD_CASES = ahead
                runs[ahead].append(_verify_run(cases, pool))
    finally:
        workers.AHEAD_CASES = default
    return runs


def _print_cpu(runs: dict[int, list[dict]], count: int) -> None:
    for ahead, mine in runs.items():
        best = min(mine, key=lambda r: r["seconds"])
        main_ms = sorted(r["main_ms"] for r in mine)[len(mine) // 2]
        workers_ms = sorted(r["workers_ms"] for r in mine)[len(mine) // 2]
        label = (
            "verify, each worker holding 1 case (nothing sent ahead; otherwise the local default)"
            if ahead == 1
            else f"verify, local default (own solver here, ngspice pool of 2, up to {ahead} small cases per worker)"
        )
        print(
            f"{label}: best {count / best['seconds']:.0f} cases/s; CPU per case "
            f"(median of {len(mine)}): this process {main_ms:.2f} ms, the workers together {workers_ms:.2f} ms, so a free "
            f"2-core machine would allow about {2e3 / (main_ms + workers_ms):.0f} cases/s "
            f"(this process alone {1e3 / main_ms:.0f}, the workers alone {2e3 / workers_ms:.0f})"
        )


def report_throughput(count: int, spice_ok: str | None) -> dict:
    """Cases per second through both engines and the comparison, warm pools; returns the local run's results."""
    import multiprocessing
    import os
    from concurrent.futures import ProcessPoolExecutor

    from crosscheck.fuzz.loop import FuzzOptions, run_fuzz
    from crosscheck.run.batch import run_batch
    from crosscheck.run.check import run_cases
    from crosscheck.spice.workers import SpicePool

    section(f"batch throughput ({count} small random cases, 2-8 nodes, both engines and the comparison)")
    if spice_ok is not None:
        print(f"verify local default: n/a ({spice_ok})\nverify process pool: n/a\nfuzz local: n/a")
        return {}
    cases = _small_cases(count)
    warm = cases[:8]
    print(f"load average before: {', '.join(f'{x:.1f}' for x in os.getloadavg())} (2 cores: above 2, shared)")
    with SpicePool(workers=2) as pool, ProcessPoolExecutor(2, mp_context=multiprocessing.get_context("spawn")) as ex:
        run_cases(warm, pool=pool)
        run_batch(warm, ex)
        runs = _held_ahead_runs(cases, pool)
        tasks_s, tasks = timed(lambda: run_batch(cases, ex), 2)
        run_fuzz(FuzzOptions(count=8, seed=2, shrink=False), pool=pool)
        fuzz = run_fuzz(FuzzOptions(count=count, seed=3, shrink=False), pool=pool)
    _print_cpu(runs, count)
    local_best = min(runs[max(runs)], key=lambda r: r["seconds"])  # the default: cases sent ahead
    local, local_s = local_best["results"], local_best["seconds"]
    engine_s = sum(r.spice.elapsed_s for r in local if r.spice is not None)
    if engine_s > 0:
        print(
            f"  beside it, ngspice's own engine time (SpiceResult.elapsed_s, best run): {engine_s / count * 1e3:.2f} "
            f"ms per case, so ngspice alone on 2 workers would allow {2 * count / engine_s:.0f} cases/s "
            f"(crosscheck's share of the run: {max(0.0, 1 - engine_s / 2 / local_s):.0%})"
        )
    same = [r.verdict for r in tasks] == [r.verdict for r in local]
    print(
        f"verify, process pool of 2 whole-case tasks: {count / tasks_s:.0f} cases/s (same verdicts: "
        f"{'yes' if same else 'NO'})"
    )
    print(
        f"fuzz, local (generate, both engines, judge): {fuzz.rate:.0f} cases/s "
        f"({sum(fuzz.counts.values())} cases: {', '.join(f'{k} {v}' for k, v in fuzz.counts.items())})"
    )
    print(f"load average after: {', '.join(f'{x:.1f}' for x in os.getloadavg())}")
    print("pools were started before timing; starting one costs ~0.5 s per ngspice worker")
    return {"cases": cases, "local": local, "local_s": local_s}


def report_small_cases(count: int = 300, rounds: int = 5) -> float:
    """The own route's time per small case (2-8 nodes, 3 frequencies, condition included), in-process,
    each call on a fresh copy of the network (nothing cached); returns seconds per case."""
    from dataclasses import replace

    from crosscheck.fuzz.generate import case_seed, generate_case
    from crosscheck.own.equivalent import thevenin

    section(f"small cases, own route in-process ({count} random networks of 2-8 nodes, 3 frequencies)")
    drafts = [generate_case(case_seed(11, i)) for i in range(count)]
    freqs = [1e2, 1e3, 1e4]

    def run() -> None:
        for g in drafts:
            try:
                thevenin(replace(g.network), g.port, freqs)
            except ArithmeticError:  # a singular draw: its diagnosis is part of the cost, as in a run
                pass

    run()
    seconds, _ = timed(run, rounds)
    print(f"own route per small case: {seconds / count * 1e3:.3f} ms (best of {rounds} rounds; equivalents, condition)")
    return seconds / count


def report_dask(local: dict, count: int) -> None:
    section("Dask local cluster (2 worker processes on 127.0.0.1) vs the local pool")
    if not local:
        print("same verdicts: n/a (ngspice unavailable)\noverhead per case: n/a")
        return
    try:
        import logging

        from distributed import Client, LocalCluster
    except ImportError:
        print(
            "same verdicts: n/a (Dask's distributed is not installed: pip install 'crosscheck[cluster]')\n"
            "overhead per case: n/a"
        )
        return
    from crosscheck.run.batch import run_batch

    cases = local["cases"]
    started = time.perf_counter()
    with (
        LocalCluster(
            n_workers=2,
            threads_per_worker=1,
            processes=True,
            host="127.0.0.1",
            dashboard_address=None,
            silence_logs=logging.CRITICAL,
        ) as cluster,
        Client(cluster) as client,
    ):
        boot = time.perf_counter() - started
        executor = client.get_executor(pure=False)
        run_batch(cases[:8], executor)
        remote_s, remote = timed(lambda: run_batch(cases, executor), 1)
        remote_s = min(remote_s, timed(lambda: run_batch(cases, executor), 1)[0])
    same = [r.verdict for r in remote] == [r.verdict for r in local["local"]]
    numbers = all(
        a.own == b.own and getattr(a.spice, "points", None) == getattr(b.spice, "points", None)
        for a, b in zip(remote, local["local"])
    )
    overhead = (remote_s - local["local_s"]) / count
    print(f"same verdicts: {'yes' if same else 'NO'} ({count} cases; same numbers: {'yes' if numbers else 'NO'})")
    print(
        f"cluster: {count / remote_s:.0f} cases/s, local pool: {count / local['local_s']:.0f} cases/s; "
        f"overhead per case: {overhead * 1e3:+.2f} ms (cluster start {boot:.1f} s, not counted)"
    )
