"""Run ngspice in isolated worker processes, so that a crash or a hang costs one case, not the batch.

Why processes: ngspice's shared library is one engine per process and
crashes when shared across threads; it can also hang or abort the process on
input it dislikes. Each worker is a fresh interpreter (``_CHILD_COMMAND``)
talking to the parent over a socket pair:

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
import shutil
import signal
import socket
import subprocess
import sys
import tempfile
import threading
import time
import weakref
from collections.abc import Callable, Iterable, Iterator, Sequence
from concurrent.futures import Future
from multiprocessing.connection import Connection
from typing import Any

from crosscheck.errors import CrosscheckError, ReferenceEngineError
from crosscheck.model.budget import DEFAULT_MEMORY_BYTES, DEFAULT_TIME_S, Budget
from crosscheck.model.network import Network, Port
from crosscheck.model.validation import validate
from crosscheck.spice.deck import check_freqs
from crosscheck.spice.engine import DEFAULT_STRATEGY, SpiceResult, Strategy
from crosscheck.spice.pool_text import stopped_case_text, terminal_progress
from crosscheck.spice.sandbox import ENGINE_SOLVE, PROGRESS, WORKER_PREFIX, CaseSolver, Settings, Task
from crosscheck.spice.sandbox import worker_environment as _worker_environment

#: The defaults of every case's budget (``model.budget``, defined there once): 60 s wall clock, 2 GiB.
DEFAULT_TIMEOUT_S = DEFAULT_TIME_S
_START_TIMEOUT_S = 60.0  # a worker's interpreter, numpy, PySpice and ngspice: ~0.5 s when well
#: How often a running case's progress is reported (``SpicePool(on_progress=...)``), in seconds.
PROGRESS_EVERY_S = 2.0


# --------------------------------------------------------------------------- in the parent


class _WorkerLost(CrosscheckError, RuntimeError):
    """The worker process is gone or stuck; the pool turns this into the case's ReferenceEngineError."""


#: What a worker runs. ``-c`` rather than ``-m crosscheck.spice.sandbox``, so that module is imported once, by name.
#: Before any import (numpy starts threads, which inherit the mask) it blocks SIGTERM, so that only the
#: sandbox's orphan watch receives it (``sandbox.watch_parent``), and ignores SIGINT: a Ctrl-C in a terminal
#: reaches the whole process group, and the parent, not each worker, decides what an interrupt stops.
_CHILD_COMMAND = (
    "import signal, sys; signal.pthread_sigmask(signal.SIG_BLOCK, {signal.SIGTERM}); "
    "signal.signal(signal.SIGINT, signal.SIG_IGN); "
    "from crosscheck.spice.sandbox import child_entry; child_entry(sys.argv[1:])"
)


