"""Inside an ngspice worker process: the sandbox it enters, and the loop that solves one case per message.

A worker is a fresh interpreter started by ``crosscheck.spice.workers`` (``child_entry``) talking to its
parent over a socket pair. Before loading ngspice it enters the directory and environment the parent
prepared (an empty directory, a private empty ``HOME``: ngspice executes a ``.spiceinit`` found in
either), limits its address space (``RLIMIT_AS``) and its CPU time per case (``RLIMIT_CPU``), and writes
no core files. Both limits are set again for each case from the case's own (``Task``), which grow with
the network's size by ``model.budget``'s rule unless the caller set them.

While it solves a case the worker tells its parent which analysis it starts (``PROGRESS`` messages,
``engine.report_progress_to``): fixed words of ours and a count, never text from the case.

Which function solves a case is a ``CaseSolver`` the parent's ``SpicePool`` sends once, in the worker's
settings: ``engine.solve`` unless the code that built the pool named another (the worker tests name
functions of their own that hang, spin, die or hog memory, to prove the pool survives them). The seam is
safe because only the pool's constructor chooses it: nothing a case carries (its network, title, port,
frequencies) is ever read to pick a function, and ngspice sees only the decks our writers made: from the
model (``deck``), and for the reading check the user's lines the reader accepted, checked again (``reading``). A module named in a ``CaseSolver`` runs with the caller's own rights, as any import the caller
makes would.
"""

from __future__ import annotations

import ctypes
import importlib
import math
import os
import resource
import shutil
import signal
import sys
import threading
import time
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass
from multiprocessing.connection import Connection
from typing import Any

from crosscheck.errors import CrosscheckError, ReferenceEngineError
from crosscheck.model.network import Network, Port
from crosscheck.spice.engine import Engine, SpiceResult, Strategy, report_progress_to
from crosscheck.spice.multiport import MultiportSpiceResult, solve_multiport


@dataclass(frozen=True)
class CaseSolver:
    """The function a worker calls for each case, named so that a fresh worker process can import it.

    It is called as ``function(engine, network, port, freqs, strategy)`` and returns a ``SpiceResult``
    (``engine.solve``'s signature). ``path``: a directory put first on the worker's ``sys.path`` before
    ``module`` is imported (for a module outside the package, such as one of the tests').
    """

    module: str = "crosscheck.spice.engine"
    name: str = "solve"
    path: str | None = None

    def load(self) -> Callable[[Engine, Network, Port, tuple[float, ...], Strategy], SpiceResult]:
        """Import the function (in the worker)."""
        if self.path and self.path not in sys.path:
            sys.path.insert(0, self.path)
        function = getattr(importlib.import_module(self.module), self.name)
        if not callable(function):
            raise TypeError(f"{self.module}.{self.name} is not callable; name a function with engine.solve's signature")
        return function


#: How every worker's temporary directory is named (``tempfile.mkdtemp(prefix=...)`` in the parent).
WORKER_PREFIX = "crosscheck-ngspice-"
#: Linux ``prctl`` option that sends this process a signal when the thread that started it ends.
_PR_SET_PDEATHSIG = 1

#: The first item of a progress message from a worker: (PROGRESS, which analysis started). A case's outcome
#: is ((status, value), retire), whose first item is a tuple, so the two never mix.
PROGRESS = "progress"

#: ngspice's own solve: what every pool uses unless its constructor is told otherwise.
ENGINE_SOLVE = CaseSolver()


@dataclass(frozen=True)
class Settings:
    """What a worker needs to set itself up; sent once, when it starts."""

    directory: str
    library: str | None
    memory_bytes: int | None
    cpu_s: float | None
    cases_per_worker: int
    solve: CaseSolver = ENGINE_SOLVE


@dataclass(frozen=True)
class Task:
    """One case for a worker."""

    network: Network
    port: Port
    freqs: tuple[float, ...]
    strategy: Strategy
    #: This case's own limits (``Budget.for_elements``, the pool's ``submit``); None: the worker's settings.
    cpu_s: float | None = None
    memory_bytes: int | None = None
    #: A multi-port case (``SpicePool.submit_multiport``): its ports, solved by ``spice.multiport``; () for one port.
    ports: tuple[Port, ...] = ()


def describe_bytes(n: int | None) -> str:
    """A memory limit in words ("2 GiB", or "no limit on")."""
    return "no limit on" if not n else f"{n / 2**30:g} GiB"


def child_entry(argv: Sequence[str]) -> None:
    """A worker's entry point: serve cases on the socket inherited as file descriptor argv[0].

    argv[1] is the parent's pid and argv[2] this worker's directory (``watch_parent``).
    """
    watch_parent(int(argv[1]), argv[2])
    conn = Connection(int(argv[0]))
    settings = conn.recv()
    worker_main(conn, settings)


