"""The fuzz run: random networks through both routes and the judgement, then shrinking what failed.

The own solver runs in this process; ngspice runs in the isolated worker pool. Cases are generated
lazily and submitted a window ahead of the one being judged, so the pool never waits and a long run
holds only the window in memory. Each case is judged on its own (``judging``). Every unexplained
failure (and error) is shrunk (``shrink``) while it still fails the same way, and the small case is
written to ``out`` as a netlist, a case file and both engines' numbers (``reproducer``).
"""

from __future__ import annotations

import math
import time
from collections import deque
from collections.abc import Callable
from concurrent.futures import Future
from dataclasses import replace

from crosscheck.fuzz.faults import OwnRoute
from crosscheck.fuzz.generate import GeneratedCase, generate_case, well_posed
from crosscheck.fuzz.judging import CaseOutcome, isolate, judge, solve_own, spice_result
from crosscheck.fuzz.reproducer import write_outputs
from crosscheck.fuzz.shrink import shrink
from crosscheck.fuzz.summary import FuzzOptions, FuzzSummary, Reproducer
from crosscheck.model.network import Network, Port
from crosscheck.model.tolerance import Tolerance
from crosscheck.own.equivalent import thevenin
from crosscheck.spice.workers import SpicePool

#: Called after each case with (cases done, cases in all, its outcome).
Progress = Callable[[int, int, CaseOutcome], None]


# --------------------------------------------------------------------------- the run


def run_fuzz(options: FuzzOptions, on_progress: Progress | None = None, pool: SpicePool | None = None) -> FuzzSummary:
    """Generate, solve, compare; then shrink and write out what failed. ``pool``: a SpicePool to reuse."""
    summary = FuzzSummary(options, tuple(sorted(options.faults)))
    if pool is None:
        with SpicePool(workers=options.workers, timeout_s=options.timeout_s) as own_pool:
            return _run(options, summary, own_pool, on_progress)
    return _run(options, summary, pool, on_progress)


def _run(options: FuzzOptions, summary: FuzzSummary, pool: SpicePool, on_progress: Progress | None) -> FuzzSummary:
    seeds = options.seeds()
    route = options.own_route()
    summary.workers = pool.workers
    window = max(16, 8 * pool.workers)
    pending: deque[tuple[int, GeneratedCase, Future]] = deque()
    started = time.perf_counter()
    next_index = 0

    def submit_more() -> None:
        nonlocal next_index
        while next_index < len(seeds) and len(pending) < window:
            case = generate_case(seeds[next_index], options.knobs)
            pending.append((next_index, case, pool.submit(case.network, case.port, case.freqs_hz)))
            next_index += 1

    submit_more()
    while pending:
        index, case, future = pending.popleft()
        t0 = time.perf_counter()
        own, own_error = solve_own(case.network, case.port, case.freqs_hz, route)
        summary.own_s += time.perf_counter() - t0
        spice, spice_error = spice_result(future)
        outcome = judge(index, case, own, own_error, spice, spice_error, options.tolerance)
        if outcome.status == "fail" and not outcome.explained and len(case.freqs_hz) > 1:
            outcome = isolate(outcome, pool, options.tolerance)
        if note_outcome(summary, outcome, len(seeds), options, on_progress):
            for _, _, f in pending:
                f.cancel()
            pending.clear()
            break
        submit_more()
    summary.elapsed_s = time.perf_counter() - started
    return finish(summary, options, pool)


def note_outcome(
    summary: FuzzSummary, outcome: CaseOutcome, total: int, options: FuzzOptions, on_progress: Progress | None
) -> bool:
    """Record one case's outcome and report progress; True once ``stop_after_failures`` problems are in."""
    _record(summary, outcome)
    if on_progress is not None:
        on_progress(summary.cases_run, total, outcome)
    limit = options.stop_after_failures
    if limit is not None and len(summary.problems) >= limit:
        summary.stopped_early = summary.cases_run < total
        return True
    return False


