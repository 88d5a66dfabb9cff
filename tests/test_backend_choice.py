"""The sparse back end chosen by fill: KLU's estimated cost of one factorization picks KLU or SuperLU."""

from __future__ import annotations

import pytest

from crosscheck.fuzz.large import build
from crosscheck.own import sparse_backends
from crosscheck.own.solver import MnaSystem

needs_klu = pytest.mark.skipif("klu" not in sparse_backends.available(), reason="no KLU library loads here")


@pytest.mark.parametrize(
    "flops, chosen",
    [
        (4.5e6, "klu"),  # a 1,000,000-node ladder
        (2.3e7, "klu"),  # a 10,000-node grid
        (1.0e9, "superlu"),  # a 100,000-node grid
        (3.6e10, "superlu"),  # a 1,000,000-node grid: 11 s against 54 s
    ],
)
def test_the_rule_on_the_measured_estimates(flops: float, chosen: str) -> None:
    """The rule gives the faster back end of the measurements in sparse_backends' docstring."""
    assert sparse_backends.choose_by_fill(flops) == chosen


def test_the_rule_has_closed_ends() -> None:
    """The band's lower end belongs to it; just below it KLU is chosen; it has no upper end."""
    low, high = sparse_backends.SUPERLU_FLOPS
    assert sparse_backends.choose_by_fill(low) == sparse_backends.choose_by_fill(1e15) == "superlu"
    assert sparse_backends.choose_by_fill(low * 0.999) == "klu" and high == float("inf")


def _analysis(family: str, nodes: int) -> sparse_backends.Analysis:
    system = MnaSystem(build(family, nodes)[0])
    return sparse_backends.analyse(system._pattern, sparse_backends.AUTO)


@needs_klu
def test_auto_follows_the_estimate_of_each_network(monkeypatch: pytest.MonkeyPatch) -> None:
    """With the band moved onto a 2,500-node grid's estimate, auto picks SuperLU there and KLU for a ladder
    of the same size (a few operations per unknown), then KLU for the grid once the band is moved past it."""
    grid = _analysis("grid", 2_500)
    assert grid.name == "klu"  # the real band starts far above a small grid
    estimate = grid.symbolic.estimated_flops  # type: ignore[attr-defined]
    ladder = sparse_backends.analyse(MnaSystem(build("ladder", 2_500)[0])._pattern, "klu")
    assert ladder.symbolic.estimated_flops < estimate / 10  # type: ignore[attr-defined]
    monkeypatch.setattr(sparse_backends, "SUPERLU_FLOPS", (estimate / 2, estimate * 2))
    assert _analysis("grid", 2_500).name == "superlu"
    assert _analysis("ladder", 2_500).name == "klu"
    monkeypatch.setattr(sparse_backends, "SUPERLU_FLOPS", (estimate * 2, estimate * 4))
    assert _analysis("grid", 2_500).name == "klu"


@needs_klu
def test_auto_is_the_default_and_the_solver_keeps_its_choice(monkeypatch: pytest.MonkeyPatch) -> None:
    """Unset, the default is auto; a system analysed once under auto is not analysed again per solve."""
    monkeypatch.delenv(sparse_backends.ENV_VAR, raising=False)
    assert sparse_backends.default_backend() == sparse_backends.AUTO
    network, port = build("grid", 400)
    system = MnaSystem(network)
    rhs = system.injection_vector(port.a, port.b)
    system.solve_many([1e3], rhs[:, None])
    first = system._analysis
    system.solve_many([2e3], rhs[:, None])
    assert system._analysis is first and first is not None


def test_auto_without_klu_is_superlu(monkeypatch: pytest.MonkeyPatch) -> None:
    """Where no KLU library loads, auto falls back to SuperLU (the default is then superlu itself)."""
    monkeypatch.setattr(sparse_backends, "available", lambda: ("superlu",))
    monkeypatch.delenv(sparse_backends.ENV_VAR, raising=False)
    assert sparse_backends.default_backend() == "superlu"
    assert _analysis("ladder", 200).name == "superlu"


def test_superlu_factors_on_one_blas_thread() -> None:
    """Inside SuperLU's factorization every loaded BLAS runs one thread (a busy machine made the default
    of one per core up to 16x slower); outside it the libraries' own setting is back."""
    from threadpoolctl import threadpool_info

    def blas_threads() -> list[int]:
        return [info["num_threads"] for info in threadpool_info() if info["user_api"] == "blas"]

    sparse_backends._blas_controller()  # loads SuperLU's module and with it its BLAS
    before = blas_threads()
    with sparse_backends._one_blas_thread():
        inside = blas_threads()
    assert inside and all(n == 1 for n in inside)
    assert blas_threads() == before