def watch_parent(parent_pid: int, directory: str) -> None:
    """End this worker, removing its directory, as soon as its parent dies, even by SIGKILL.

    The kernel sends SIGTERM when the parent's thread that started this worker ends (Linux's parent-death
    signal, ``prctl(PR_SET_PDEATHSIG)``); if the parent died before that was set, this process already has
    another parent, which ``os.getppid`` shows right after. SIGTERM is blocked in every thread (the worker's
    command blocks it before any import), so it is taken here by a thread of its own in ``sigwait``, which
    runs even while the main thread is stuck in ngspice's C code (ctypes and cffi release the GIL), removes
    the directory and ends the process. Without the parent-death signal (not Linux) the worker still removes
    its directory when its socket closes (``worker_main``), and a hang there is ended by its CPU limit.

    Why the removal is safe: ``directory`` comes from the parent's command line (``tempfile.mkdtemp`` in
    ``workers``), never from a case, and it is removed only if it is named like a worker's directory and
    is the one this process was started in (its ``work`` folder is the current directory).
    """
    here = os.path.realpath(os.getcwd())
    if not os.path.basename(directory).startswith(WORKER_PREFIX) or here != os.path.realpath(
        os.path.join(directory, "work")
    ):
        raise ReferenceEngineError(f"the ngspice worker was started outside its own directory ({here!r}); not starting")
    owned = directory

    def orphaned() -> None:
        shutil.rmtree(owned, ignore_errors=True)
        os._exit(128 + signal.SIGTERM)

    if sys.platform.startswith("linux"):
        try:
            libc = ctypes.CDLL(None, use_errno=True)
            libc.prctl(_PR_SET_PDEATHSIG, int(signal.SIGTERM), 0, 0, 0)
        except (OSError, AttributeError):
            pass
    if os.getppid() != parent_pid:  # the parent died before the signal was set
        orphaned()
    if signal.SIGTERM in signal.pthread_sigmask(signal.SIG_BLOCK, ()):

        def wait_for_sigterm() -> None:
            signal.sigwait({signal.SIGTERM})
            orphaned()

        threading.Thread(target=wait_for_sigterm, name="crosscheck-orphan-watch", daemon=True).start()


def worker_main(conn: Any, settings: Settings) -> None:
    """A worker's whole life: sandbox, engine, then one case per message until told to stop."""
    library = enter_sandbox(settings)
    solve_case = settings.solve.load()
    engine: Engine | None = None
    startup_error: CrosscheckError | None = None
    try:
        engine = Engine(library)
    except CrosscheckError as exc:
        startup_error = exc
    conn.send(("ready", engine.version if engine else None))
    # Which analysis starts, for the parent's progress line (``workers``); our own words, never a case's.
    teller = ProgressTeller(conn)
    report_progress_to(teller.stage_started)
    done = 0
    while True:
        try:
            task = conn.recv()
        except (EOFError, OSError):  # the parent is gone without stopping us: clean up after ourselves
            shutil.rmtree(settings.directory, ignore_errors=True)
            return
        if task is None:
            return
        limit_cpu(task.cpu_s or settings.cpu_s)
        limit_memory(task.memory_bytes or settings.memory_bytes)
        teller.case_started()
        outcome, retire = _one_case(solve_case, engine, startup_error, task, settings)
        done += 1
        retire = retire or done >= settings.cases_per_worker
        with teller.case_ended():
            try:
                conn.send((outcome, retire))
            except Exception as exc:  # the outcome could not be pickled: send its words instead
                conn.send((("error", ReferenceEngineError(f"{outcome[1]} (unpicklable result: {exc})")), True))
        if retire:
            return


#: A case's analysis is told to the parent only once the case has run this long, then as it changes, at most
#: this often: the parent shows it from ``PROGRESS_EVERY_S`` (2 s) on, and a message per analysis of every
#: small case would wake the parent's thread for nothing (``benchmarks/throughput.py``).
TELL_AFTER_S = 0.25


