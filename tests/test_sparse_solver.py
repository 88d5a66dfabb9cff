"""The sparse path of the MNA solver: back ends, symbolic reuse, condition estimate, singular points, assembly.

Networks come from the benchmark's four topology families (``crosscheck.fuzz.large.build``), at sizes just
above ``DENSE_LIMIT`` so that the sparse path runs while numpy's dense LU stays a cheap reference.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from crosscheck.own import sparse_backends
from crosscheck.own.refinement import backward_error
from crosscheck.fuzz.large import FAMILIES, build
from crosscheck.errors import SingularNetworkError
from crosscheck.fuzz.generate import Knobs, generate_case
from crosscheck.model.network import dc_view
from crosscheck.model.network import Element, floating_reference
from crosscheck.own.assembly import Stamps
from crosscheck.own.solver import DENSE_LIMIT, REFINE_ABOVE, SWEEP_CHUNK, THREADS_FROM, THREADS_VAR, MnaSystem, default_threads

EPS = float(np.finfo(float).eps)
SWEEP = tuple(100.0 * 10 ** (i / 3) for i in range(13))  # 100 Hz to 1 MHz, 3 per decade
BACKENDS = sparse_backends.available()


class OneByOne(Stamps):
    """The correct stamps, written one element at a time instead of by the numpy pass."""

    bulk = False


def _system(family: str, nodes: int, backend: str | None) -> tuple[MnaSystem, np.ndarray]:
    network, port = build(family, nodes)
    if network.excitation == "dc":  # the power grid: its sources carry DC values, which excite it
        network = dc_view(network)
    system = MnaSystem(network)
    system.sparse_backend = backend
    rhs = np.stack([system.source_vector(), system.injection_vector(port.a, port.b)], axis=1)
    return system, rhs


def _exact_condition(system: MnaSystem, freq_hz: float) -> float:
    dense = system.matrix(freq_hz).toarray()
    return float(np.linalg.norm(dense, 1) * np.linalg.norm(np.linalg.inv(dense), 1))


def test_klu_is_available_where_the_test_extra_installs_it():
    """`make test` installs a KLU library (Debian's libklu1, and kvxopt's copy through the test extra), so
    CI exercises both back ends, not only the fallback."""
    assert BACKENDS == ("klu", "superlu"), f"available sparse back ends: {BACKENDS}; install crosscheck[test]"


@pytest.mark.parametrize("backend", BACKENDS)
@pytest.mark.parametrize("family", FAMILIES)
def test_sparse_sweep_matches_dense_lu(family, backend):
    """Every back end's sweep agrees with numpy's dense LU within what the condition number allows."""
    system, rhs = _system(family, 120, backend)
    assert system.size > DENSE_LIMIT, "the sparse path must run"
    xs, conds = system.solve_many(SWEEP, rhs)
    for x, f, cond in zip(xs, SWEEP, conds):
        dense = np.linalg.solve(system.matrix(f).toarray(), rhs)
        err = np.abs(x - dense).max(axis=0) / np.abs(dense).max(axis=0)
        # Both solves are backward stable, so each is within ~κ·ε of the truth; 100·κ·ε covers both
        # (common practice: forward error <= condition x backward error).
        assert np.all(err <= 100 * cond * EPS), (family, f, err, cond)


@pytest.mark.parametrize("family", FAMILIES)
def test_back_ends_agree_with_each_other(family):
    """KLU and SuperLU give the same solutions and the same condition estimates along a sweep."""
    if len(BACKENDS) < 2:
        pytest.fail(f"only {BACKENDS} installed; install crosscheck[test] to compare KLU with SuperLU")
    (klu, rhs), (superlu, _) = _system(family, 120, "klu"), _system(family, 120, "superlu")
    x_klu, c_klu = klu.solve_many(SWEEP, rhs)
    x_slu, c_slu = superlu.solve_many(SWEEP, rhs)
    scale = np.abs(x_slu).max(axis=1, keepdims=True)
    assert np.all(np.abs(x_klu - x_slu) <= 100 * c_slu[:, None, None] * EPS * scale)  # as above: 100·κ·ε
    # The estimator's iterates depend only on solves that agree to ~κ·ε; allow 1 % (common practice).
    np.testing.assert_allclose(c_klu, c_slu, rtol=1e-2)


@pytest.mark.parametrize("backend", BACKENDS)
def test_condition_estimate_is_a_close_lower_bound(backend):
    """Higham's estimate never exceeds κ₁ and is close to it on circuit matrices, along whole sweeps."""
    ratios = []
    for family in FAMILIES:
        system, rhs = _system(family, 100, backend)
        _, conds = system.solve_many(SWEEP, rhs)
        ratios += [c / _exact_condition(system, f) for f, c in zip(SWEEP, conds)]
    ratios = np.array(ratios)
    # from memory: N. J. Higham, ACM TOMS 14(4), 1988: the estimate is a lower bound (each iterate is
    # ‖A⁻¹x‖₁ with ‖x‖₁ = 1), "usually" exact. The exact κ₁ here comes from a dense inverse with a relative
    # error up to κ·ε (κ reaches ~1e10 on the random family), hence the 1e-5 margin.
    assert ratios.max() <= 1 + 1e-5, ratios.max()
    # Measured worst 0.90 on these networks; factor 2 leaves room (from the measurement, not a theorem).
    assert ratios.min() >= 0.5, ratios.min()
    assert np.mean(ratios >= 1 - 1e-5) >= 0.5, "the estimate should be exact at most frequencies"


