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

Fault injection, for tests only: when ``CROSSCHECK_TEST_FAULTS=1`` is set in
the parent's environment at ``submit`` time, a network whose title is one of
``FAULT_TITLES`` makes its worker hang (sleep), spin (burn CPU), die
(SIGKILL) or hog memory instead of running ngspice. Both conditions are needed, so neither a
stray title nor a stray variable can trigger it.
"""

from __future__ import annotations

import atexit
import math
import os
import queue
import resource
import shutil
import signal
import socket
import subprocess
import sys
import tempfile
import threading
import time
from concurrent.futures import Future
from multiprocessing.connection import Connection
from dataclasses import dataclass
from typing import Any, Iterable, Iterator, Sequence

from crosscheck.errors import CrosscheckError, ReferenceEngineError
from crosscheck.model.network import Network, Port, validate
from crosscheck.spice.engine import DEFAULT_STRATEGY, Engine, SpiceResult, Strategy, solve
from crosscheck.spice.deck import check_freqs

FAULT_ENV = "CROSSCHECK_TEST_FAULTS"
#: Network titles that make a worker misbehave on purpose when FAULT_ENV is "1" in the parent.
FAULT_TITLES = {
    "crosscheck-test-fault:hang": "hang",
    "crosscheck-test-fault:spin": "spin",
    "crosscheck-test-fault:die": "die",
    "crosscheck-test-fault:hog": "hog",
}

DEFAULT_TIMEOUT_S = 60.0
DEFAULT_MEMORY_BYTES = 2 << 30
_START_TIMEOUT_S = 60.0  # a worker's interpreter, numpy, PySpice and ngspice: ~0.5 s when well


@dataclass(frozen=True)
class _Settings:
    """What a worker needs to set itself up; sent once, when it starts."""

    directory: str
    library: str | None
    memory_bytes: int | None
    cpu_s: float | None
    cases_per_worker: int


@dataclass(frozen=True)
class _Task:
    network: Network
    port: Port
    freqs: tuple[float, ...]
    strategy: Strategy
    faults: bool


# --------------------------------------------------------------------------- inside the worker


def _worker_main(conn: Any, settings: _Settings) -> None:
    """A worker's whole life: sandbox, engine, then one case per message until told to stop."""
    library = _enter_sandbox(settings)
    engine: Engine | None = None
    startup_error: CrosscheckError | None = None
    try:
        engine = Engine(library)
    except CrosscheckError as exc:
        startup_error = exc
    conn.send(("ready", engine.version if engine else None))
    done = 0
    while True:
        try:
            task = conn.recv()
        except (EOFError, OSError):  # the parent is gone without stopping us: clean up after ourselves
            shutil.rmtree(settings.directory, ignore_errors=True)
            return
        if task is None:
            return
        _limit_cpu(settings.cpu_s)
        retire = False
        try:
            if task.faults:
                inject_fault(task.network.title)
            if engine is None:
                assert startup_error is not None
                raise startup_error
            outcome: tuple[str, Any] = ("ok", solve(engine, task.network, task.port, task.freqs, task.strategy))
        except CrosscheckError as exc:
            outcome = ("error", exc)
            retire = engine is not None and isinstance(exc, ReferenceEngineError)
        except MemoryError:
            outcome = ("error", ReferenceEngineError(
                f"the ngspice worker ran out of memory (limit {_bytes(settings.memory_bytes)}) on this case; "
                "raise memory_bytes if the network is genuinely that large"))
            retire = True
        except Exception as exc:  # a bug or an engine fault: report it as this case's error, then retire
            outcome = ("error", ReferenceEngineError(f"the ngspice worker failed: {type(exc).__name__}: {exc}"))
            retire = True
        done += 1
        retire = retire or done >= settings.cases_per_worker
        try:
            conn.send((outcome, retire))
        except Exception as exc:  # the outcome could not be pickled: send its words instead
            conn.send((("error", ReferenceEngineError(f"{outcome[1]} (unpicklable result: {exc})")), True))
        if retire:
            return


