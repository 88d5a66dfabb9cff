"""The compiled sweep loop (crosscheck/own/_sweep_kernel.c) against the Python loop it stands in for.

The Python loop in ``MnaSystem._sweep`` is the reference: with the same KLU factorizations the compiled
loop must give the same solutions bit for bit, the same condition estimates to rounding, and hand back
every frequency it cannot finish in the usual way, so that errors read as they do without it.
"""

from __future__ import annotations

import shutil

import numpy as np
import pytest

from crosscheck.own import sparse_backends, sweep_kernel
from crosscheck.fuzz.large import FAMILIES, build
from crosscheck.errors import SingularNetworkError
from crosscheck.model.network import Element
from crosscheck.own.solver import MnaSystem

SWEEP = tuple(100.0 * 10 ** (i / 4) for i in range(21))  # 100 Hz to 10 MHz, 4 per decade


def _compiler() -> str | None:
    return shutil.which("cc") or shutil.which("gcc")


def _kernel_or_fail():
    """Fails when the loop should be there and is not; skips (visibly) only where no C compiler exists, as
    pip then builds no kernel by design (`make test` installs gcc when run as root, so CI never skips)."""
    if "klu" not in sparse_backends.available():
        pytest.fail("KLU is not available; install Debian's libklu1 or crosscheck[test]")
    if sweep_kernel.load() is None:
        if not _compiler():
            pytest.skip("no C compiler: the compiled sweep loop is not built and the Python loop runs alone "
                        "(apt-get install gcc libc6-dev, then pip install -e . again, to test it)")
        pytest.fail("the compiled sweep loop is not built although a C compiler is installed; run "
                    "`pip install -v -e .` again (it builds crosscheck/own/_sweep_kernel.c; the log says what failed, "
                    "often missing C headers: apt-get install libc6-dev)")


def _both_loops(system: MnaSystem, rhs: np.ndarray, sweep) -> tuple[tuple, tuple]:
    system.compiled_sweep = False
    python = system.solve_many(sweep, rhs)
    system.compiled_sweep = True
    return python, system.solve_many(sweep, rhs)


def _ported(network, port) -> tuple[MnaSystem, np.ndarray]:
    system = MnaSystem(network)
    system.sparse_backend = "klu"
    return system, np.stack([system.source_vector(), system.injection_vector(port.a, port.b)], axis=1)


def test_the_kernel_is_built_where_there_is_a_c_compiler():
    """pip builds the optional extension when a compiler is there (`make test` installs gcc as root)."""
    _kernel_or_fail()
    assert sweep_kernel.load() is not None


@pytest.mark.parametrize("nodes", [120, 1000])
@pytest.mark.parametrize("family", FAMILIES)
def test_compiled_and_python_loops_give_the_same_numbers(family, nodes):
    """Same matrices, same KLU calls: the solutions are identical; the estimates differ only in the order of
    sums (measured ≤ 3e-15 relative), and the estimator takes the same columns."""
    _kernel_or_fail()
    (x_py, c_py), (x_c, c_c) = _both_loops(*_ported(*build(family, nodes)), SWEEP)
    assert np.array_equal(x_py, x_c), np.abs(x_py - x_c).max()
    np.testing.assert_allclose(c_c, c_py, rtol=1e-12)


def test_without_the_estimate_the_loops_agree_too():
    """estimate_condition=False: the kernel solves the right-hand sides alone and leaves the conditions NaN."""
    _kernel_or_fail()
    system, rhs = _ported(*build("grid", 300))
    system.compiled_sweep = False
    x_py, c_py = system.solve_many(SWEEP, rhs, estimate_condition=False)
    system.compiled_sweep = True
    x_c, c_c = system.solve_many(SWEEP, rhs, estimate_condition=False)
    assert np.array_equal(x_py, x_c) and np.isnan(c_c).all() and np.isnan(c_py).all()


