"""Timing helpers shared by the benchmark's scripts: the best of several runs, section headings, child runs,
and whole commands timed as a user times them (wall time and the child's peak resident memory)."""

from __future__ import annotations

import json
import math
import os
import shutil
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path


def timed(fn: Callable[[], object], repeat: int) -> tuple[float, object]:
    """The fastest of ``repeat`` runs of ``fn``, and its last result."""
    best, value = math.inf, None
    for _ in range(repeat):
        started = time.perf_counter()
        value = fn()
        best = min(best, time.perf_counter() - started)
    return best, value


def section(title: str) -> None:
    print(f"\n== {title} ==", flush=True)


def run_child(script: str, job: dict, limit_s: float | None, *, sandboxed: bool = True) -> dict:
    """``script --child JOB`` in a fresh interpreter; its last stdout line is the JSON result.

    ``sandboxed``: an empty directory with a private HOME and no SPICE_*/NGSPICE_* variables but the
    library path, as the pool's workers run ngspice.
    """
    work = tempfile.mkdtemp(prefix="crosscheck-bench-")
    env = dict(os.environ)
    if sandboxed:
        env = {k: v for k, v in env.items() if not k.upper().startswith(("SPICE_", "NGSPICE_"))}
        if os.environ.get("NGSPICE_LIBRARY_PATH"):
            env["NGSPICE_LIBRARY_PATH"] = os.environ["NGSPICE_LIBRARY_PATH"]
        env["HOME"] = os.path.join(work, "home")
        os.makedirs(env["HOME"])
    root = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    env["PYTHONPATH"] = os.pathsep.join(p for p in (root, env.get("PYTHONPATH")) if p)
    try:
        done = subprocess.run(
            [sys.executable, str(Path(script).resolve()), "--child", json.dumps(job)],
            cwd=work,
            env=env,
            capture_output=True,
            text=True,
            timeout=limit_s,
        )
    except subprocess.TimeoutExpired:
        return {"stopped": f"> {limit_s:g} s (stopped at the limit)"}
    finally:
        shutil.rmtree(work, ignore_errors=True)
    if done.returncode != 0:
        tail = " | ".join(done.stderr.strip().splitlines()[-2:])
        return {"stopped": f"failed (exit {done.returncode}: {tail})"}
    return json.loads(done.stdout.strip().splitlines()[-1])


@dataclass(frozen=True)
class Finished:
    """A command that ran in a child process: wall seconds (inf when stopped), peak resident MiB, and why
    it did not finish cleanly ("" when it did)."""

    seconds: float
    peak_mib: float
    why: str = ""

    @property
    def ok(self) -> bool:
        return not self.why


def run_command(command: Sequence[str], limit_s: float | None) -> Finished:
    """``command`` in a child process, its output discarded; stopped at ``limit_s`` seconds.

    The peak memory is the child's own ``ru_maxrss`` from ``wait4`` (its whole tree's largest process),
    read without a shell and without sharing this process's accounting with earlier children.
    """
    with tempfile.TemporaryFile() as errors:  # a file, not a pipe: a chatty child never blocks on it
        started = time.perf_counter()
        child = subprocess.Popen(command, stdout=subprocess.DEVNULL, stderr=errors)
        while True:
            pid, status, usage = os.wait4(child.pid, os.WNOHANG)
            if pid:
                break
            if limit_s is not None and time.perf_counter() - started > limit_s:
                child.kill()
                os.wait4(child.pid, 0)
                child.returncode = -9  # reaped here: Popen must not wait for it again
                return Finished(math.inf, math.nan, f"> {limit_s:g} s")
            time.sleep(0.005)
        seconds = time.perf_counter() - started
        child.returncode = os.waitstatus_to_exitcode(status)
        errors.seek(0)
        tail = " | ".join(errors.read().decode(errors="replace").strip().splitlines()[-1:])
    peak = usage.ru_maxrss / 1024.0
    return Finished(seconds, peak, f"exit {child.returncode}: {tail}" if child.returncode else "")