def _enter_sandbox(settings: _Settings) -> str | None:
    """Resource limits, and the working directory and environment the parent prepared. Returns the library path.

    The parent already started this process in an empty directory with a private HOME and no
    SPICE_* / NGSPICE_* variables but the library path (``_worker_environment``).
    """
    os.chdir(os.path.join(settings.directory, "work"))
    resource.setrlimit(resource.RLIMIT_CORE, (0, 0))
    if settings.memory_bytes:
        _, hard = resource.getrlimit(resource.RLIMIT_AS)
        limit = settings.memory_bytes if hard == resource.RLIM_INFINITY else min(hard, settings.memory_bytes)
        resource.setrlimit(resource.RLIMIT_AS, (limit, limit))
    return settings.library or os.environ.get("NGSPICE_LIBRARY_PATH") or None


def _limit_cpu(cpu_s: float | None) -> None:
    """Let this case use ``cpu_s`` more seconds of CPU; past that the kernel sends SIGXCPU, which ends the worker."""
    if not cpu_s:
        return
    usage = resource.getrusage(resource.RUSAGE_SELF)
    soft = math.ceil(usage.ru_utime + usage.ru_stime + cpu_s)
    _, hard = resource.getrlimit(resource.RLIMIT_CPU)
    if hard != resource.RLIM_INFINITY:
        soft = min(soft, hard)
    resource.setrlimit(resource.RLIMIT_CPU, (soft, hard))


def inject_fault(title: str) -> None:
    """Misbehave as the title asks (see FAULT_TITLES); a no-op for any other title. Only workers call this."""
    kind = FAULT_TITLES.get(title)
    if kind == "hang":
        while True:
            time.sleep(3600)
    elif kind == "spin":
        while True:
            pass
    elif kind == "die":
        os.kill(os.getpid(), signal.SIGKILL)
    elif kind == "hog":
        hoard = [bytearray(1 << 28) for _ in range(64)]  # 16 GiB: past any sane memory limit
        raise AssertionError(f"the memory limit did not stop an allocation of {len(hoard) >> 2} GiB")


# --------------------------------------------------------------------------- in the parent


class _WorkerLost(Exception):
    pass


#: What a worker runs. ``-c`` rather than ``-m crosscheck.spice.workers``, so this module is imported once, by name.
_CHILD_COMMAND = "import sys; from crosscheck.spice.workers import _child_entry; _child_entry(sys.argv[1:])"