class ProgressTeller:
    """Tells the parent which analysis the running case is in, from a thread of its own, once the case is long.

    ngspice runs in the main thread (ctypes and cffi release the interpreter lock there), so this thread can
    send while a long analysis runs. It and the main thread's outcome share one lock on the socket, and it
    never sends after the case's outcome: a late analysis name would be read as the next case's.
    """

    def __init__(self, conn: Any):
        self._conn = conn
        self._send_lock = threading.Lock()
        self._state = threading.Condition()
        self._case = 0  # counts the cases begun; the running one's number while ``_running``
        self._running = False
        self._began = 0.0
        self._stage: str | None = None
        self._told: tuple[int, str] | None = None
        threading.Thread(target=self._tell, name="crosscheck-progress", daemon=True).start()

    def case_started(self) -> None:
        with self._state:
            self._case += 1
            self._running, self._began, self._stage = True, time.monotonic(), None
            self._state.notify()

    def stage_started(self, stage: str) -> None:
        with self._state:
            self._stage = stage

    @contextmanager
    def case_ended(self) -> Iterator[None]:
        """Hold the socket for the outcome; no analysis name of this case is sent after it."""
        with self._send_lock:
            with self._state:
                self._running = False
            yield

    def _tell(self) -> None:
        while True:
            with self._state:
                while not self._running:
                    self._state.wait()
                due = self._began + TELL_AFTER_S - time.monotonic()
                news = None if self._stage is None or self._told == (self._case, self._stage) else self._stage
                case = self._case
            if due > 0 or news is None:
                time.sleep(max(due, TELL_AFTER_S) if news is None else due)
                continue
            with self._send_lock:
                with self._state:
                    if not (self._running and self._case == case):
                        continue
                try:
                    self._conn.send((PROGRESS, news))
                except OSError:  # the parent is gone; the main thread finds out on its own
                    return
                self._told = (case, news)


def _one_case(
    solve_case: Callable[..., SpiceResult],
    engine: Engine | None,
    startup_error: CrosscheckError | None,
    task: Task,
    settings: Settings,
) -> tuple[tuple[str, Any], bool]:
    """One case's outcome, ("ok", result) or ("error", error), and whether the worker retires after it."""
    try:
        if engine is None:
            assert startup_error is not None
            raise startup_error
        result: SpiceResult | MultiportSpiceResult
        if task.ports:  # a multi-port case: ngspice's runs assembled into matrices (``spice.multiport``)
            result = solve_multiport(engine, task.network, task.ports, task.freqs, task.strategy)
        else:
            result = solve_case(engine, task.network, task.port, task.freqs, task.strategy)
        return ("ok", result), bool(getattr(engine, "broken", False))  # ngspice that cannot recover: retire
    except CrosscheckError as exc:
        return ("error", exc), engine is not None and isinstance(exc, ReferenceEngineError)
    except MemoryError:
        return (
            "error",
            ReferenceEngineError(
                f"the ngspice worker ran out of memory (limit {describe_bytes(settings.memory_bytes)}) on this case; "
                "raise memory_bytes if the network is genuinely that large"
            ),
        ), True
    except Exception as exc:  # a bug or an engine fault: report it as this case's error, then retire
        return ("error", ReferenceEngineError(f"the ngspice worker failed: {type(exc).__name__}: {exc}")), True


def enter_sandbox(settings: Settings) -> str | None:
    """Resource limits, and the working directory and environment the parent prepared. Returns the library path.

    The parent already started this process in an empty directory with a private HOME and no
    SPICE_* / NGSPICE_* variables but the library path (``worker_environment``).
    """
    os.chdir(os.path.join(settings.directory, "work"))
    resource.setrlimit(resource.RLIMIT_CORE, (0, 0))
    limit_memory(settings.memory_bytes)
    return settings.library or os.environ.get("NGSPICE_LIBRARY_PATH") or None


def limit_memory(memory_bytes: int | None) -> None:
    """Hold this process's address space to ``memory_bytes`` (the soft ``RLIMIT_AS``; the hard limit stays,
    so a later, larger case may raise it again: ``Task.memory_bytes``, from the size rule of ``model.budget``)."""
    if not memory_bytes:
        return
    _, hard = resource.getrlimit(resource.RLIMIT_AS)
    limit = memory_bytes if hard == resource.RLIM_INFINITY else min(hard, memory_bytes)
    resource.setrlimit(resource.RLIMIT_AS, (limit, hard))


def limit_cpu(cpu_s: float | None) -> None:
    """Let this case use ``cpu_s`` more seconds of CPU; past that the kernel sends SIGXCPU, which ends the worker."""
    if not cpu_s:
        return
    usage = resource.getrusage(resource.RUSAGE_SELF)
    soft = math.ceil(usage.ru_utime + usage.ru_stime + cpu_s)
    _, hard = resource.getrlimit(resource.RLIMIT_CPU)
    if hard != resource.RLIM_INFINITY:
        soft = min(soft, hard)
    resource.setrlimit(resource.RLIMIT_CPU, (soft, hard))


def worker_environment(directory: str, library: str | None) -> dict[str, str]:
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
    package_root = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))  # the folder holding crosscheck/
    env["PYTHONPATH"] = os.pathsep.join(p for p in (package_root, env.get("PYTHONPATH")) if p)
    env.pop("PYTHONSTARTUP", None)
    return env
