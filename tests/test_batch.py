"""Batches on any executor: in order, windowed, isolated per case, and identical on a Dask cluster.

The Dask tests start a two-worker cluster on 127.0.0.1 themselves (``distributed.LocalCluster``) and
compare its results with a local run of the same cases: same verdicts, same numbers from both engines.
"""

from __future__ import annotations

import json
import logging
import multiprocessing
from concurrent.futures import Future, ProcessPoolExecutor
from pathlib import Path

import pytest

from crosscheck.fuzz.batch import run_fuzz_batch
from crosscheck.run.batch import cluster_executor, run_batch, windowed
from crosscheck.model.cases import find_case_files, load_case
from crosscheck.run.check import case_from_netlist
from crosscheck.errors import CrosscheckError
from crosscheck.fuzz.loop import FuzzOptions, run_fuzz
from crosscheck.fuzz.generate import case_seed, generate_case
from crosscheck.model.netlist_writer import write_netlist
from crosscheck.spice import workers
from misbehaving_solve import MISBEHAVING

CORPUS = Path(__file__).resolve().parent.parent / "corpus"
DIVIDER = "{title}\nV1 s 0 AC 10\nR1 s a 1k\nR2 a 0 {r2}\n.end\n"


def _generated(count: int, seed: int = 21) -> list:
    out = []
    for i in range(count):
        g = generate_case(case_seed(seed, i))
        out.append(case_from_netlist(f"generated-{i}.cir", write_netlist(g.network), (g.port.a, g.port.b),
                                     g.freqs_hz))
    return out


def _cases() -> list:
    return [load_case(p) for p in find_case_files([CORPUS])] + _generated(30)


def _fingerprint(results) -> list:
    """What must not depend on where a case ran: verdicts, errors, both engines' numbers."""
    return [(r.name, r.verdict, r.error, r.own, getattr(r.spice, "points", None)) for r in results]


class _Immediate:
    """An executor that runs each task at submit time and counts submissions (for the window)."""

    def __init__(self) -> None:
        self.submitted = 0

    def submit(self, fn, *args):
        self.submitted += 1
        future: Future = Future()
        future.set_result(fn(*args))
        return future


def test_windowed_keeps_order_and_bounds_work_in_flight():
    """Items come back in order, never more than `window` ahead of the one being read."""
    executor = _Immediate()
    seen = []
    for i, (item, future) in enumerate(windowed(executor, lambda x: x * x, range(50), (), window=4)):
        assert executor.submitted <= i + 4, (i, executor.submitted)
        seen.append((item, future.result()))
    assert seen == [(i, i * i) for i in range(50)]


def test_windowed_gives_no_task_to_skipped_items():
    """Items the caller marks as skipped (unreadable case files) are yielded without a task."""
    executor = _Immediate()
    out = list(windowed(executor, str, ["a", ("bad", None), "b"], (), window=8, skip=lambda x: isinstance(x, tuple)))
    assert [f is None for _, f in out] == [False, True, False]
    assert executor.submitted == 2


@pytest.mark.spice
def test_process_pool_gives_the_local_results_and_a_crash_costs_one_case():
    """Whole-case tasks in a process pool match the local run; a case that kills ngspice is its own error."""
    # Every ngspice pool built here and in the executor's processes runs the tests' misbehaving solver.
    die = case_from_netlist("die.cir", DIVIDER.format(title="crosscheck-test-fault:die", r2="500"), ("a", "0"),
                            [1e3])
    cases = _generated(12)
    cases.insert(5, die)
    local = run_batch(cases, workers=2, solve=MISBEHAVING)
    with ProcessPoolExecutor(2, mp_context=multiprocessing.get_context("spawn")) as executor:
        pooled = run_batch(cases, executor, solve=MISBEHAVING)
    assert _fingerprint(pooled) == _fingerprint(local)
    assert pooled[5].verdict == "error" and "ngspice" in pooled[5].error, pooled[5].error
    assert [r.verdict for i, r in enumerate(pooled) if i != 5] == ["pass"] * 12


# --------------------------------------------------------------------------- Dask


def _distributed():
    """Dask's distributed, which the test extra installs: its absence is a failure, not a skip."""
    try:
        import distributed
    except ImportError:
        pytest.fail("Dask's distributed is not installed; install the test extra: pip install -e '.[test]'",
                    pytrace=False)
    return distributed


@pytest.fixture(scope="module")
def cluster_address():
    distributed = _distributed()
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                                  dashboard_address=None, silence_logs=logging.CRITICAL) as cluster:
        yield cluster.scheduler_address