class _Worker:
    """The parent's handle on one worker process, started in its own empty directory."""

    def __init__(self, settings_for: Any, start_timeout_s: float):
        self.directory = tempfile.mkdtemp(prefix="crosscheck-ngspice-")
        self.process: subprocess.Popen | None = None
        self.conn: Connection | None = None
        try:
            self._start(settings_for(self.directory), start_timeout_s)
        except _WorkerLost:
            self.kill()
            raise
        except BaseException as exc:
            self.kill()
            raise _WorkerLost(f"the ngspice worker could not be started ({type(exc).__name__}: {exc})") from None

    def _start(self, settings: _Settings, start_timeout_s: float) -> None:
        work = os.path.join(self.directory, "work")
        os.makedirs(work)
        self._log_path = os.path.join(self.directory, "worker.log")
        ours, theirs = socket.socketpair()
        self.conn = Connection(ours.detach())
        try:
            with open(self._log_path, "wb") as log:
                self.process = subprocess.Popen(
                    [sys.executable, "-c", _CHILD_COMMAND, str(theirs.fileno())],
                    cwd=work, env=_worker_environment(self.directory, settings.library),
                    stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL, stderr=log,
                    pass_fds=(theirs.fileno(),), close_fds=True,
                )
        finally:
            theirs.close()
        try:
            self.conn.send(settings)
            if not self.conn.poll(start_timeout_s):
                raise _WorkerLost(f"the ngspice worker did not start within {start_timeout_s:g} s")
            self.conn.recv()
        except (EOFError, OSError):
            raise _WorkerLost(f"the ngspice worker died while starting ({self._exit_text()})") from None

    def call(self, task: _Task, timeout_s: float) -> tuple[tuple[str, Any], bool]:
        try:
            self.conn.send(task)
        except (BrokenPipeError, EOFError, OSError):
            raise _WorkerLost(f"the ngspice worker was gone before the case started ({self._exit_text()})") from None
        if not self.conn.poll(timeout_s):
            raise _WorkerLost(f"ngspice did not finish this case within {timeout_s:g} s of wall-clock time")
        try:
            return self.conn.recv()
        except (EOFError, OSError):
            raise _WorkerLost(f"the ngspice worker died while running this case ({self._exit_text()})") from None

    def _exit_text(self) -> str:
        if self.process is None:
            return "never started"
        try:
            code = self.process.wait(timeout=2.0)
        except subprocess.TimeoutExpired:
            return "still running"
        if code < 0:
            sig = signal.Signals(-code).name if -code in signal.valid_signals() else str(-code)
            why = {"SIGXCPU": "it reached its CPU-time limit",
                   "SIGKILL": "killed: a crash, an out-of-memory kill or an outside signal",
                   "SIGSEGV": "ngspice crashed",
                   "SIGABRT": "ngspice aborted"}.get(sig, "ended by a signal")
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
        try:
            self.conn.send(None)
            self.process.wait(timeout=5.0)
        except (BrokenPipeError, EOFError, OSError, subprocess.TimeoutExpired):
            pass
        self.kill()

    def kill(self) -> None:
        if self.process is not None and self.process.poll() is None:
            self.process.kill()
            self.process.wait()
        if self.conn is not None:
            self.conn.close()
        shutil.rmtree(self.directory, ignore_errors=True)


def _worker_environment(directory: str, library: str | None) -> dict[str, str]:
    """The parent's environment less every SPICE_* and NGSPICE_* variable, with a private HOME.

    The package's own location goes first on PYTHONPATH so the worker imports the same crosscheck.
    """
    env = {k: v for k, v in os.environ.items() if not k.upper().startswith(("SPICE_", "NGSPICE_"))}
    home = os.path.join(directory, "home")
    os.makedirs(home, exist_ok=True)
    env["HOME"] = home
    env["OMP_NUM_THREADS"] = "1"  # ngspice's OpenMP serves transistor models we never use
    if library:
        env["NGSPICE_LIBRARY_PATH"] = library
    package_root = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    env["PYTHONPATH"] = os.pathsep.join(p for p in (package_root, env.get("PYTHONPATH")) if p)
    env.pop("PYTHONSTARTUP", None)
    return env


