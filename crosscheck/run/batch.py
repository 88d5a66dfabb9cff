"""Run a batch of cases on this machine or on any ``concurrent.futures`` executor, a Dask cluster included.

A task is the whole check of one case (own solver, ngspice, comparison) and
runs inside the executor's worker. Each worker process keeps one ngspice
engine alive between its tasks: a one-worker ``SpicePool`` created on first use
(``worker_pool``), so ngspice runs under the same sandbox as on this machine
(an empty working directory, a private HOME, no SPICE_* or NGSPICE_*
variables, memory and time limits) and a case that crashes or hangs ngspice
costs only that case. A task that loses its whole worker process (the
executor says so through its future) becomes an ``error`` result for that case
alone.

With no executor the local default runs: the own solver in this process and
ngspice in a ``SpicePool`` of ``workers`` processes (``check.run_cases``):
one engine per worker, the own solver never waiting for a task slot.
``benchmarks/bench.py`` times it against a process pool of whole-case tasks.

Results come back in the order given whatever order the workers finish in;
the own solver and ngspice are deterministic, so a cluster run gives the same
numbers and verdicts as a local run of the same cases.
"""

from __future__ import annotations

import atexit
import threading
from collections import deque
from collections.abc import Callable, Generator, Iterable, Iterator, Sequence
from concurrent.futures import Executor, Future
from contextlib import contextmanager
from dataclasses import replace
from typing import Any

from crosscheck.errors import CrosscheckError, EngineUnavailableError
from crosscheck.judge.baseline import Baseline
from crosscheck.judge.case import with_baseline
from crosscheck.judge.result import CaseResult, error_result
from crosscheck.model.budget import DEFAULT_TIME_S, Budget
from crosscheck.model.cases import Case
from crosscheck.run.check import ENGINES, run_cases, unexpected
from crosscheck.spice.sandbox import ENGINE_SOLVE, CaseSolver
from crosscheck.spice.workers import SpicePool

#: The limits a case gets unless the caller says otherwise: the workers' defaults (``model.budget``).
DEFAULT_BUDGET = Budget()

#: Tasks kept in flight per executor: enough to keep a cluster busy, bounded so that a million cases
#: never sit in memory (or in the scheduler) at once.
DEFAULT_WINDOW = 512

_POOLS: dict[CaseSolver, SpicePool] = {}
_POOL_LOCK = threading.Lock()


def worker_pool(budget: Budget = DEFAULT_BUDGET, solve: CaseSolver = ENGINE_SOLVE) -> SpicePool:
    """This process's own one-worker ``SpicePool`` for ``solve``, kept alive between tasks (started on first use)."""
    with _POOL_LOCK:
        pool = _POOLS.get(solve)
        if pool is None:
            pool = _POOLS[solve] = _pool(1, budget, solve)
            atexit.register(pool.close)
        return pool


def _pool(workers: int | None, budget: Budget, solve: CaseSolver) -> SpicePool:
    """An ngspice pool held to the budget (its time limit defaults to the budget's when the budget has none)."""
    time_s = budget.time_s if budget.time_s is not None else DEFAULT_TIME_S
    return SpicePool(workers=workers, timeout_s=time_s, memory_bytes=budget.memory_bytes, solve=solve)


def check_case(
    item: Case, engine: str = "both", budget: Budget = DEFAULT_BUDGET, solve: CaseSolver = ENGINE_SOLVE
) -> CaseResult:
    """The whole check of one case in this process: the task that executors run.

    ngspice runs in this process's ``worker_pool``; a baseline, if any, is applied by the caller.
    ``solve``: the function the ngspice worker calls per case (a test seam; ngspice's own by default).
    """
    pool = worker_pool(budget, solve) if engine in ("spice", "both") else None
    result = run_cases([item], engine=engine, pool=pool, budget=budget)[0]
    return _travel_light(result)


def _travel_light(result: CaseResult) -> CaseResult:
    """Drop what the caller already has or never reads (the decks ngspice ran), so results cross the wire fast."""
    spice = result.spice
    if spice is not None and spice.decks:
        return replace(result, spice=replace(spice, decks=()))
    return result


