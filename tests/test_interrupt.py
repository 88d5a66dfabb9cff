"""Interrupts and dead parents: queued ngspice cases are cancelled at once, and no worker outlives its parent.

Faults come through the pool's ``solve`` seam (``misbehaving_solve``): a network titled
``crosscheck-test-fault:hang`` makes its worker sleep forever instead of running ngspice.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest

from crosscheck.errors import ReferenceEngineError
from crosscheck.spice.workers import SpicePool
from misbehaving_solve import MISBEHAVING
from test_workers import divider, fault

TESTS = Path(__file__).resolve().parent
REPO = TESTS.parent


def _gone(pid: int) -> bool:
    """True when ``pid`` has exited (a zombie waiting for init to reap it counts as exited)."""
    try:
        with open(f"/proc/{pid}/stat") as fh:
            return fh.read().rsplit(")", 1)[1].split()[0] == "Z"
    except FileNotFoundError:
        return True


def _wait_until(condition, seconds: float) -> float | None:
    """Seconds until ``condition()`` held, or None if it did not within ``seconds``."""
    start = time.monotonic()
    while time.monotonic() - start < seconds:
        if condition():
            return time.monotonic() - start
        time.sleep(0.02)
    return None


def _busy_pool(workers: int = 1) -> tuple[SpicePool, list, list]:
    """A pool whose workers each run a hanging case, with five more cases queued behind them."""
    pool = SpicePool(workers=workers, timeout_s=600.0, solve=MISBEHAVING)
    running = [pool.submit(*fault("hang"), [1e3]) for _ in range(workers)]
    queued = [pool.submit(*divider(500.0 + i), [1e3]) for i in range(5)]
    assert _wait_until(lambda: len(pool._live) == workers and all(f.running() for f in running), 60.0) is not None
    return pool, running, queued


@pytest.mark.spice
def test_cancel_drops_queued_cases_and_stops_running_workers():
    """close(cancel=True) returns within 2 s: queued futures are cancelled, the hung one is an interrupt error,
    and no worker process is left."""
    pool, running, queued = _busy_pool(workers=2)
    processes = [w.process for w in pool._live]
    start = time.monotonic()
    pool.close(cancel=True)
    assert time.monotonic() - start < 2.0
    assert all(f.cancelled() for f in queued)
    for f in running:
        with pytest.raises(ReferenceEngineError, match="interrupted"):
            f.result(timeout=0)
    assert all(p.poll() is not None for p in processes) and not pool._live
    assert (pool.finished, pool.cancelled) == (0, 7)


@pytest.mark.spice
def test_leaving_the_pool_by_an_exception_cancels_it():
    """A KeyboardInterrupt inside ``with SpicePool`` leaves within 2 s and starts no new worker."""
    started = []
    with pytest.raises(KeyboardInterrupt):
        with SpicePool(workers=1, timeout_s=600.0, solve=MISBEHAVING) as pool:
            hung = pool.submit(*fault("hang"), [1e3])
            queued = [pool.submit(*divider(500.0), [1e3]) for _ in range(3)]
            assert _wait_until(hung.running, 60.0) is not None
            original = pool._worker_process
            pool._worker_process = lambda w, up: (started.append(up), original(w, up))  # type: ignore[method-assign]
            start = time.monotonic()
            raise KeyboardInterrupt
    assert time.monotonic() - start < 2.0
    assert all(f.cancelled() for f in queued) and True not in started


_PARENT = textwrap.dedent(
    """
    import sys, time
    sys.path.insert(0, {tests!r})
    from crosscheck.spice.workers import SpicePool
    from misbehaving_solve import MISBEHAVING
    from test_workers import divider, fault
    pool = SpicePool(workers=1, timeout_s=600.0, solve=MISBEHAVING)
    pool.submit(*divider(500.0), [1e3]).result(timeout=60)  # the worker is up and waiting for a case
    future = pool.submit(*fault("hang"), [1e3])
    while not future.running():
        time.sleep(0.02)
    time.sleep(0.3)  # the case is sent as it starts running: the worker is inside it
    worker = next(iter(pool._live))
    print(worker.process.pid, worker.directory, flush=True)
    time.sleep(600)
    """
)


@pytest.mark.spice
def test_a_worker_dies_with_its_parent_and_removes_its_directory():
    """After its parent is killed with SIGKILL, a worker stuck in a case is gone within 2 s, its directory too."""
    parent = subprocess.Popen(
        [sys.executable, "-c", _PARENT.format(tests=str(TESTS))], cwd=REPO, stdout=subprocess.PIPE, text=True
    )
    try:
        pid_text, directory = parent.stdout.readline().split()
        pid = int(pid_text)
        assert os.path.isdir(directory) and not _gone(pid)
    finally:
        parent.kill()
        parent.wait()
        parent.stdout.close()
    took = _wait_until(lambda: _gone(pid) and not os.path.exists(directory), 2.0)
    if took is None:
        os.kill(pid, signal.SIGKILL)
    assert took is not None, f"worker {pid} alive: {not _gone(pid)}, directory left: {os.path.exists(directory)}"


_VERIFY = textwrap.dedent(
    """
    import functools, sys
    sys.path.insert(0, {tests!r})
    import crosscheck.run.batch as batch
    from crosscheck.cli import main
    from misbehaving_solve import MISBEHAVING
    batch.run_batch = functools.partial(batch.run_batch, solve=MISBEHAVING)
    sys.exit(main(["verify", {folder!r}, "--workers", "2"]))
    """
)


def _hanging_cases(folder: Path, count: int) -> None:
    for i in range(count):
        (folder / f"hang{i:02d}.cir").write_text(
            "crosscheck-test-fault:hang\nV1 s 0 AC 10\nR1 s a 1k\nR2 a 0 500\n.end\n"
        )
        (folder / f"hang{i:02d}.toml").write_text(
            f'title = "hanging case {i}"\nnetlist = "hang{i:02d}.cir"\nport = ["a", "0"]\nfrequencies = ["1k"]\n'
        )


def _descendants(pid: int) -> list[int]:
    """Every live process whose parent chain leads to ``pid`` (from /proc)."""
    parents = {}
    for entry in os.listdir("/proc"):
        if entry.isdigit():
            try:
                with open(f"/proc/{entry}/stat") as fh:
                    parents[int(entry)] = int(fh.read().rsplit(")", 1)[1].split()[1])
            except (FileNotFoundError, ProcessLookupError, IndexError):
                pass
    found, frontier = [], [pid]
    while frontier:
        children = [p for p, pp in parents.items() if pp in frontier]
        found += children
        frontier = children
    return found


def _interrupt(script: str, settle_s: float) -> tuple[int, float, str, list[int]]:
    """Run ``script``, wait until its two workers are up and ``settle_s`` more, send SIGINT; return the exit
    code, the seconds from the signal to the exit, standard error, and the worker pids seen before it."""
    run = subprocess.Popen([sys.executable, "-c", script], cwd=REPO, stderr=subprocess.PIPE, text=True)
    try:
        took = _wait_until(lambda: len([p for p in _descendants(run.pid) if not _gone(p)]) >= 2, 60.0)
        assert took is not None, "the two workers never started"
        time.sleep(settle_s)
        workers = _descendants(run.pid)
        start = time.monotonic()
        run.send_signal(signal.SIGINT)
        code = run.wait(timeout=30)
        elapsed = time.monotonic() - start
    finally:
        if run.poll() is None:
            run.kill()
    assert run.stderr is not None
    stderr = run.stderr.read()
    run.stderr.close()
    return code, elapsed, stderr, workers


@pytest.mark.spice
def test_ctrl_c_stops_a_verify_run_within_two_seconds(tmp_path):
    """SIGINT to ``crosscheck verify`` over 20 hanging cases exits with 130 within 2 s, with no worker left."""
    _hanging_cases(tmp_path, 20)
    # 0.5 s: both workers inside their hanging case.
    code, elapsed, stderr, workers = _interrupt(_VERIFY.format(tests=str(TESTS), folder=str(tmp_path)), 0.5)
    assert code == 130, stderr
    assert elapsed < 2.0, elapsed
    assert "interrupted" in stderr and "cancelled" in stderr, stderr
    assert _wait_until(lambda: all(_gone(p) for p in workers), 1.0) is not None, workers


@pytest.mark.spice
def test_ctrl_c_keeps_the_cases_that_finished(tmp_path):
    """After SIGINT, the cases that finished before it are written to --output and counted as kept."""
    for i in range(2):
        (tmp_path / f"a_good{i}.cir").write_text("good\nV1 s 0 AC 10\nR1 s a 1k\nR2 a 0 500\n.end\n")
        (tmp_path / f"a_good{i}.toml").write_text(
            f'netlist = "a_good{i}.cir"\nport = ["a", "0"]\nfrequencies = ["1k"]\n'
        )
    _hanging_cases(tmp_path, 4)
    report = tmp_path / "out" / "r.json"
    script = _VERIFY.format(tests=str(TESTS), folder=str(tmp_path)).replace(
        '"--workers", "2"]', f'"--workers", "2", "--output", {str(report)!r}]'
    )
    # 4 s: the good cases are done (milliseconds each, with room for a loaded machine); the workers hang.
    code, _, stderr, _ = _interrupt(script, 4.0)
    assert code == 130, stderr
    assert "2 case(s) finished and were kept" in stderr, stderr
    import json

    kept = json.loads(report.read_text())
    assert [c["verdict"] for c in kept["cases"]] == ["pass", "pass"]