def test_a_sweep_analyses_the_pattern_once(monkeypatch):
    """The fill-reducing ordering is computed once per network, not once per frequency."""
    calls = []
    real = sparse_backends.analyse
    monkeypatch.setattr(sparse_backends, "analyse", lambda *a, **k: calls.append(a) or real(*a, **k))
    system, rhs = _system("grid", 150, None)
    system.solve_many(SWEEP, rhs)
    system.solve_many(SWEEP[:2], rhs)
    system.factorize(1e3)
    assert len(calls) == 1, f"{len(calls)} symbolic analyses for three calls on one network"


@pytest.mark.parametrize("backend", BACKENDS)
def test_skipping_the_estimate_changes_no_solution(backend):
    """estimate_condition=False reports NaN conditions and the same solutions (the estimate only reads)."""
    system, rhs = _system("ladder", 120, backend)
    with_estimate, conds = system.solve_many(SWEEP, rhs)
    without, none = system.solve_many(SWEEP, rhs, estimate_condition=False)
    assert np.all(np.isfinite(conds)) and np.all(np.isnan(none))
    # Same factorization, same right-hand sides; only the batching of solve columns differs: ~ε (common practice).
    np.testing.assert_allclose(without, with_estimate, rtol=1e-12, atol=0)


@pytest.mark.parametrize("backend", BACKENDS)
def test_solves_are_backward_stable(backend):
    """After refinement every column's normwise backward error is below REFINE_ABOVE (~32ε)."""
    system, rhs = _system("random", 300, backend)
    for f in SWEEP:
        a = system.matrix(f)
        x = system.factorize(f).solve(rhs)
        residual = np.abs(rhs - a @ x).max(axis=0)
        norm_a = abs(a).sum(axis=1).max()
        error = residual / (norm_a * np.abs(x).max(axis=0) + np.abs(rhs).max(axis=0))
        assert np.all(error <= REFINE_ABOVE), (f, error)


@pytest.mark.parametrize("backend", BACKENDS)
def test_singular_point_of_a_sparse_sweep_names_the_node(backend):
    """At DC a node reached only through capacitors makes the matrix singular; the error names that node."""
    network, port = build("ladder", 100)
    island = (Element("cx", "C", ("n50", "island"), 1e-9), Element("cy", "C", ("island", "0"), 1e-9))
    system = MnaSystem(network.with_elements(network.elements + island))
    system.sparse_backend = backend
    rhs = np.stack([system.source_vector(), system.injection_vector(port.a, port.b)], axis=1)
    with pytest.raises(SingularNetworkError, match="island"):
        system.solve_many([1e3, 0.0], rhs)
    xs, _ = system.solve_many([1e3], rhs)  # the same network away from DC is fine
    assert np.all(np.isfinite(xs))