def run_batch(
    cases: Sequence[Case | tuple[str, CrosscheckError]],
    executor: Executor | None = None,
    *,
    engine: str = "both",
    workers: int | None = None,
    budget: Budget = DEFAULT_BUDGET,
    baseline: Baseline | None = None,
    solve: CaseSolver = ENGINE_SOLVE,
    on_done: Callable[[CaseResult], None] | None = None,
    window: int = DEFAULT_WINDOW,
) -> list[CaseResult]:
    """Check every case; results in the order given.

    ``executor``: any ``concurrent.futures.Executor`` whose workers can import crosscheck (a
    ``ProcessPoolExecutor``, or ``distributed.Client(address).get_executor()``). None runs the local
    default: the own solver here and ngspice in ``workers`` sandboxed processes (default: all cores).
    An item may be ``(name, error)`` for a case file that could not be read: it becomes an ``error``
    result here, without a task. ``baseline`` (``baseline.Baseline``) is held against each result here,
    after its task, so it is never shipped to the workers. ``budget``: the time and memory each route
    may take per case (ngspice's workers and the own route alike).
    """
    if engine not in ENGINES:
        raise ValueError(f"engine must be one of {ENGINES} (got {engine!r})")
    if executor is None:
        if engine == "own":
            return run_cases(cases, engine=engine, on_done=on_done, baseline=baseline, budget=budget)
        with _pool(workers, budget, solve) as pool:
            return run_cases(cases, engine=engine, pool=pool, on_done=on_done, baseline=baseline, budget=budget)

    results: list[CaseResult] = []
    for item, future in windowed(
        executor, check_case, cases, (engine, budget, solve), window, skip=lambda x: isinstance(x, tuple)
    ):
        if future is None:  # a case file that could not be read
            result = run_cases([item], engine="own")[0]
        else:
            result = _outcome(item, future)
            if baseline is not None:
                result = _baselined(item, result, baseline)
        if on_done is not None:
            on_done(result)
        results.append(result)
    return results


def _outcome(item: Case, future: Future) -> CaseResult:
    """The task's result, or an ``error`` result naming what happened to the worker."""
    try:
        return future.result()
    except EngineUnavailableError:
        raise
    except CrosscheckError as exc:
        return _error(item, str(exc))
    except Exception as exc:  # the executor lost the worker (a crash, a kill, a lost connection)
        return _error(
            item,
            f"the worker running this case was lost ({type(exc).__name__}: {exc}); "
            "the other cases went on. Run this case alone to see whether it is the cause",
        )


def _baselined(item: Case, result: CaseResult, baseline: Baseline) -> CaseResult:
    """The result held against the baseline; an unexpected failure there is this case's error alone."""
    try:
        return with_baseline(result, baseline)
    except CrosscheckError as exc:
        return _error(item, str(exc))
    except Exception as exc:  # a bug met on this case's numbers: its error, never the run's end
        return _error(item, unexpected(item.name, "comparing with the baseline", exc))


def _error(item: Case, message: str) -> CaseResult:
    return error_result(item.name, message, item)


def windowed(
    executor: Executor,
    fn: Callable,
    items: Iterable,
    args: tuple,
    window: int,
    skip: Callable[[Any], bool] = lambda item: False,
) -> Generator[tuple[Any, Future | None], None, None]:
    """Submit ``fn(item, *args)`` for each item, at most ``window`` ahead of the one yielded; in order.

    Items for which ``skip`` is true get no task (yielded with None).
    """
    if window < 1:
        raise ValueError(f"window must be at least 1 (got {window})")
    pending: deque = deque()
    source = iter(items)
    exhausted = False
    while True:
        while not exhausted and len(pending) < window:
            try:
                item = next(source)
            except StopIteration:
                exhausted = True
                break
            pending.append((item, None if skip(item) else executor.submit(fn, item, *args)))
        if not pending:
            return
        try:
            yield pending.popleft()
        except GeneratorExit:  # the caller stopped early: do not leave work queued
            for _, future in pending:
                if future is not None:
                    future.cancel()
            raise


def worker_count(executor: Executor) -> int:
    """How many workers the executor has, where it says (0 when it does not)."""
    client = getattr(executor, "_client", None)
    if client is not None:
        try:
            return len(client.scheduler_info().get("workers", {}))
        except Exception:  # a scheduler that does not answer: the count is only for the summary
            return 0
    return int(getattr(executor, "_max_workers", 0) or 0)


# --------------------------------------------------------------------------- a Dask cluster


@contextmanager
def cluster_executor(address: str, timeout_s: float = 30.0) -> Iterator[Executor]:
    """An executor on the running Dask cluster at ``address`` (``tcp://host:port``); closed on leaving.

    Its workers must be able to import crosscheck (the same version) and load ngspice. Tasks are
    submitted as impure, so two identical cases still run twice and each gets its own result.
    """
    try:
        from distributed import Client
    except ImportError:
        raise CrosscheckError(
            "--cluster needs Dask's distributed package, which is not installed; install it "
            "with: pip install 'crosscheck[cluster]'"
        ) from None
    try:
        client = Client(address, timeout=timeout_s, set_as_default=False)
    except (OSError, TimeoutError) as exc:
        raise CrosscheckError(
            f"no Dask scheduler answered at {address!r} within {timeout_s:g} s ({exc}); "
            "check the address (tcp://host:port) and that the scheduler is running"
        ) from None
    try:
        yield client.get_executor(pure=False)
    finally:
        client.close()