@pytest.mark.spice
def test_dask_cluster_gives_the_same_results_as_a_local_run(cluster_address):
    """verify's batch on a two-worker Dask cluster: same verdicts and numbers as the local pool, same order."""
    cases = _cases()
    local = run_batch(cases, workers=2)
    with cluster_executor(cluster_address) as executor:
        remote = run_batch(cases, executor)
    assert len(remote) == len(cases) > 30
    assert _fingerprint(remote) == _fingerprint(local)
    # Agreement, not absence: every case is compared by both engines and passes (an unavailable reference
    # would make both runs equal without testing anything).
    assert {r.verdict for r in local} == {"pass"}, [(r.name, r.verdict) for r in local if r.verdict != "pass"]
    assert all(
        r.multiport.spice is not None and len(r.multiport.checks) == len(r.freqs_hz)  # a multi-port case
        if r.multiport is not None
        else r.spice is not None and len(r.points) == len(r.freqs_hz)
        for r in remote
    )


@pytest.mark.spice
def test_dask_fuzz_gives_the_same_summary_as_a_local_fuzz(cluster_address):
    """A fuzz run on the cluster counts, judges and ranks the same cases as the same run locally."""
    options = FuzzOptions(count=60, seed=5, shrink=False, workers=2)
    local = run_fuzz(options)
    with cluster_executor(cluster_address) as executor:
        remote = run_fuzz_batch(options, executor)
    assert remote.cases_run == local.cases_run == 60
    assert remote.counts == local.counts
    assert remote.worst == local.worst
    assert remote.errors == local.errors
    assert [o.case.seed for o in remote.problems] == [o.case.seed for o in local.problems]
    assert remote.workers == 2


@pytest.mark.spice
def test_verify_cli_runs_on_the_cluster(cluster_address, tmp_path):
    """`crosscheck verify --cluster ADDRESS` writes the same report as the local run (timings aside)."""
    from crosscheck.cli import main

    folder = CORPUS / "audio"
    assert main(["verify", str(folder), "--format", "json", "--output", str(tmp_path / "local.json")]) == 0
    assert main(["verify", str(folder), "--format", "json", "--output", str(tmp_path / "cluster.json"),
                 "--cluster", cluster_address]) == 0

    def without_timings(node):
        if isinstance(node, dict):
            return {k: without_timings(v) for k, v in node.items() if "elapsed" not in k and "time" not in k}
        if isinstance(node, list):
            return [without_timings(v) for v in node]
        return node

    local = json.loads((tmp_path / "local.json").read_text(encoding="utf-8"))
    remote = json.loads((tmp_path / "cluster.json").read_text(encoding="utf-8"))
    assert without_timings(remote) == without_timings(local)


def test_unreachable_cluster_is_an_error_naming_the_address():
    """No scheduler at the address: a CrosscheckError that names it, within the connect timeout."""
    _distributed()
    with pytest.raises(CrosscheckError, match="127.0.0.1:9"):
        with cluster_executor("tcp://127.0.0.1:9", timeout_s=2.0):
            pass


@pytest.mark.spice
def test_fuzz_batch_stops_after_failures_and_shrinks_like_a_local_run(monkeypatch, tmp_path):
    """run_fuzz_batch's stop-after-failures and shrinking paths, which a cluster never exercises (faults are
    refused there). A one-thread executor shares this process, so a broken own route patched into the task's
    solve step and into the shrinking reaches both; with a window of 1 no task overlaps another. The run
    must stop at the same case as the local loop under the same fault, and shrink that case to a smaller one that still fails."""
    from concurrent.futures import ThreadPoolExecutor

    from dataclasses import replace

    from crosscheck.fuzz import batch
    from crosscheck.fuzz.judging import solve_own

    fault = "capacitor-inverted"
    options = FuzzOptions(count=50, seed=2, stop_after_failures=1, shrink_budget=150, workers=1, faults=(fault,))
    local = run_fuzz(options)
    broken = options.own_route()
    real_finish = batch.finish

    def solve_with_fault(network, port, freqs, route=None):
        return solve_own(network, port, freqs, broken)

    def finish_with_fault(summary, options, pool=None):
        return real_finish(summary, replace(options, faults=(fault,)), pool)

    monkeypatch.setattr(batch, "solve_own", solve_with_fault)
    monkeypatch.setattr(batch, "finish", finish_with_fault)
    batched_options = FuzzOptions(count=50, seed=2, stop_after_failures=1, shrink_budget=150, workers=1, out=tmp_path)
    with ThreadPoolExecutor(1) as executor:
        remote = run_fuzz_batch(batched_options, executor, window=1)
    assert remote.stopped_early and remote.cases_run == local.cases_run < 50
    assert [o.case.seed for o in remote.problems] == [o.case.seed for o in local.problems] and len(remote.problems) == 1
    [rep] = remote.reproducers
    assert rep.outcome.problem and rep.shrunk.size < rep.shrunk.original_size
    assert {p.name for p in tmp_path.iterdir()} >= {f"fuzz_{rep.seed}.toml", f"fuzz_{rep.seed}.cir", "summary.json"}
