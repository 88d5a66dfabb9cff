"""Isolation of ngspice in worker processes: a crash or a hang costs one case, and nothing leaks in.

Faults are injected on purpose through the pool's ``solve`` seam: a pool built with
``solve=misbehaving_solve.MISBEHAVING`` runs this directory's misbehaving solver, which hangs, spins,
dies or hogs memory for the network titles in ``misbehaving_solve.TITLES``.
"""

from __future__ import annotations

import math
import os
import subprocess
import sys
import tempfile
import textwrap

import pytest

from crosscheck.errors import CrosscheckError, NetworkError, ReferenceEngineError
from crosscheck.model.budget import BudgetSettingError
from crosscheck.model.network import Network, Port, make_element as el
from crosscheck.spice.engine import SpiceResult
from crosscheck.spice.workers import SpicePool, _worker_environment
from misbehaving_solve import MISBEHAVING, TITLES

#: ngspice against an exact formula (a resistive divider): double-precision agreement.
EXACT = 1e-9


def divider(r2: float, title: str = "divider") -> tuple[Network, Port]:
    """10 V, 1 kΩ over r2: V_th = 10·r2 / (1000 + r2)."""
    net = Network(title, (
        el("V1", "V", ("s", "0"), ac_mag=10.0),
        el("R1", "R", ("s", "a"), 1000.0),
        el("R2", "R", ("a", "0"), r2),
    ))
    return net, Port("a", "0")


def assert_divider(result: SpiceResult, r2: float) -> None:
    want = 10.0 * r2 / (1000.0 + r2)
    got = result.points[0].vth
    assert got is not None and abs(got - want) <= EXACT * want, (got, want)


def fault(kind: str) -> tuple[Network, Port]:
    title = next(t for t, k in TITLES.items() if k == kind)
    return divider(500.0, title=title)


@pytest.mark.spice
def test_hung_case_is_an_error_and_the_next_case_runs():
    """A case that hangs is stopped at its wall-clock limit; the replaced worker runs the next case."""
    with SpicePool(workers=1, timeout_s=30.0, solve=MISBEHAVING) as pool:
        hung = pool.submit(*fault("hang"), [1e3], timeout_s=1.5)
        after = pool.submit(*divider(3000.0), [1e3])
        with pytest.raises(ReferenceEngineError, match="did not finish this case within 1.5 s"):
            hung.result(timeout=60)
        assert_divider(after.result(timeout=60), 3000.0)


@pytest.mark.spice
def test_killed_worker_is_an_error_for_its_case_only():
    """A worker that dies mid-case gives that case an error naming the signal; the following cases succeed."""
    with SpicePool(workers=1, solve=MISBEHAVING) as pool:
        before = pool.submit(*divider(100.0), [50.0])
        died = pool.submit(*fault("die"), [50.0])
        after = [pool.submit(*divider(r), [50.0]) for r in (200.0, 400.0)]
        assert_divider(before.result(timeout=60), 100.0)
        with pytest.raises(ReferenceEngineError, match="died while running this case.*SIGKILL"):
            died.result(timeout=60)
        for r, future in zip((200.0, 400.0), after):
            assert_divider(future.result(timeout=60), r)


@pytest.mark.spice
def test_cpu_limit_stops_a_spinning_case():
    """A case that burns CPU is ended by RLIMIT_CPU (SIGXCPU) before the wall clock; the next case runs."""
    with SpicePool(workers=1, timeout_s=60.0, cpu_s=1.0, solve=MISBEHAVING) as pool:
        spin = pool.submit(*fault("spin"), [1e3])
        after = pool.submit(*divider(1000.0), [1e3])
        with pytest.raises(ReferenceEngineError, match="SIGXCPU"):
            spin.result(timeout=60)
        assert_divider(after.result(timeout=60), 1000.0)


@pytest.mark.spice
def test_memory_limit_turns_a_hog_into_an_error():
    """An allocation past RLIMIT_AS is this case's ReferenceEngineError; the next case runs."""
    with SpicePool(workers=1, memory_bytes=1 << 30, solve=MISBEHAVING) as pool:
        hog = pool.submit(*fault("hog"), [1e3])
        after = pool.submit(*divider(250.0), [1e3])
        with pytest.raises(ReferenceEngineError, match="out of memory"):
            hog.result(timeout=60)
        assert_divider(after.result(timeout=60), 250.0)


@pytest.mark.spice
def test_fault_titles_do_nothing_in_a_default_pool():
    """The magic titles alone do not misbehave: a pool built without the misbehaving solver gives them to
    ngspice like any other network."""
    with SpicePool(workers=1, timeout_s=20.0) as pool:
        for kind in ("die", "hang"):
            assert_divider(pool.submit(*fault(kind), [1e3]).result(timeout=60), 500.0)


@pytest.mark.spice
def test_batch_keeps_order_and_isolates_failures():
    """map() yields each case's outcome in order; a dying and an invalid case are errors, the rest are answers."""
    bad = Network("floating part", (*divider(1.0)[0].elements, el("R9", "R", ("p", "q"), 1.0)))
    cases = [(*divider(r), [1e3]) for r in (100.0, 200.0)] + [(*fault("die"), [1e3]), (bad, Port("a", "0"), [1e3])]
    cases += [(*divider(r), [1e3]) for r in (300.0, 600.0, 900.0)]
    with SpicePool(workers=2, solve=MISBEHAVING) as pool:
        outcomes = list(pool.map(cases))
    assert [type(o).__name__ for o in outcomes] == (
        ["SpiceResult"] * 2 + ["ReferenceEngineError", "NetworkError"] + ["SpiceResult"] * 3)
    for r, outcome in zip((100.0, 200.0, None, None, 300.0, 600.0, 900.0), outcomes):
        if r is not None:
            assert_divider(outcome, r)
    assert all(isinstance(o, (SpiceResult, CrosscheckError)) for o in outcomes)
    assert isinstance(outcomes[3], NetworkError)