def test_bulk_assembly_equals_element_by_element():
    """With no fault on, R, C, L and V are stamped by numpy in bulk; the matrix is the per-element one."""
    compared = 0
    for seed in range(150):
        case = generate_case(seed, Knobs(max_nodes=10))
        ties = [r] if (r := floating_reference(case.network, case.port)) is not None else []
        bulk = MnaSystem(case.network, ties)
        one_by_one = MnaSystem(case.network, ties, stamps=OneByOne())  # every element takes the loop
        assert bulk.size == one_by_one.size
        for f in (0.0, 1e3):
            a, b = bulk.matrix(f), one_by_one.matrix(f)
            # The same few terms summed in another order: a few ulps (common practice).
            assert abs(a - b).max() <= 4 * EPS * abs(b).max(), (case.seed, f)
            compared += 1
    assert compared == 300


def test_unknown_back_end_is_refused_with_the_choices(monkeypatch):
    """A misspelt CROSSCHECK_SPARSE names the choices instead of silently falling back."""
    monkeypatch.setenv(sparse_backends.ENV_VAR, "mumps")
    with pytest.raises(ValueError, match="klu, superlu"):
        sparse_backends.default_backend()
    monkeypatch.setenv(sparse_backends.ENV_VAR, "superlu")
    assert sparse_backends.default_backend() == "superlu"


def test_twenty_thousand_node_ladder_solves_on_the_sparse_path():
    """A 30,000-unknown ladder solves (a dense step anywhere would need 14 GB for the matrix alone)."""
    system, rhs = _system("ladder", 20_000, None)
    xs, conds = system.solve_many([1e3], rhs)
    assert xs.shape == (1, system.size, 2) and math.isfinite(conds[0])
    assert np.all(np.isfinite(xs))


def _tank_system(backend: str) -> tuple[MnaSystem, np.ndarray]:
    """A source behind 1 GΩ feeding a parallel 1 µF ‖ 1 mH tank, padded onto the sparse path by a ladder."""
    network, _ = build("ladder", 100)
    tank = (Element("vt", "V", ("t1", "0"), 0.0, ac_mag=1.0), Element("rt", "R", ("t1", "t2"), 1e9),
            Element("ct", "C", ("t2", "0"), 1e-6), Element("lt", "L", ("t2", "0"), 1e-3))
    system = MnaSystem(network.with_elements(network.elements + tank))
    system.sparse_backend = backend
    return system, np.stack([system.source_vector(), system.injection_vector("t2", "0")], axis=1)


def test_a_sweep_keeps_the_pivot_order_while_it_stays_accurate(monkeypatch):
    """With KLU, frequencies after the first refactor on the pivot order before (no pivot search).
    Checked on the Python loop, where each factorization can be watched; the compiled loop is checked
    against it in test_sweep_kernel.py."""
    if "klu" not in BACKENDS:
        pytest.fail("KLU is not available; install Debian's libklu1 or crosscheck[test]")
    fresh = _spy_on_klu_factor(monkeypatch)
    system, rhs = _system("ladder", 120, "klu")
    system.compiled_sweep = False
    system.solve_many(SWEEP, rhs)
    assert len(fresh) == len(SWEEP)
    assert fresh[0] and fresh.count(True) < len(SWEEP) / 2, f"{fresh.count(True)} full factorizations of {len(SWEEP)}"


