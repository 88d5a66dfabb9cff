"""One ngspice worker process as the parent sees it: started in its own empty directory, sent cases, watched.

Split from ``workers`` (the pool), which decides which case goes to which worker and what a lost one costs;
here is the process itself: its command, its start, one case's wait with its wall-clock limit and progress
messages, and why it ended when it did (``_exit_text``). The sandbox the process enters is ``sandbox``'s.
"""

from __future__ import annotations

import os
import pickle
import select
import shutil
import signal
import socket
import struct
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable, Sequence
from multiprocessing.connection import Connection
from multiprocessing.reduction import ForkingPickler
from typing import Any

from crosscheck.errors import CrosscheckError
from crosscheck.spice.sandbox import PROGRESS, WORKER_PREFIX, Settings, Task
from crosscheck.spice.sandbox import worker_environment as _worker_environment

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
        self._inbox = bytearray()  # bytes read from the worker that do not yet make a whole message
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
        self.send([packed(task)])
        return self.receive(time.monotonic(), timeout_s, on_progress)

    def send(self, payloads: Sequence[bytes]) -> None:
        """Hand the worker cases (``packed``), in one write; it starts each when it has answered those before.

        Framed as ``Connection.send_bytes`` frames them, so the worker's ``recv`` reads one case at a time.
        """
        assert self.conn is not None, "a _Worker that exists has started (or __init__ raised)"
        frames = b"".join(_frame(payload) for payload in payloads)
        try:
            view = memoryview(frames)
            while view:
                view = view[os.write(self.conn.fileno(), view) :]
        except (BrokenPipeError, EOFError, OSError):
            raise _WorkerLost(f"the ngspice worker was gone before the case started ({self._exit_text()})") from None

    def receive(
        self, started: float, timeout_s: float, on_progress: Callable[[str, float], None] | None = None
    ) -> tuple[tuple[str, Any], bool]:
        """The outcome of the oldest case sent and not yet answered, which the worker began at ``started``
        (``time.monotonic()``); past ``started + timeout_s`` the worker is declared lost.

        One read takes every message that has arrived (the answers of cases sent ahead come in runs), so a
        run of answers costs one wait and one read, not two reads each as ``Connection.recv`` makes.
        """
        assert self.conn is not None, "a _Worker that exists has started (or __init__ raised)"
        stage = "loading the deck"
        while True:
            message = self._next_message()
            if message is _NOTHING:
                left = started + timeout_s - time.monotonic()
                if left <= 0:
                    raise _WorkerLost(f"ngspice did not finish this case within {timeout_s:g} s of wall-clock time")
                if not select.select([self.conn.fileno()], [], [], min(left, PROGRESS_EVERY_S))[0]:
                    if on_progress is not None:
                        on_progress(stage, time.monotonic() - started)
                    continue
                self._read_more()
            elif isinstance(message, tuple) and len(message) == 2 and message[0] == PROGRESS:
                stage = str(message[1])
            else:
                return message

    def _read_more(self) -> None:
        assert self.conn is not None, "a _Worker that exists has started (or __init__ raised)"
        try:
            chunk = os.read(self.conn.fileno(), 1 << 16)
        except OSError:
            chunk = b""
        if not chunk:
            raise _WorkerLost(f"the ngspice worker died while running this case ({self._exit_text()})")
        self._inbox += chunk

    def _next_message(self) -> Any:
        """The first whole message read so far (unpickled), or ``_NOTHING``."""
        box = self._inbox
        if len(box) < 4:
            return _NOTHING
        (size,) = struct.unpack_from("!i", box)
        start = 4
        if size == -1:  # Connection's frame for 2 GiB and more
            if len(box) < 12:
                return _NOTHING
            (size,) = struct.unpack_from("!Q", box, 4)
            start = 12
        if len(box) < start + size:
            return _NOTHING
        body = bytes(box[start : start + size])
        del box[: start + size]
        return pickle.loads(body)

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


def packed(task: Task) -> bytes:
    """A case as the bytes ``_Worker.send`` writes: what ``Connection.send`` would pickle, so the worker's
    ``recv`` reads it; the pool packs a case once and may send it again to a fresh worker."""
    return bytes(ForkingPickler.dumps(task))


#: ``_Worker._next_message`` when no whole message has arrived (None is a message: the worker's stop).
_NOTHING = object()


def _frame(payload: bytes) -> bytes:
    """``payload`` with the length header ``Connection.send_bytes`` writes (``recv_bytes`` reads it)."""
    size = len(payload)
    header = struct.pack("!i", size) if size <= 0x7FFFFFFF else struct.pack("!i", -1) + struct.pack("!Q", size)
    return header + payload
