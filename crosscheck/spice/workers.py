"""Run ngspice in isolated worker processes, so that a crash or a hang costs one case, not the batch.

Why processes: ngspice's shared library is one engine per process and
crashes when shared across threads; it can also hang or abort the process on
input it dislikes. Each worker is a fresh interpreter (``_CHILD_COMMAND``,
``worker_process``) talking to the parent over a socket pair:

* it starts in an empty temporary directory, with a private empty ``HOME``
  (ngspice executes a ``.spiceinit`` found in either, and ``.spiceinit`` may
  run shell commands);
* its environment has no ``SPICE_*`` or ``NGSPICE_*`` variable except the
  library path;
* before loading ngspice it limits its address space (``RLIMIT_AS``, 2 GiB
  by default) and its CPU time per case (``RLIMIT_CPU``), and writes no core
  files.

A plain subprocess rather than multiprocessing's ``spawn``: spawn re-runs the
caller's main module in the child, which breaks any script without an
``if __name__ == "__main__"`` guard, and it starts the child in the caller's
directory with the caller's environment.

The parent enforces a wall-clock limit per case (60 s by default). A worker
that dies or overruns is killed and replaced; its case becomes a
``ReferenceEngineError`` and the following cases go on. A worker keeps its
ngspice instance between cases and retires after an engine error (its state
is then uncertain) or after ``cases_per_worker`` cases.

Small cases are sent ahead: while a worker runs one, up to ``AHEAD_CASES`` - 1
more wait in its socket (``_Lane``), so that it never waits for this process,
whose threads share the interpreter lock with the own route and the judging.
Each is timed from when its worker begins it (when the answer before it
arrives); when a worker is lost, the cases sent ahead of it go to a fresh one;
no case is taken ahead while another worker waits for one.

What runs inside a worker is in ``crosscheck.spice.sandbox``. Which function
solves each case is the pool's ``solve`` argument (a ``sandbox.CaseSolver``,
ngspice's ``engine.solve`` by default): only the code that builds the pool
chooses it, never anything a case carries (see ``sandbox`` for why that is
safe). The worker tests use it to run functions of their own that hang, spin,
die or hog memory.
"""

from __future__ import annotations

import atexit
import os
import queue
import threading
import time
import weakref
from collections import deque
from collections.abc import Callable, Iterable, Iterator, Sequence
from concurrent.futures import Future
from dataclasses import dataclass

from crosscheck.errors import CrosscheckError, ReferenceEngineError
from crosscheck.model.budget import DEFAULT_MEMORY_BYTES, DEFAULT_TIME_S, Budget
from crosscheck.model.network import Network, Port
from crosscheck.model.validation import validate
from crosscheck.spice.deck import check_freqs
from crosscheck.spice.engine import DEFAULT_STRATEGY, SpiceResult, Strategy
from crosscheck.spice.pool_text import stopped_case_text, terminal_progress
from crosscheck.spice.sandbox import ENGINE_SOLVE, CaseSolver, Settings, Task
from crosscheck.spice.sandbox import worker_environment as _worker_environment  # noqa: F401  (the tests read it here)
from crosscheck.spice.worker_process import _START_TIMEOUT_S, _Worker, _WorkerLost, packed
from crosscheck.spice.worker_process import PROGRESS_EVERY_S as PROGRESS_EVERY_S  # the pool's documented constant

#: The defaults of every case's budget (``model.budget``, defined there once): 60 s wall clock, 2 GiB.
DEFAULT_TIMEOUT_S = DEFAULT_TIME_S
#: How many cases a worker holds at once when they are small: the one it runs and the next, already in its
#: socket, so that it never waits for this process between cases. The thread that feeds a worker shares the
#: interpreter lock with the main thread (the own route, the judging), and may wait milliseconds for it: as
#: long as a whole small case in ngspice (``benchmarks/throughput.py`` prints what holding more gains).
AHEAD_CASES = 8
#: Only cases of at most this many elements are sent ahead, and only behind cases of at most as many: a
#: small case queued behind a long one would wait while another worker is free, and a large case's bytes
#: could fill the socket and block the thread that watches the running case's wall-clock limit.
AHEAD_ELEMENTS = 200
#: The bytes of the cases sent ahead of the running one, at most: they wait in the socket (212,992 bytes by
#: default on Linux) until the worker reads them, and a send that finds it full would block the thread that
#: watches the running case's wall-clock limit. A 200-element case is ~18 kB.
AHEAD_BYTES = 64 * 1024