def _spy_on_klu_factor(monkeypatch) -> list[bool]:
    """Record, for each KLU factorization, whether it searched pivots afresh (True) or reused an order."""
    fresh: list[bool] = []
    analysis_type = type(sparse_backends.analyse(MnaSystem(build("ladder", 60)[0])._pattern, "klu"))
    real = analysis_type.factor
    monkeypatch.setattr(analysis_type, "factor",
                        lambda self, v, reuse=None: fresh.append(reuse is None) or real(self, v, reuse))
    return fresh


@pytest.mark.parametrize("compiled", [True, False], ids=["compiled-loop", "python-loop"])
def test_a_pivot_order_that_goes_bad_is_replaced(monkeypatch, compiled):
    """At 1 MHz the tank node's diagonal (jωC = 6.3 S) is a fine pivot; at 1 mHz it is 6.3e-9 S against an
    inductor branch entry of 1, and reusing that pivot grows the factors by ~1e8 (backward error 2e-9 was
    measured). The backward-error check must notice and pivot afresh; the answer keeps full accuracy."""
    if "klu" not in BACKENDS:
        pytest.fail("KLU is not available; install Debian's libklu1 or crosscheck[test]")
    # rt = 1 GΩ keeps the tank node's row dominated by the capacitor at 1 MHz, so that pivot is chosen there.
    system, rhs = _tank_system("klu")
    system.compiled_sweep = compiled  # compiled: the kernel refactors 1 mHz, sees the error and hands it back
    fresh = _spy_on_klu_factor(monkeypatch)
    sweep = [1e6, 1e-3]
    xs, conds = system.solve_many(sweep, rhs)
    assert fresh == [True, False, True], f"factorizations (True: pivots searched afresh): {fresh}"
    for x, f, cond in zip(xs, sweep, conds):
        dense = np.linalg.solve(system.matrix(f).toarray(), rhs)
        err = np.abs(x - dense).max(axis=0) / np.abs(dense).max(axis=0)
        assert np.all(err <= 100 * cond * EPS), (f, err, cond)  # as above: 100·κ·ε (common practice)


def test_klu_binding_solves_factors_and_estimates_like_dense_lapack():
    """The ctypes binding (crosscheck.klu_library) against numpy on one matrix: solve, adjoint solve,
    refactorization on new values, and a singular matrix refused."""
    from crosscheck.own import klu_library

    library = klu_library.load()
    if library is None:
        pytest.fail("no KLU library loads; install Debian's libklu1 or crosscheck[test]")
    system, rhs = _system("random", 120, "klu")
    a = system.matrix(1e4)
    symbolic = klu_library.Symbolic(library, a.indptr, a.indices)
    numeric = symbolic.factor(a.data)
    dense = a.toarray()
    cond = float(np.linalg.cond(dense, 1))
    for adjoint, m in ((False, dense), (True, dense.conj().T)):
        x = numeric.solve(rhs, adjoint=adjoint)
        exact = np.linalg.solve(m, rhs)
        assert np.abs(x - exact).max() <= 100 * cond * EPS * np.abs(exact).max()  # 100·κ·ε (common practice)
    b = system.matrix(1e2)
    numeric.refactor(b.data)
    exact = np.linalg.solve(b.toarray(), rhs)
    cond_b = float(np.linalg.cond(b.toarray(), 1))
    assert np.abs(numeric.solve(rhs) - exact).max() <= 1e4 * cond_b * EPS * np.abs(exact).max()  # no pivot search: looser
    singular = sp_csc([[1.0, 1.0], [1.0, 1.0]])
    with pytest.raises(klu_library.KluError, match="singular") as caught:
        klu_library.Symbolic(library, singular.indptr, singular.indices).factor(singular.data)
    assert caught.value.singular


def sp_csc(rows):
    import scipy.sparse as sp

    m = sp.csc_matrix(np.array(rows, dtype=complex))
    m.sort_indices()
    return m