class _Worker:
    """The parent's handle on one worker process, started in its own empty directory."""

    def __init__(
        self,
        settings_for: Any,
        start_timeout_s: float,
        on_process: Callable[[_Worker, bool], None] = lambda w, up: None,
    ):
        self.directory = tempfile.mkdtemp(prefix=WORKER_PREFIX)
        self.process: subprocess.Popen | None = None
        self.conn: Connection | None = None
        self._on_process = on_process
        try:
            self._start(settings_for(self.directory), start_timeout_s)
        except _WorkerLost:
            self.kill()
            raise
        except BaseException as exc:
            self.kill()
            raise _WorkerLost(f"the ngspice worker could not be started ({type(exc).__name__}: {exc})") from None

    def _start(self, settings: Settings, start_timeout_s: float) -> None:
        work = os.path.join(self.directory, "work")
        os.makedirs(work)
        self._log_path = os.path.join(self.directory, "worker.log")
        ours, theirs = socket.socketpair()
        self.conn = Connection(ours.detach())
        try:
            with open(self._log_path, "wb") as log:
                # The parent's pid and the directory let the worker watch for this process's death and then
                # remove its own directory (``sandbox.watch_parent``); the path is mkdtemp's, never a case's.
                self.process = subprocess.Popen(
                    [sys.executable, "-c", _CHILD_COMMAND, str(theirs.fileno()), str(os.getpid()), self.directory],
                    cwd=work,
                    env=_worker_environment(self.directory, settings.library),
                    stdin=subprocess.DEVNULL,
                    stdout=subprocess.DEVNULL,
                    stderr=log,
                    pass_fds=(theirs.fileno(),),
                    close_fds=True,
                )
        finally:
            theirs.close()
        self._on_process(self, True)
        try:
            self.conn.send(settings)
            if not self.conn.poll(start_timeout_s):
                raise _WorkerLost(f"the ngspice worker did not start within {start_timeout_s:g} s")
            self.conn.recv()
        except (EOFError, OSError):
            raise _WorkerLost(f"the ngspice worker died while starting ({self._exit_text()})") from None

    def call(
        self, task: Task, timeout_s: float, on_progress: Callable[[str, float], None] | None = None
    ) -> tuple[tuple[str, Any], bool]:
        """The case's outcome; ``on_progress(analysis, elapsed_s)`` hears of it every ``PROGRESS_EVERY_S`` or so."""
        assert self.conn is not None, "a _Worker that exists has started (or __init__ raised)"
        try:
            self.conn.send(task)
        except (BrokenPipeError, EOFError, OSError):
            raise _WorkerLost(f"the ngspice worker was gone before the case started ({self._exit_text()})") from None
        started = time.monotonic()
        stage = "loading the deck"
        while True:
            left = started + timeout_s - time.monotonic()
            if left <= 0:
                raise _WorkerLost(f"ngspice did not finish this case within {timeout_s:g} s of wall-clock time")
            if not self.conn.poll(min(left, PROGRESS_EVERY_S)):
                if on_progress is not None:
                    on_progress(stage, time.monotonic() - started)
                continue
            try:
                message = self.conn.recv()
            except (EOFError, OSError):
                raise _WorkerLost(f"the ngspice worker died while running this case ({self._exit_text()})") from None
            if isinstance(message, tuple) and len(message) == 2 and message[0] == PROGRESS:
                stage = str(message[1])
                continue
            return message

    def _exit_text(self) -> str:
        if self.process is None:
            return "never started"
        try:
            code = self.process.wait(timeout=2.0)
        except subprocess.TimeoutExpired:
            return "still running"
        if code < 0:
            sig = signal.Signals(-code).name if -code in signal.valid_signals() else str(-code)
            why = {
                "SIGXCPU": "it reached its CPU-time limit",
                "SIGKILL": "killed: a crash, an out-of-memory kill or an outside signal",
                "SIGSEGV": "ngspice crashed",
                "SIGABRT": "ngspice aborted",
            }.get(sig, "ended by a signal")
            text = f"{sig}: {why}"
        else:
            text = f"exit status {code}"
        tail = self._log_tail()
        return f"{text}; its last words: {tail}" if tail else text

    def _log_tail(self) -> str:
        try:
            with open(self._log_path, "rb") as fh:
                lines = fh.read()[-2000:].decode("utf-8", "replace").strip().splitlines()
        except OSError:
            return ""
        return " | ".join(lines[-3:])

    def stop(self) -> None:
        """Ask the worker to finish, then make sure it has."""
        assert self.conn is not None and self.process is not None, "a _Worker that exists has started"
        try:
            self.conn.send(None)
            self.process.wait(timeout=5.0)
        except (BrokenPipeError, EOFError, OSError, subprocess.TimeoutExpired):
            pass
        self.kill()

    def terminate_now(self) -> None:
        """Kill the process only (any thread may call it); the thread serving this worker then cleans up."""
        if self.process is not None and self.process.poll() is None:
            self.process.kill()

    def kill(self) -> None:
        if self.process is not None and self.process.poll() is None:
            self.process.kill()
            self.process.wait()
        if self.conn is not None:
            self.conn.close()
        shutil.rmtree(self.directory, ignore_errors=True)
        self._on_process(self, False)


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
        worker: _Worker | None = None
        try:
            while True:
                item = self._queue.get()
                if item is None:
                    return
                future, task, timeout_s = item
                if not future.set_running_or_notify_cancel():
                    continue
                if self._cancelled:  # taken off the queue just before a cancel emptied it
                    self._count("cancelled")
                    future.set_exception(_interrupted())
                    continue
                try:
                    if worker is None:
                        worker = _Worker(self._settings_for, self._start_timeout_s, self._worker_process)
                    (status, value), retire = worker.call(task, timeout_s, self._progress_of(task))
                except _WorkerLost as lost:
                    if worker is not None:
                        worker.kill()
                        worker = None
                    self._count("cancelled" if self._cancelled else "finished")
                    future.set_exception(_interrupted() if self._cancelled else self._lost(lost, task, timeout_s))
                    continue
                except BaseException as exc:  # never leave a future unresolved
                    future.set_exception(ReferenceEngineError(f"the ngspice pool failed: {type(exc).__name__}: {exc}"))
                    continue
                if retire:
                    worker.stop()
                    worker = None
                self._count("finished")
                if status == "ok":
                    future.set_result(value)
                else:
                    future.set_exception(value)
        finally:
            if worker is not None:
                worker.stop()

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