class SpicePool:
    """ngspice in ``workers`` isolated processes; ``submit`` returns a ``Future[SpiceResult]``.

    Every problem of a case arrives through its future: ``NetworkError`` for an
    ill-posed network, ``ReferenceEngineError`` when ngspice fails, crashes or
    overruns, ``EngineUnavailableError`` when ngspice is not installed. Use it
    as a context manager; leaving normally waits for the cases already submitted,
    leaving by an exception (a KeyboardInterrupt among them) cancels them
    (``close(cancel=True)``). ``finished`` and ``cancelled`` count the cases so far.

    ``solve``: the function each worker calls per case (``sandbox.CaseSolver``); ngspice's
    ``engine.solve`` unless a test names one of its own.

    Limits: a case submitted without its own ``timeout_s`` gets ``Budget.for_elements``: the pool's
    limits, grown by ``model.budget``'s size rule where they are the defaults. ``on_progress(title,
    analysis, elapsed_s)`` hears of every running case about every ``PROGRESS_EVERY_S`` seconds (from
    the pool's threads); by default ``terminal_progress`` prints it when standard error is a terminal.
    """

    def __init__(
        self,
        workers: int | None = None,
        *,
        timeout_s: float = DEFAULT_TIMEOUT_S,
        memory_bytes: int | None = DEFAULT_MEMORY_BYTES,
        cpu_s: float | None = None,
        strategy: Strategy = DEFAULT_STRATEGY,
        library: str | None = None,
        cases_per_worker: int = 1000,
        start_timeout_s: float = _START_TIMEOUT_S,
        solve: CaseSolver = ENGINE_SOLVE,
        on_progress: Callable[[str, str, float], None] | None = None,
    ):
        count = (os.cpu_count() or 1) if workers is None else int(workers)
        if count < 1:
            raise ValueError(f"workers must be at least 1 (got {workers!r})")
        Budget(timeout_s, memory_bytes)  # the same limits as the own route's: finite seconds > 0, >= 1 MiB
        self.workers = count
        self.timeout_s = float(timeout_s)
        self.strategy = strategy
        self._cpu_given = cpu_s is not None
        self._cpu_s = float(cpu_s) if cpu_s is not None else self.timeout_s
        self._memory_bytes = memory_bytes
        self._on_progress = on_progress if on_progress is not None else terminal_progress()
        # Every worker's settings but its directory (``_settings_for`` adds that).
        self._settings: Callable[[str], Settings] = lambda directory: Settings(
            directory,
            library or os.environ.get("NGSPICE_LIBRARY_PATH") or None,
            memory_bytes,
            self._cpu_s,
            int(cases_per_worker),
            solve,
        )
        self._start_timeout_s = start_timeout_s
        self._queue: queue.SimpleQueue = queue.SimpleQueue()
        self._closed = False
        self._cancelled = False
        self._live: set[_Worker] = set()  # workers whose process runs: what a cancel kills
        self._waiting = 0  # lanes (pool threads) waiting for a case: while any does, no lane takes one ahead
        self.finished = 0  # cases whose future holds a result or an error
        self.cancelled = 0  # cases cancelled before a worker started them, or stopped by a cancel
        self._lock = threading.Lock()
        _ALL_POOLS.add(self)
        self._threads = [
            threading.Thread(target=self._serve, name=f"crosscheck-spice-{i}", daemon=True) for i in range(count)
        ]
        for t in self._threads:
            t.start()

    def __enter__(self) -> SpicePool:
        return self

    def __exit__(self, exc_type: object, exc: BaseException | None, tb: object) -> None:
        self.close(cancel=exc is not None)

    def submit(
        self,
        network: Network,
        port: Port,
        freqs: Iterable[float],
        *,
        timeout_s: float | None = None,
        strategy: Strategy | None = None,
        ports: Sequence[Port] = (),
    ) -> Future[SpiceResult]:
        """Queue one case; its future holds its ``SpiceResult`` (``ports``: ``spice.multiport``'s) or its error alone."""
        future: Future = Future()
        with self._lock:
            if self._closed:
                raise RuntimeError("this SpicePool is closed; create a new one to submit more cases")
            try:
                validate(network, port)  # with ``ports``, the worker checks every port (``spice.multiport``)
                strategy = strategy or self.strategy
                if strategy not in ("combined", "separate"):
                    raise ValueError(f"strategy must be 'combined' or 'separate' (got {strategy!r})")
                limits = Budget(self.timeout_s, self._memory_bytes).for_elements(len(network.elements))
                case_time_s = float(timeout_s or limits.time_s or self.timeout_s)
                cpu_s = self._cpu_s if self._cpu_given else case_time_s
                task = Task(network, port, check_freqs(freqs), strategy, cpu_s, limits.memory_bytes, tuple(ports))
            except (CrosscheckError, ValueError) as exc:
                future.set_exception(exc)
                return future
            self._queue.put((future, task, case_time_s))
        return future

    def map(self, cases: Iterable[tuple[Network, Port, Sequence[float]]]) -> Iterator[SpiceResult | CrosscheckError]:
        """Run ``(network, port, freqs)`` cases; yield each outcome in order: its result, or its error as a value.

        Errors that are not crosscheck's (a bug, a bad argument) are raised, not yielded.
        """
        futures = [self.submit(*case) for case in cases]
        for future in futures:
            exc = future.exception()
            if exc is None:
                yield future.result()
            elif isinstance(exc, CrosscheckError):
                yield exc
            else:
                raise exc

    def close(self, cancel: bool = False) -> None:
        """Stop every worker: after the cases already submitted, or with ``cancel`` at once.

        A cancel (also what leaving the ``with`` block by an exception does) cancels every queued case's
        future, kills the workers running a case (their futures get a ``ReferenceEngineError`` saying the
        run was interrupted), and no worker starts after it. It may follow a close that is still waiting,
        from another thread or from the same one after a KeyboardInterrupt.
        """
        with self._lock:
            if cancel and not self._cancelled:
                self._cancelled = True
                self._cancel_queued()
                for worker in list(self._live):
                    worker.terminate_now()
            elif self._closed:
                return
            self._closed = True
            for _ in self._threads:
                self._queue.put(None)
        for t in self._threads:
            if t is not threading.current_thread():
                t.join()

    def _cancel_queued(self) -> None:
        """Cancel every case still in the queue (the lock is held; the close puts the stop marks back)."""
        while True:
            try:
                item = self._queue.get_nowait()
            except queue.Empty:
                return
            if item is not None and item[0].cancel():
                self.cancelled += 1

    def _worker_process(self, worker: _Worker, up: bool) -> None:
        """Note a worker's process as started (killed at once after a cancel) or gone."""
        with self._lock:
            if not up:
                self._live.discard(worker)
            elif self._cancelled:
                worker.terminate_now()
            else:
                self._live.add(worker)

    def _count(self, field: str) -> None:
        with self._lock:
            setattr(self, field, getattr(self, field) + 1)

    # One thread per worker: it only waits on pipes; ngspice itself runs in the worker process.
    def _serve(self) -> None:
        lane = _Lane(self)
        try:
            lane.run()
        finally:
            lane.close()

    def _settings_for(self, directory: str) -> Settings:
        return self._settings(directory)

    def _progress_of(self, task: Task) -> Callable[[str, float], None] | None:
        """The pool's ``on_progress`` for this case's title (None when nobody listens)."""
        report = self._on_progress
        if report is None:
            return None
        return lambda stage, elapsed_s: report(task.network.title, stage, elapsed_s)

    def _lost(self, lost: _WorkerLost, task: Task, timeout_s: float) -> ReferenceEngineError:
        cpu_s, memory = task.cpu_s or self._cpu_s, task.memory_bytes or self._memory_bytes
        return ReferenceEngineError(stopped_case_text(str(lost), task.network, timeout_s, cpu_s, memory))