def test_every_klu_library_found_is_usable_or_skipped_by_name():
    """Debian's libklu1 and kvxopt's copy differ in release; each that loads must read KLU's defaults back
    (its struct layout recognised), and a library whose layout is not recognised is not used."""
    from crosscheck.own import klu_library

    loaded = []
    for path in klu_library.library_paths():
        try:
            loaded.append(klu_library.KluLibrary(path))
        except OSError as exc:
            assert "cannot open" in str(exc) or "No such file" in str(exc), exc  # absent, not misread
    assert loaded, "no KLU library loads; install Debian's libklu1 or crosscheck[test]"
    for library in loaded:
        common = library.new_common()
        # KLU's defaults read back, except the row scaling crosscheck turns off (see KluLibrary.new_common).
        assert (common.tol, common.btf, common.scale, common.halt_if_singular) == (0.001, 1, 0, 1), library.path


def test_a_klu_library_of_unknown_layout_is_not_used(monkeypatch):
    """When no layout reads the defaults back, the library is refused and SuperLU is the only back end."""
    from crosscheck.own import klu_library

    monkeypatch.setattr(klu_library, "_reads_defaults", lambda common: False)
    klu_library.load.cache_clear()
    try:
        assert klu_library.load() is None
        assert sparse_backends.available() == ("superlu",)
        with pytest.raises(ValueError, match="libklu1"):
            sparse_backends.analyse(MnaSystem(build("ladder", 60)[0])._pattern, "klu")
    finally:
        monkeypatch.undo()
        klu_library.load.cache_clear()


def test_a_threaded_sweep_gives_the_same_numbers_as_one_thread(monkeypatch):
    """Runs of SWEEP_CHUNK frequencies are fixed, not per core: threads change the speed, not one bit."""
    system, rhs = _system("ladder", 3000, None)
    assert system.size >= THREADS_FROM
    sweep = tuple(100.0 * 10 ** (i / 6) for i in range(2 * SWEEP_CHUNK + 3))  # three runs
    system.sweep_threads = 1
    one, one_conds = system.solve_many(sweep, rhs)
    system.sweep_threads = 3
    three, three_conds = system.solve_many(sweep, rhs)
    assert np.array_equal(one, three) and np.array_equal(one_conds, three_conds)
    monkeypatch.setenv(THREADS_VAR, "two")
    system.sweep_threads = None
    with pytest.raises(ValueError, match="whole number"):
        system.solve_many(sweep, rhs)
    monkeypatch.setenv(THREADS_VAR, "1")
    assert default_threads() == 1


def test_a_klu_failure_that_is_not_a_zero_pivot_says_what_it_is():
    """KLU's statuses other than 'singular' (out of memory, too large) are not reported as a singular network."""
    from crosscheck.own import klu_library

    library = klu_library.load()
    if library is None:
        pytest.fail("no KLU library loads; install Debian's libklu1 or crosscheck[test]")
    common = library.new_common()
    for status, words in ((-2, "out of memory"), (-4, "too large")):
        common.status = status
        error = klu_library._error("klu_z_factor", common)
        assert not error.singular and words in str(error) and "CROSSCHECK_SPARSE=superlu" in str(error)
    common.status = 1
    assert klu_library._error("klu_z_factor", common).singular


def test_backward_error_with_a_subnormal_scale_is_finite_and_silent():
    """Found by the full Hypothesis profile: a current source's phase of 1e-308 degrees gives a right-hand side
    of ~1e-313 j. Its scale is subnormal, whose reciprocal overflows; the backward error must divide by it (no
    warning, which the tests raise as errors) and come out finite."""
    import scipy.sparse as sp


    a = sp.csc_matrix(np.diag([0.005, 0.005]).astype(complex))
    b = np.array([[0.0, -1.0], [1.94174325e-313j, 0.0]])
    x = np.array([[0.0, -200.0], [1.94174325e-310j, 0.0]])
    residual, error = backward_error(a, 0.005, b, x)
    scale = 0.005 * np.abs(x).max(axis=0) + np.abs(b).max(axis=0)
    assert np.isfinite(error) and error == max(np.abs(residual[:, c]).max() / scale[c] for c in range(2)), error
