"""Fuzzing on any ``concurrent.futures`` executor (a Dask cluster included): one task per generated case."""

from __future__ import annotations

import time
from concurrent.futures import Executor

from crosscheck.fuzz.generate import Knobs, generate_case
from crosscheck.fuzz.judging import CaseOutcome, isolate, judge, solve_own, spice_result
from crosscheck.fuzz.loop import Progress, finish, note_outcome
from crosscheck.fuzz.summary import FuzzOptions, FuzzSummary
from crosscheck.model.budget import Budget
from crosscheck.model.tolerance import SOLVER_VS_SPICE, Tolerance
from crosscheck.run.batch import DEFAULT_WINDOW, windowed, worker_count, worker_pool


def fuzz_case(
    seed: int, index: int, knobs: Knobs, tolerance: Tolerance = SOLVER_VS_SPICE, timeout_s: float = 60.0
) -> tuple[CaseOutcome, float]:
    """Generate, solve with both engines and judge one fuzz case in this process (the fuzz task).

    The same steps, in the same order, as ``run_fuzz`` takes for one case. Returns the
    ``CaseOutcome`` and the seconds the own solver took.
    """
    pool = worker_pool(Budget(time_s=timeout_s))
    case = generate_case(seed, knobs)
    future = pool.submit(case.network, case.port, case.freqs_hz)
    started = time.perf_counter()
    own, own_error = solve_own(case.network, case.port, case.freqs_hz)
    own_s = time.perf_counter() - started
    spice, spice_error = spice_result(future)
    outcome = judge(index, case, own, own_error, spice, spice_error, tolerance)
    if outcome.status == "fail" and not outcome.explained and len(case.freqs_hz) > 1:
        outcome = isolate(outcome, pool, tolerance)
    return outcome, own_s


def run_fuzz_batch(
    options: FuzzOptions, executor: Executor, on_progress: Progress | None = None, window: int = DEFAULT_WINDOW
) -> FuzzSummary:
    """``run_fuzz`` with each case's generation, both engines and judgement as one task on ``executor``.

    Outcomes are recorded in seed order, as a local run records them; shrinking what failed runs here
    afterwards, with a local ngspice pool (failures are few; each shrink step is a small network).
    """
    if options.faults:
        raise ValueError(
            f"faults {', '.join(options.faults)} break this process's own route only; the "
            "executor's tasks run the real one: run fuzz with injected faults locally"
        )
    summary = FuzzSummary(options, ())
    seeds = options.seeds()
    started = time.perf_counter()
    tasks = windowed(
        executor, _fuzz_task, enumerate(seeds), (options.knobs, options.tolerance, options.timeout_s), window
    )
    for _numbered, future in tasks:
        assert future is not None  # every item gets a task: no skip was given
        outcome, own_s = future.result()
        summary.own_s += own_s
        if note_outcome(summary, outcome, len(seeds), options, on_progress):
            tasks.close()
            break
    summary.elapsed_s = time.perf_counter() - started
    summary.workers = worker_count(executor)
    return finish(summary, options)  # shrinking runs here, on a local ngspice pool


def _fuzz_task(
    numbered: tuple[int, int], knobs: Knobs, tolerance: Tolerance, timeout_s: float
) -> tuple[CaseOutcome, float]:
    index, seed = numbered
    return fuzz_case(seed, index, knobs, tolerance, timeout_s)