class SpicePool:
    """ngspice in ``workers`` isolated processes; ``submit`` returns a ``Future[SpiceResult]``.

    Every problem of a case arrives through its future: ``NetworkError`` for an
    ill-posed network, ``ReferenceEngineError`` when ngspice fails, crashes or
    overruns, ``EngineUnavailableError`` when ngspice is not installed. Use it
    as a context manager; leaving waits for the cases already submitted.
    """

    def __init__(self, workers: int | None = None, *, timeout_s: float = DEFAULT_TIMEOUT_S,
                 memory_bytes: int | None = DEFAULT_MEMORY_BYTES, cpu_s: float | None = None,
                 strategy: Strategy = DEFAULT_STRATEGY, library: str | None = None,
                 cases_per_worker: int = 1000, start_timeout_s: float = _START_TIMEOUT_S):
        count = (os.cpu_count() or 1) if workers is None else int(workers)
        if count < 1:
            raise ValueError(f"workers must be at least 1 (got {workers!r})")
        if not timeout_s > 0:
            raise ValueError(f"timeout_s must be a positive number of seconds (got {timeout_s!r})")
        self.workers = count
        self.timeout_s = float(timeout_s)
        self.strategy = strategy
        self._settings = dict(library=library or os.environ.get("NGSPICE_LIBRARY_PATH") or None,
                              memory_bytes=memory_bytes, cpu_s=cpu_s if cpu_s is not None else self.timeout_s,
                              cases_per_worker=int(cases_per_worker))
        self._start_timeout_s = start_timeout_s
        self._queue: queue.SimpleQueue = queue.SimpleQueue()
        self._closed = False
        self._lock = threading.Lock()
        self._threads = [threading.Thread(target=self._serve, name=f"crosscheck-spice-{i}", daemon=True)
                         for i in range(count)]
        for t in self._threads:
            t.start()

    def __enter__(self) -> "SpicePool":
        return self

    def __exit__(self, *exc_info: object) -> None:
        self.close()

    def submit(self, network: Network, port: Port, freqs: Iterable[float], *, timeout_s: float | None = None,
               strategy: Strategy | None = None) -> "Future[SpiceResult]":
        """Queue one case; its future holds the ``SpiceResult`` or the error of that case alone."""
        future: Future = Future()
        with self._lock:
            if self._closed:
                raise RuntimeError("this SpicePool is closed; create a new one to submit more cases")
            try:
                validate(network, port)
                if (strategy or self.strategy) not in ("combined", "separate"):
                    raise ValueError(f"strategy must be 'combined' or 'separate' (got {strategy!r})")
                task = _Task(network, port, check_freqs(freqs), strategy or self.strategy,
                             faults=os.environ.get(FAULT_ENV) == "1")
            except (CrosscheckError, ValueError) as exc:
                future.set_exception(exc)
                return future
            self._queue.put((future, task, float(timeout_s or self.timeout_s)))
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

    def close(self) -> None:
        """Finish the cases already submitted, then stop every worker."""
        with self._lock:
            if self._closed:
                return
            self._closed = True
            for _ in self._threads:
                self._queue.put(None)
        for t in self._threads:
            if t is not threading.current_thread():
                t.join()

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
                try:
                    if worker is None:
                        worker = _Worker(self._settings_for, self._start_timeout_s)
                    (status, value), retire = worker.call(task, timeout_s)
                except _WorkerLost as lost:
                    if worker is not None:
                        worker.kill()
                        worker = None
                    future.set_exception(self._lost(lost, task))
                    continue
                except BaseException as exc:  # never leave a future unresolved
                    future.set_exception(ReferenceEngineError(f"the ngspice pool failed: {type(exc).__name__}: {exc}"))
                    continue
                if retire:
                    worker.stop()
                    worker = None
                if status == "ok":
                    future.set_result(value)
                else:
                    future.set_exception(value)
        finally:
            if worker is not None:
                worker.stop()

    def _settings_for(self, directory: str) -> _Settings:
        return _Settings(directory=directory, **self._settings)

    def _lost(self, lost: _WorkerLost, task: _Task) -> ReferenceEngineError:
        limits = (f"limits: {self.timeout_s:g} s wall clock, {self._settings['cpu_s']:g} s CPU, "
                  f"{_bytes(self._settings['memory_bytes'])} memory")
        return ReferenceEngineError(
            f"{lost}; the worker was stopped and replaced, and the other cases go on "
            f"(network {task.network.title!r}, {len(task.network.elements)} elements, {limits}). "
            "A linear network of this kind takes milliseconds in ngspice: if it is very large, raise the limits; "
            "otherwise report the network."
        )


def _bytes(n: int | None) -> str:
    return "no limit on" if not n else f"{n / 2**30:g} GiB"


_SHARED: SpicePool | None = None
_SHARED_LOCK = threading.Lock()


def shared_pool() -> SpicePool:
    """A one-worker pool kept for this process's one-off calls (``reference.spice_equivalent``)."""
    global _SHARED
    with _SHARED_LOCK:
        if _SHARED is None:
            _SHARED = SpicePool(workers=1)
            atexit.register(_SHARED.close)
        return _SHARED


def _child_entry(argv: Sequence[str]) -> None:
    """A worker's entry point (``_CHILD_COMMAND``): serve cases on the socket inherited as file descriptor argv[0]."""
    conn = Connection(int(argv[0]))
    settings = conn.recv()
    _worker_main(conn, settings)