def _interrupted() -> ReferenceEngineError:
    return ReferenceEngineError("the run was interrupted before ngspice finished this case; nothing was judged")


#: Every pool of this process not yet collected, for ``cancel_all``.
_ALL_POOLS: weakref.WeakSet[SpicePool] = weakref.WeakSet()


def cancel_all() -> tuple[int, int]:
    """Cancel every pool of this process (``close(cancel=True)``); return the cases (finished, cancelled).

    For an interrupt: the command line calls it on KeyboardInterrupt, so that no pool (the shared ones
    closed only at exit included) waits for its queue or leaves a worker running.
    """
    finished = cancelled = 0
    for pool in list(_ALL_POOLS):
        pool.close(cancel=True)
        finished += pool.finished
        cancelled += pool.cancelled
    return finished, cancelled


_SHARED: SpicePool | None = None
_SHARED_LOCK = threading.Lock()


def shared_pool() -> SpicePool:
    """A one-worker pool kept for this process's one-off calls (``spice_equivalent``)."""
    global _SHARED
    with _SHARED_LOCK:
        if _SHARED is None:
            _SHARED = SpicePool(workers=1)
            atexit.register(_SHARED.close)
        return _SHARED


def spice_equivalent(
    network: Network,
    port: Port,
    freqs: Iterable[float],
    timeout_s: float | None = None,
    strategy: Strategy = DEFAULT_STRATEGY,
) -> SpiceResult:
    """ngspice's equivalent of ``network`` at ``port``, computed in an isolated worker process.

    ``timeout_s``: the wall-clock limit; None: the default, grown with the network (``model.budget``).

    For one-off calls (it uses ``shared_pool``); a batch should use a ``SpicePool`` directly.
    Raises ``ReferenceEngineError`` (ngspice's own words) or ``EngineUnavailableError``.
    """
    return shared_pool().submit(network, port, freqs, timeout_s=timeout_s, strategy=strategy).result()