SPICEINIT = "* planted by a test: must never run\nshell touch {marker}\n"


@pytest.mark.spice
def test_spiceinit_in_cwd_or_home_is_not_executed(tmp_path, monkeypatch):
    """A .spiceinit in the caller's directory or HOME never runs: workers start in an empty directory and HOME."""
    cwd, home = tmp_path / "cwd", tmp_path / "home"
    cwd.mkdir()
    home.mkdir()
    cwd_marker, home_marker = tmp_path / "ran-from-cwd", tmp_path / "ran-from-home"
    (cwd / ".spiceinit").write_text(SPICEINIT.format(marker=cwd_marker))
    (home / ".spiceinit").write_text(SPICEINIT.format(marker=home_marker))
    monkeypatch.chdir(cwd)
    monkeypatch.setenv("HOME", str(home))
    with SpicePool(workers=1) as pool:
        assert_divider(pool.submit(*divider(100.0), [1e3]).result(timeout=60), 100.0)
    assert not cwd_marker.exists()
    assert not home_marker.exists()


@pytest.mark.spice
def test_planted_spiceinit_would_run_without_the_sandbox(tmp_path):
    """Control for the test above: ngspice started directly in that directory does execute the .spiceinit."""
    marker = tmp_path / "ran"
    (tmp_path / ".spiceinit").write_text(SPICEINIT.format(marker=marker))
    script = "from crosscheck.spice.engine import Engine; Engine()"
    subprocess.run([sys.executable, "-c", script], cwd=tmp_path, check=True, timeout=120,
                   env={**os.environ, "HOME": str(tmp_path)}, capture_output=True)
    assert marker.exists()


def test_worker_environment_drops_spice_variables(tmp_path, monkeypatch):
    """Workers get no SPICE_* / NGSPICE_* variable except the library path, and a private HOME."""
    monkeypatch.setenv("SPICE_SCRIPTS", "/tmp/evil")
    monkeypatch.setenv("SPICE_LIB_DIR", "/tmp/evil")
    monkeypatch.setenv("NGSPICE_INPUT_DIR", "/tmp/evil")
    monkeypatch.setenv("spice_asciirawfile", "1")
    env = _worker_environment(str(tmp_path), "libngspice.so.0")
    assert sorted(k for k in env if k.upper().startswith(("SPICE_", "NGSPICE_"))) == ["NGSPICE_LIBRARY_PATH"]
    assert env["NGSPICE_LIBRARY_PATH"] == "libngspice.so.0"
    assert env["HOME"] == str(tmp_path / "home") and not os.listdir(env["HOME"])
    assert "NGSPICE_LIBRARY_PATH" not in _worker_environment(str(tmp_path / "other"), None)


@pytest.mark.spice
def test_worker_runs_in_its_own_empty_directory(tmp_path):
    """The worker process's cwd is a fresh empty directory, not the caller's (checked from inside the worker)."""
    script = textwrap.dedent(f"""
        import os, sys
        from crosscheck.spice.sandbox import Settings
        from crosscheck.spice.workers import _Worker
        w = _Worker(lambda d: Settings(d, None, 1 << 30, 10.0, 10), 60.0)
        cwd = os.readlink(f"/proc/{{w.process.pid}}/cwd")
        env = open(f"/proc/{{w.process.pid}}/environ", "rb").read().split(b"\\0")
        print("CWD", cwd, sorted(os.listdir(cwd)))
        print("SPICEVARS", sorted(e.split(b"=")[0].decode() for e in env if e.upper().startswith((b"SPICE_", b"NGSPICE_"))))
        w.stop()
        print("GONE", not os.path.exists(cwd))
    """)
    out = subprocess.run([sys.executable, "-c", script], cwd=tmp_path, capture_output=True, text=True, timeout=120,
                         env={**os.environ, "SPICE_SCRIPTS": "/tmp/evil"})
    assert "CWD" in out.stdout, out.stderr
    cwd_line = next(line for line in out.stdout.splitlines() if line.startswith("CWD"))
    assert str(tmp_path) not in cwd_line and cwd_line.endswith("[]"), cwd_line
    assert "SPICEVARS []" in out.stdout, out.stdout
    assert "GONE True" in out.stdout, out.stdout


def test_closed_pool_refuses_new_cases():
    """Submitting to a closed pool is a programming error with a clear message."""
    pool = SpicePool(workers=1)
    pool.close()
    with pytest.raises(RuntimeError, match="closed"):
        pool.submit(*divider(1.0), [1.0])


def test_pool_arguments_are_checked():
    """workers must be at least 1, and timeout_s finite and above 0 (inf is refused, not read as no limit)."""
    with pytest.raises(ValueError, match="workers"):
        SpicePool(workers=0)
    for bad in (0, -1.0, math.inf, math.nan):
        with pytest.raises(BudgetSettingError, match="--timeout .* finite number of seconds above 0"):
            SpicePool(workers=1, timeout_s=bad)


@pytest.mark.spice
def test_worker_that_cannot_start_in_time_is_an_error_and_leaves_nothing(tmp_path, monkeypatch):
    """A worker not ready within start_timeout_s fails its case; its process and directory are gone."""
    monkeypatch.setattr(tempfile, "tempdir", str(tmp_path))
    with SpicePool(workers=1, start_timeout_s=0.001) as pool:
        with pytest.raises(ReferenceEngineError, match="did not start within"):
            pool.submit(*divider(10.0), [1.0]).result(timeout=60)
    assert list(tmp_path.iterdir()) == []