def test_the_kernel_hands_back_a_frequency_whose_pivot_order_went_bad():
    """At 1 mHz the pivot order kept from 1 MHz grows the factors by ~1e8 (see test_sparse_solver's tank):
    the kernel's backward-error check stops there, and the Python loop pivots afresh. Same numbers."""
    _kernel_or_fail()
    network, _ = build("ladder", 100)
    tank = (Element("vt", "V", ("t1", "0"), 0.0, ac_mag=1.0), Element("rt", "R", ("t1", "t2"), 1e9),
            Element("ct", "C", ("t2", "0"), 1e-6), Element("lt", "L", ("t2", "0"), 1e-3))
    system = MnaSystem(network.with_elements(network.elements + tank))
    rhs = np.stack([system.source_vector(), system.injection_vector("t2", "0")], axis=1)
    sweep = [1e6, 3e5, 1e-3, 1e-2, 1e6]
    finished = []
    real = sweep_kernel.Run.advance

    def watched(self, numeric, freqs, *rest):
        done, peak = real(self, numeric, freqs, *rest)
        finished.append((len(freqs), done))
        return done, peak

    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(sweep_kernel.Run, "advance", watched)
        (x_py, c_py), (x_c, c_c) = _both_loops(system, rhs, sweep)
    assert finished[0] == (4, 1), f"(frequencies offered, finished) per kernel call: {finished}"
    assert np.array_equal(x_py, x_c)
    np.testing.assert_allclose(c_c, c_py, rtol=1e-12)


def test_a_singular_frequency_reads_the_same_with_the_kernel():
    """At DC a capacitor-only island makes the matrix singular: KLU refuses the refactorization inside the
    kernel, which hands the frequency back, and the error names the node as the Python loop's does."""
    _kernel_or_fail()
    network, port = build("ladder", 100)
    island = (Element("cx", "C", ("n50", "island"), 1e-9), Element("cy", "C", ("island", "0"), 1e-9))
    system, rhs = _ported(network.with_elements(network.elements + island), port)
    messages = []
    for compiled in (False, True):
        system.compiled_sweep = compiled
        with pytest.raises(SingularNetworkError, match="island") as caught:
            system.solve_many([1e3, 1e4, 0.0], rhs)
        messages.append(str(caught.value))
    assert messages[0] == messages[1]


def test_the_kernel_leaves_the_floating_point_mode_as_it_found_it():
    """The kernel flushes subnormals to zero in its own loops; numpy's arithmetic afterwards must not."""
    _kernel_or_fail()
    system, rhs = _ported(*build("ladder", 300))
    system.solve_many(SWEEP, rhs)
    smallest = np.array([5e-324, 1e-310])
    assert np.all(smallest * 1.0 == smallest) and np.all(smallest + smallest > 0)


def test_right_hand_sides_near_underflow_stay_on_the_python_loop(monkeypatch):
    """The kernel flushes subnormal numbers in its own arithmetic; a right-hand side of ~1e-300 (below
    solver.TINY_RHS) keeps the sweep on the Python loop, which handles it exactly."""
    _kernel_or_fail()
    system, rhs = _ported(*build("ladder", 300))
    called = []
    real = sweep_kernel.Run.advance
    monkeypatch.setattr(sweep_kernel.Run, "advance", lambda *a: called.append(1) or real(*a))
    system.solve_many(SWEEP, rhs)
    assert called, "a normal right-hand side uses the kernel"
    called.clear()
    xs, conds = system.solve_many(SWEEP, rhs * 1e-300)
    assert not called and np.all(np.isfinite(xs)) and np.all(np.isfinite(conds))


def test_without_the_kernel_the_python_loop_does_everything(monkeypatch):
    """No compiler at install time means no kernel: sweeps still run, on the Python loop alone."""
    system, rhs = _ported(*build("tree", 300))
    expected = system.solve_many(SWEEP, rhs)
    monkeypatch.setattr(sweep_kernel, "load", lambda: None)
    called = []
    monkeypatch.setattr(sweep_kernel.Run, "advance", lambda *a: called.append(a) or (0, None))
    xs, conds = system.solve_many(SWEEP, rhs)
    assert not called
    assert np.array_equal(xs, expected[0])
    np.testing.assert_allclose(conds, expected[1], rtol=1e-12)