@dataclass(eq=False)
class _Held:
    """A case one pool thread has taken off the queue, for its worker: sent or not yet, begun or not yet."""

    future: Future
    task: Task
    timeout_s: float
    payload: bytes = b""
    sent: bool = False  # in the worker's socket (or begun): a fresh worker needs it again
    started: float | None = None  # when the worker began it (``time.monotonic``), as far as this process can tell
    running: bool = False  # its future was marked running: it is the case the worker runs now
    dropped: bool = False  # its caller cancelled it after it was sent: the worker's answer is not used

    @property
    def small(self) -> bool:
        return len(self.task.network.elements) <= AHEAD_ELEMENTS


class _Lane:
    """One pool thread's worker and the cases it holds, oldest first: the first is the one the worker runs.

    Small cases are sent ahead (``AHEAD_CASES``, ``AHEAD_ELEMENTS``). Each case's wall-clock limit counts
    from when the worker began it: when the answer before it arrived. A worker that is lost (dead, over a
    limit, interrupted) costs the case it was running; the cases sent ahead of it go to a fresh worker.
    """

    def __init__(self, pool: SpicePool):
        self.pool = pool
        self.worker: _Worker | None = None
        self.held: deque[_Held] = deque()
        self.stopping = False

    def run(self) -> None:
        while True:
            self._take()
            if not self._promote():
                if self.stopping:
                    return
                continue
            try:
                self._send()
                head = self.held[0]
                assert self.worker is not None, "_send started one"
                outcome = self.worker.receive(head.started or time.monotonic(), head.timeout_s, self._progress())
            except _WorkerLost as lost:
                self._lose_worker(lost)
                continue
            except BaseException as exc:  # never leave a future unresolved
                head = self.held.popleft()
                self._drop_worker(stop=False)
                if not head.future.done():
                    head.future.set_exception(
                        ReferenceEngineError(f"the ngspice pool failed: {type(exc).__name__}: {exc}")
                    )
                continue
            self._answer(outcome)

    def _take(self) -> None:
        """Fill up from the pool's queue: wait for a case when none is held, take more only behind small ones."""
        while not self.stopping and len(self.held) < AHEAD_CASES and (not self.held or self.held[-1].small):
            try:
                item = self._next_case()
            except queue.Empty:
                return
            if item is None:
                self.stopping = True
                return
            future, task, timeout_s = item
            self.held.append(_Held(future, task, timeout_s))

    def _next_case(self) -> tuple[Future, Task, float] | None:
        """Wait for a case when this lane holds none; otherwise take one at once, and only while no other lane
        waits for one (raises ``queue.Empty``): a free worker comes first, so a case that hangs never holds
        up the case queued after it while another worker could run it."""
        pool = self.pool
        if self.held:
            if pool._waiting:
                raise queue.Empty
            return pool._queue.get_nowait()
        with pool._lock:
            pool._waiting += 1
        try:
            return pool._queue.get()
        finally:
            with pool._lock:
                pool._waiting -= 1

    def _promote(self) -> bool:
        """Mark the first case held as running (dropping those cancelled before they were sent); False: none."""
        while self.held:
            if self.pool._cancelled:  # taken off the queue just before a cancel emptied it
                self._interrupt_held()
                return False
            head = self.held[0]
            if head.running or head.future.set_running_or_notify_cancel():
                head.running = True
                return True
            if head.sent:  # the worker has it and will answer it first: wait for that answer and drop it
                head.running = head.dropped = True
                return True
            self.held.popleft()
        return False

    def _send(self) -> None:
        """Start a worker if there is none, then send the first case and the small ones behind it."""
        if self.worker is None:
            self.worker = _Worker(self.pool._settings_for, self.pool._start_timeout_s, self.pool._worker_process)
        waiting = 0  # bytes sent ahead of the running case, which the worker has not read yet
        batch: list[_Held] = []
        for i, entry in enumerate(self.held):
            if entry.sent:
                waiting += len(entry.payload) if i > 0 else 0
                continue
            if i > 0 and not entry.small:
                break
            entry.payload = entry.payload or packed(entry.task)
            if i > 0 and waiting + len(entry.payload) > AHEAD_BYTES:
                break
            waiting += len(entry.payload) if i > 0 else 0
            batch.append(entry)
        if not batch:
            return
        self.worker.send([entry.payload for entry in batch])
        for entry in batch:
            entry.sent = True
        if self.held[0].started is None:
            self.held[0].started = time.monotonic()

    def _answer(self, outcome: tuple[tuple[str, object], bool]) -> None:
        (status, value), retire = outcome
        head = self.held.popleft()
        if self.held and self.held[0].sent:
            self.held[0].started = time.monotonic()  # the worker went straight on to it
        if retire:
            self._drop_worker(stop=True)
        if head.dropped:
            return
        self.pool._count("finished")
        if status == "ok":
            head.future.set_result(value)
        else:
            assert isinstance(value, BaseException), "a worker's error outcome carries the exception"
            head.future.set_exception(value)

    def _lose_worker(self, lost: _WorkerLost) -> None:
        """The running case's error (or an interrupt's); the cases sent ahead wait for a fresh worker."""
        head = self.held.popleft()
        self._drop_worker(stop=False)
        cancelled = self.pool._cancelled
        if not head.dropped:
            self.pool._count("cancelled" if cancelled else "finished")
            error = _interrupted() if cancelled else self.pool._lost(lost, head.task, head.timeout_s)
            head.future.set_exception(error)
        if cancelled:
            self._interrupt_held()

    def _drop_worker(self, stop: bool) -> None:
        if self.worker is not None:
            self.worker.stop() if stop else self.worker.kill()
            self.worker = None
        for entry in self.held:
            entry.sent, entry.started = False, None

    def _interrupt_held(self) -> None:
        """After a cancel: every case held is cancelled, or an interrupt error if it had begun."""
        while self.held:
            entry = self.held.popleft()
            if entry.future.cancel():
                self.pool._count("cancelled")
            elif not entry.future.done():
                self.pool._count("cancelled")
                entry.future.set_exception(_interrupted())

    def _progress(self) -> Callable[[str, float], None] | None:
        return self.pool._progress_of(self.held[0].task)

    def close(self) -> None:
        if self.worker is not None:
            self.worker.stop()
            self.worker = None
        for entry in self.held:  # only after a failure of this thread itself
            if not entry.future.done():
                entry.future.set_exception(ReferenceEngineError("the ngspice pool stopped before this case ran"))