def finish(summary: FuzzSummary, options: FuzzOptions, pool: SpicePool | None = None) -> FuzzSummary:
    """Shrink what failed (on ``pool``, or on a local SpicePool started for it) and write the outputs."""
    if options.shrink and summary.problems:
        t0 = time.perf_counter()
        if pool is None:
            with SpicePool(workers=options.workers, timeout_s=options.timeout_s) as local_pool:
                summary.reproducers.extend(_shrink_one(o, options, local_pool) for o in summary.problems)
        else:
            summary.reproducers.extend(_shrink_one(o, options, pool) for o in summary.problems)
        summary.shrink_s = time.perf_counter() - t0
    if options.out is not None:
        write_outputs(summary, options.out)
    return summary


def _record(summary: FuzzSummary, outcome: CaseOutcome) -> None:
    """Count one outcome, keep its judged errors, and keep the case when it is a problem or explained."""
    summary.cases_run += 1
    summary.counts[outcome.status] += 1
    if outcome.spice is not None and not summary.ngspice_version:
        summary.ngspice_version = outcome.spice.ngspice_version
    for p in outcome.points:
        for c in p.quantities:
            if math.isfinite(c.err):
                summary.errors[c.quantity].append(c.err)
                summary.rel_errors[c.quantity].append(c.rel_err)
                if c.err > summary.worst.get(c.quantity, (-1.0, 0, 0.0))[0]:
                    summary.worst[c.quantity] = (c.err, outcome.case.seed, p.freq_hz)
    if outcome.problem:
        summary.problems.append(outcome)
        if summary.first_problem_at is None:
            summary.first_problem_at = summary.cases_run
    elif outcome.status in ("fail", "unavailable"):
        summary.explained[outcome.status] += 1
        summary.explained_cases.append(outcome)


# --------------------------------------------------------------------------- shrinking


def recheck(
    case: GeneratedCase,
    network: Network,
    port: Port,
    freqs: tuple[float, ...],
    pool: SpicePool,
    tol: Tolerance,
    index: int = -1,
    route: OwnRoute = thevenin,
) -> CaseOutcome:
    """Both engines and the judgement for a variant of ``case`` (the shrinker's probe)."""
    variant = replace(case, network=network, port=port, freqs_hz=tuple(freqs))
    own, own_error = solve_own(network, port, freqs, route)
    spice, spice_error = spice_result(pool.submit(network, port, freqs))
    return judge(index, variant, own, own_error, spice, spice_error, tol)


def signature(outcome: CaseOutcome) -> tuple[str, ...]:
    """What kind of failure this is: shrinking must keep it, not trade it for another one."""
    if outcome.status == "fail":
        worst = max((c for p in outcome.points for c in p.quantities if c.verdict == "fail"), key=lambda c: c.err)
        return ("fail", worst.quantity)
    if outcome.status == "unavailable":
        missing = next((c for p in outcome.points for c in p.quantities if c.verdict == "unavailable"), None)
        if missing is None:
            return ("unavailable", "own solver singular")
        return ("unavailable", missing.quantity, "own" if missing.own is None else "ngspice")
    return (outcome.status, outcome.reason.split(":", 1)[0])


def _shrink_one(outcome: CaseOutcome, options: FuzzOptions, pool: SpicePool) -> Reproducer:
    case = outcome.case

    wanted = signature(outcome)

    def still_fails(network: Network, port: Port, freqs: tuple[float, ...]) -> bool:
        again = recheck(case, network, port, freqs, pool, options.tolerance, route=options.own_route())
        return again.problem and signature(again) == wanted

    # Stay among well-posed networks if the original was one, so the failure stays the original's.
    admissible = well_posed if well_posed(case.network, case.port, case.freqs_hz) else None
    result = shrink(
        case.network, case.port, case.freqs_hz, still_fails, budget=options.shrink_budget, admissible=admissible
    )
    final = recheck(
        case, result.network, result.port, result.freqs_hz, pool, options.tolerance, outcome.index, options.own_route()
    )
    return Reproducer(case.seed, result, final)
