"""The MNA solver's equivalents against exact rational arithmetic (tests/exact_mna.py).

Random well-posed networks with every element kind (R L C V I E F G H K), grounded
and floating ports, at DC and at positive frequencies. At each point the error is
normwise: for a quantity q, |q − q_exact| / max(|q_exact|, floor), where the floor
is ‖x‖∞ of the exact solution of the same solve (V_th: the open-circuit solve;
Z_th: the 1 A test solve; I_N of a Norton-only port: the shorted solve),
propagated to I_N = V_th/Z_th and Y_N = 1/Z_th by first-order perturbation.
Points whose reported condition is at least ``COND_LIMIT`` are not compared;
exactly singular points must be refused, or flagged by that condition.
The worst error is printed (``-s``) and recorded as a JUnit property.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from exact_mna import ExactEquivalent, exact_thevenin
from hypothesis import example, given

from crosscheck.own.equivalent import Equivalent, thevenin
from crosscheck.errors import SingularNetworkError
from crosscheck.model.network import Network, Port, floating_reference, make_element
from crosscheck.own.solver import MnaSystem
from crosscheck.fuzz.strategies import frequencies, network_and_port

#: Points with a reported 1-norm condition at or above this are not compared.
COND_LIMIT = 1e8
#: Normwise relative agreement required below COND_LIMIT (the project's target; rounding errors seen are
#: ~1e-13 at worst, see the printed summary).
REL_TOL = 1e-10


@dataclass
class _Tally:
    worst: float = 0.0
    worst_case: str = ""
    compared: int = 0
    singular: int = 0
    ill_conditioned: int = 0
    near_zero: int = 0
    networks: int = 0
    kinds_compared: set[str] = field(default_factory=set)
    compared_on: set[str] = field(default_factory=set)


def _rel(q: complex, exact: complex, floor: float) -> float:
    den = max(abs(exact), floor)
    if den == 0.0:
        return 0.0 if q == exact else math.inf
    return abs(q - exact) / den


def _point_error(got: Equivalent, ex: ExactEquivalent, tally: _Tally) -> float:
    """The worst normwise relative error over the point's quantities; asserts that the forms that exist match.

    Where one side has Z_th = 0 (or Y_N = 0) the other must be zero within REL_TOL of its solve's scale: a
    double cannot tell such a value from zero, and the form it would divide into (I_N = V_th/Z_th, or
    V_th = I_N/Y_N) has no accuracy to judge. The solver keeping such a tiny value is counted (``near_zero``).
    """
    if got.vth is None:  # the solver found Y_N = 0: Norton only
        assert got.zth is None and got.yn == 0, f"Norton-only form with Y_N = {got.yn!r}"
        assert ex.yn is not None and abs(ex.yn) <= REL_TOL * ex.yn_scale, \
            f"solver says Y_N = 0, exact Y_N = {ex.yn} (scale {ex.yn_scale:.3g}): {got}"
        return _rel(got.in_, ex.in_, ex.in_scale)
    if ex.route == "short":  # exactly Y_N = 0, yet the solver gave a Thevenin form
        assert got.yn is not None and abs(got.yn) <= REL_TOL * ex.yn_scale, \
            f"exact Y_N = 0 (scale {ex.yn_scale:.3g}), solver Y_N = {got.yn}: {got}"
        tally.near_zero += 1
        return _rel(got.in_, ex.in_, ex.in_scale)
    assert got.zth is not None
    errors = [_rel(got.vth, ex.vth, ex.vth_scale), _rel(got.zth, ex.zth, ex.zth_scale)]
    if got.zth == 0:
        assert got.in_ is None and got.yn is None, f"Z_th = 0 with a Norton form: {got}"
    if ex.zth == 0 or got.zth == 0:  # the Z_th error above holds the other side to zero within REL_TOL
        tally.near_zero += got.zth != 0
        return max(errors)
    assert got.in_ is not None and got.yn is not None, f"exact Z_th = {ex.zth}, got {got}"
    z = abs(ex.zth)
    errors.append(_rel(got.in_, ex.in_, ex.vth_scale / z + abs(ex.vth) * ex.zth_scale / z**2))
    errors.append(_rel(got.yn, ex.yn, ex.zth_scale / z**2))
    return max(errors)


def _numeric_condition(network: Network, port: Port, f: float) -> float:
    """κ₁ of the open-port matrix in floating point, for a point the solver refused."""
    ties = [r] if (r := floating_reference(network, port)) is not None else []
    a = MnaSystem(network, ties).dense_matrices(np.array([f]))[0]
    return float(np.linalg.cond(a, p=1))


def _solve_each(network: Network, port: Port, freqs: list[float]) -> list[Equivalent | SingularNetworkError]:
    out: list[Equivalent | SingularNetworkError] = []
    for f in freqs:
        try:
            out.append(thevenin(network, port, [f])[0])
        except SingularNetworkError as err:
            out.append(err)
    return out


def _check_point(network: Network, port: Port, f: float, got: Equivalent | SingularNetworkError,
                 tally: _Tally) -> None:
    ex = exact_thevenin(network, port, f)
    if isinstance(got, SingularNetworkError):
        if ex.route == "singular":
            tally.singular += 1
            return
        cond = _numeric_condition(network, port, f)
        assert cond >= COND_LIMIT, f"refused a solvable network with condition {cond:.3g} at {f} Hz: {got}"
        tally.ill_conditioned += 1
        return
    if ex.route == "singular":
        assert got.condition >= COND_LIMIT, (
            f"exactly singular at {f} Hz, yet reported with condition {got.condition:.3g}: {got}")
        tally.singular += 1
        return
    if got.condition >= COND_LIMIT:
        tally.ill_conditioned += 1
        return
    err = _point_error(got, ex, tally)
    assert err <= REL_TOL, (f"normwise relative error {err:.3g} > {REL_TOL:g} at {f} Hz, condition "
                            f"{got.condition:.3g}\n  solver: {got}\n  exact:  {ex}")
    tally.compared += 1
    tally.kinds_compared |= {e.kind for e in network.elements}
    tally.compared_on |= {"dc" if f == 0 else "ac", "floating" if floating_reference(network, port) else "grounded",
                          f"route:{ex.route}" + (":zth=0" if ex.zth == 0 else "")}
    if err >= tally.worst:
        tally.worst = err
        tally.worst_case = f"{len(network.elements)} elements, {f:.6g} Hz, condition {got.condition:.3g}"


def _every_kind() -> tuple[Network, Port]:
    """All ten kinds in one grounded network, solvable at DC (no loop of V and L, every node on an R or L)."""
    el = make_element
    return Network("every kind", (
        el("v1", "V", ("n1", "0"), ac_mag=1.0, ac_phase_deg=30), el("r1", "R", ("n1", "n2"), 1e3),
        el("vs1", "V", ("n2", "n3")), el("l1", "L", ("n3", "0"), 10e-3), el("c1", "C", ("n2", "0"), 10e-9),
        el("i1", "I", ("0", "n4"), ac_mag=1e-3, ac_phase_deg=-45), el("r2", "R", ("n4", "0"), 2e3),
        el("e1", "E", ("n5", "0", "n2", "0"), 0.5), el("r3", "R", ("n5", "n6"), 1e3),
        el("f1", "F", ("0", "n6"), 0.3, control="vs1"), el("r4", "R", ("n6", "0"), 1.5e3),
        el("g1", "G", ("0", "n4", "n2", "0"), 0.5e-3), el("h1", "H", ("n7", "n4"), 300.0, control="vs1"),
        el("r5", "R", ("n7", "0"), 1e3), el("l2", "L", ("n6", "0"), 10e-3), el("k1", "K", (), 0.5, coupled=("l1", "l2")),
    )), Port("n7", "n6")


def _floating_secondary() -> tuple[Network, Port]:
    """A transformer secondary with no ground; at DC its winding shorts the port (Z_th = 0 exactly)."""
    el = make_element
    return Network("floating secondary", (
        el("v1", "V", ("p", "0"), ac_mag=1.0), el("r1", "R", ("p", "q"), 10.0), el("l1", "L", ("q", "0"), 1e-3),
        el("lt1", "L", ("t1", "t2"), 4e-3), el("rt1", "R", ("t1", "t2"), 1e3), el("kt1", "K", (), 0.5, coupled=("l1", "lt1")),
    )), Port("t1", "t2")


def test_solver_matches_exact_arithmetic(record_property) -> None:
    """V_th, Z_th, I_N, Y_N agree with exact rational arithmetic to REL_TOL (normwise) when condition < COND_LIMIT.

    Two fixed examples make sure every kind, a floating port, DC and an exact Z_th = 0 are compared in any
    run: hypothesis's derandomized choices depend on which modules are loaded, so coverage by the random
    examples alone differs between running this file and the whole suite.
    """
    tally = _Tally()

    @given(network_and_port(max_nodes=7), frequencies(dc=True), frequencies())
    @example(_every_kind(), 0.0, 1e4)
    @example(_floating_secondary(), 0.0, 1e3)
    def check(case: tuple[Network, Port], f1: float, f2: float) -> None:
        network, port = case
        freqs = [f1, f2]
        try:
            got: list = thevenin(network, port, freqs)
        except SingularNetworkError:
            got = _solve_each(network, port, freqs)
            assert any(isinstance(g, SingularNetworkError) for g in got), \
                "the sweep was refused although each of its frequencies solves alone"
        for f, g in zip(freqs, got):
            _check_point(network, port, f, g, tally)
        tally.networks += 1

    check()
    record_property("exact_worst_relative_error", tally.worst)
    record_property("exact_points_compared", tally.compared)
    record_property("exact_networks", tally.networks)
    record_property("exact_near_zero_kept", tally.near_zero)
    print(f"\nexact arithmetic: worst normwise relative error {tally.worst:.3g} ({tally.worst_case}) over "
          f"{tally.compared} points compared on {tally.networks} networks; {tally.singular} exactly singular "
          f"points refused or flagged, {tally.ill_conditioned} with condition >= {COND_LIMIT:g} not compared; "
          f"{tally.near_zero} exact zero Z_th or Y_N reported as a tiny nonzero value")
    # The run must have exercised what this test claims to cover, and the filters must not eat it.
    missing = set("RLCVIEFGHK") - tally.kinds_compared
    assert not missing, f"element kinds never in a compared network: {missing}"
    assert {"dc", "ac", "floating", "grounded", "route:open", "route:open:zth=0"} <= tally.compared_on, \
        f"cases never compared: {tally.compared_on}"
    assert tally.compared >= tally.networks // 2, f"only {tally.compared} points compared on {tally.networks} networks"
