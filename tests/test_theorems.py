"""Network theorems as properties of crosscheck's equivalents, on random well-posed networks.

Each test cites the theorem it checks and judges crosscheck's own answer
(``thevenin``); the full networks that the answer is compared with (loads, shorts,
two ports) are solved with ``MnaSystem`` directly. Points whose MNA condition estimate is
COND_LIMIT or more are filtered out (``assume``). Unless a test says otherwise a
check is normwise: |q − q_expected| ≤ REL_TOL · max(|q_expected|, floor), with the
floor the infinity norm of the solve that produced q (node voltages and branch
currents), because a backward-stable solve is accurate to that scale, not to
each component's own size. REL_TOL is far above the ~1e-14 seen against exact
arithmetic (test_exact.py) and far below any theorem violation.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np
from hypothesis import assume, given
from hypothesis import strategies as st

from crosscheck.own.equivalent import Equivalent, thevenin
from crosscheck.errors import SingularNetworkError
from crosscheck.model.network import Element, Network, Port, floating_reference, make_element
from crosscheck.own.solver import MnaSystem
from crosscheck.fuzz.strategies import CENTRES, frequencies, network_and_port, networks, ports

COND_LIMIT = 1e8
REL_TOL = 1e-9

PASSIVE = "RLCVIK"  # no dependent sources: reciprocal and passive once the sources are zeroed


# --------------------------------------------------------------------------- helpers


@dataclass(frozen=True)
class _Solved:
    """One factorization's solutions: column 0 the sources, column 1 a 1 A test current into a, out of b."""

    system: MnaSystem
    x: np.ndarray
    condition: float

    def v(self, col: int, a: str, b: str) -> complex:
        return complex(self.system.voltage(self.x[:, col], a) - self.system.voltage(self.x[:, col], b))

    def current(self, col: int, name: str) -> complex:
        return complex(self.x[self.system.branch_index[name], col])

    def scale(self, col: int) -> float:
        return float(np.max(np.abs(self.x[:, col]), initial=0.0))


def _solve(network: Network, port: Port, f: float) -> _Solved:
    """Solve the full network with MnaSystem directly; filter out singular or ill-conditioned points."""
    ties = [r] if (r := floating_reference(network, port)) is not None else []
    system = MnaSystem(network, ties)
    try:
        fac = system.factorize(f)
    except SingularNetworkError:
        assume(False)
    assume(fac.condition < COND_LIMIT)
    rhs = np.stack([system.source_vector(), system.injection_vector(port.a, port.b)], axis=1)
    return _Solved(system, fac.solve(rhs), fac.condition)


def _equivalent(network: Network, port: Port, f: float) -> Equivalent:
    try:
        eq = thevenin(network, port, [f])[0]
    except SingularNetworkError:
        assume(False)
    assume(eq.condition < COND_LIMIT)
    return eq


@dataclass(frozen=True)
class _Port:
    """crosscheck's equivalent at a port, with the normwise scales of the solves behind it."""

    eq: Equivalent
    vth_scale: float
    zth_scale: float

    @property
    def zth(self) -> complex:
        assume(self.eq.zth is not None)  # Norton only (Y_N = 0): no impedance to judge
        return self.eq.zth

    @property
    def vth(self) -> complex:
        assume(self.eq.vth is not None)
        return self.eq.vth


def _port(network: Network, port: Port, f: float) -> _Port:
    s = _solve(network, port, f)
    return _Port(_equivalent(network, port, f), s.scale(0), s.scale(1))


def _close(got: complex, want: complex, floor: float, what: str, tol: float = REL_TOL) -> None:
    den = max(abs(want), floor)
    assert abs(got - want) <= tol * den, (
        f"{what}: got {got:.12g}, expected {want:.12g}; |difference| {abs(got - want):.3g} > {tol:g} × {den:.3g}")


def _impedance(load: tuple[Element, ...], f: float) -> complex:
    """The series impedance of load elements at f."""
    w = 2 * math.pi * f
    z = 0j
    for e in load:
        z += {"R": lambda: e.value, "L": lambda: 1j * w * e.value, "C": lambda: 1 / (1j * w * e.value)}[e.kind]()
    return z


def _series_load(r: float, x: float, f: float, b: str) -> tuple[Element, ...]:
    """R in series with the L or C of reactance x at f, from the sense node to b."""
    w = 2 * math.pi * f
    elements = [make_element("rload", "R", ("xload", "xmid" if x else b), r)]
    if x > 0:
        elements.append(make_element("lload", "L", ("xmid", b), x / w))
    elif x < 0:
        elements.append(make_element("cload", "C", ("xmid", b), -1 / (w * x)))
    return tuple(elements)


def _loaded(network: Network, port: Port, load: tuple[Element, ...], f: float) -> tuple[complex, complex, float]:
    """Load voltage V(a) − V(b), load current a → load → b, and the solve's scale, from the full loaded network."""
    sense = make_element("vsense", "V", (port.a, "xload"))
    s = _solve(network.with_elements(network.elements + (sense,) + load), port, f)
    return s.v(0, port.a, port.b), s.current(0, "vsense"), s.scale(0)


def _sources(network: Network) -> list[Element]:
    return [e for e in network.elements if e.kind in "VI" and e.ac_mag > 0]


def _only(network: Network, keep: str) -> Network:
    """The network with every independent source but ``keep`` set to zero."""
    return network.with_elements(
        replace(e, ac_mag=0.0) if e.kind in "VI" and e.name != keep else e for e in network.elements)


# --------------------------------------------------------------------------- Thevenin / Norton


@given(network_and_port(max_nodes=7), frequencies(dc=True))
def test_norton_is_the_dual_of_thevenin(case: tuple[Network, Port], f: float) -> None:
    """Norton (1926): I_N is the short-circuit current of the full network, found here by solving the network
    with its port shorted, apart from the equivalent's own computation. Normwise (``_close``). (I_N = V_th/Z_th
    and Y_N = 1/Z_th are how crosscheck computes them, so they are not checked here against themselves;
    the load test below holds the Norton pair against the full network.)"""
    network, port = case
    eq = _equivalent(network, port, f)
    assume(eq.vth is not None and eq.zth not in (None, 0j))
    short = make_element("vshort", "V", (port.a, port.b))
    s = _solve(network.with_elements(network.elements + (short,)), port, f)
    # The short's current flows a → short → b: the current the network drives out of a.
    _close(eq.in_, s.current(0, "vshort"), s.scale(0), "I_N against the shorted network")


@given(network_and_port(max_nodes=7), frequencies(dc=True), st.data())
def test_equivalent_reproduces_any_load(case: tuple[Network, Port], f: float, data: st.DataObject) -> None:
    """Thévenin / Norton (D. H. Johnson, Proc. IEEE 91, 2003): any load sees the same voltage and current from the
    network as from its equivalent, V_L = V_th·Z_L/(Z_th + Z_L) (or I_N/(Y_N + Y_L)). Normwise, REL_TOL."""
    network, port = case
    eq = _equivalent(network, port, f)
    kinds = data.draw(st.sampled_from(["R", "RL", "RC", "L", "C"] if f > 0 else ["R", "RL"]), label="load kinds")
    load = []
    for i, kind in enumerate(kinds):
        value = CENTRES[kind] * 10 ** data.draw(st.floats(-1, 1), label=f"{kind} decade")
        load.append(make_element(f"{kind.lower()}load", kind, ("xload" if i == 0 else "xmid",
                                                               port.b if i == len(kinds) - 1 else "xmid"), value))
    zl = _impedance(tuple(load), f)
    v_load, i_load, scale = _loaded(network, port, tuple(load), f)
    if eq.vth is None:  # Norton only (Y_N = 0)
        v_eq = eq.in_ / (eq.yn + 1 / zl)
    else:
        v_eq = eq.vth * zl / (eq.zth + zl)
    _close(v_load, v_eq, scale, "load voltage")
    _close(i_load * zl, v_eq, scale, "load current × Z_L")
    if eq.in_ is not None and eq.yn is not None:  # the Norton pair, held against the full network as well
        _close(v_load, eq.in_ / (eq.yn + 1 / zl), scale, "load voltage from the Norton form")


# --------------------------------------------------------------------------- maximum power transfer


@given(network_and_port(max_nodes=7, kinds=PASSIVE), frequencies())
def test_conjugate_load_draws_maximum_power(case: tuple[Network, Port], f: float) -> None:
    """Maximum power transfer (Desoer, IEEE Trans. Circuit Theory CT-20, 1973): the conjugate load Z_th* draws
    |V_th|²/(8·R_th) with peak phasors, and no load on a grid around it draws more; a resistive load does best
    at R_L = |Z_th|. Relative tolerance REL_TOL·|Z_th|/R_th: R_th is the small real part of Z_th, and the
    conjugate load cancels X_th, so rounding at the scale of |Z_th| is magnified by |Z_th|/R_th (≤ 1000 here)."""
    network, port = case
    eq = _equivalent(network, port, f)
    assume(eq.vth is not None and eq.zth not in (None, 0j))
    assume(eq.zth.real >= 1e-3 * abs(eq.zth) and abs(eq.vth) > 1e-9)
    p_max = abs(eq.vth) ** 2 / (8 * eq.zth.real)
    tol = REL_TOL * abs(eq.zth) / eq.zth.real

    def power(r: float, x: float) -> float:
        _, i, _ = _loaded(network, port, _series_load(r, x, f, port.b), f)
        return 0.5 * abs(i) ** 2 * r

    p_conj = power(eq.zth.real, -eq.zth.imag)
    assert abs(p_conj - p_max) <= tol * p_max, f"conjugate load draws {p_conj:.12g} W, expected {p_max:.12g} W"
    z = abs(eq.zth)
    for r_factor in (0.5, 0.8, 1.25, 2.0):
        for dx in (-0.3, 0.0, 0.3):
            p = power(eq.zth.real * r_factor, -eq.zth.imag + dx * z)
            assert p <= p_max * (1 + tol), f"load R×{r_factor}, X{dx:+}|Z_th| draws {p:.12g} W > {p_max:.12g} W"
    for dx in (-0.3, 0.3):
        p = power(eq.zth.real, -eq.zth.imag + dx * z)
        assert p <= p_max * (1 + tol), f"load X{dx:+}|Z_th| draws {p:.12g} W > {p_max:.12g} W"
    p_best_r = power(z, 0.0)
    for r_factor in (0.8, 1.25):
        assert power(z * r_factor, 0.0) <= p_best_r * (1 + REL_TOL), f"resistive load {r_factor}·|Z_th| beats |Z_th|"


# --------------------------------------------------------------------------- superposition


@given(network_and_port(max_nodes=7, min_sources=2, kinds="RLCVIEFGHK"), frequencies(dc=True),
       st.complex_numbers(min_magnitude=0.1, max_magnitude=10, allow_nan=False, allow_infinity=False))
def test_superposition(case: tuple[Network, Port], f: float, c: complex) -> None:
    """Superposition (Desoer & Kuh, Basic Circuit Theory, 1969): V_th is the sum of V_th with each independent
    source alone (dependent sources stay active) and scales with the sources; Z_th does not depend on them.
    Normwise, REL_TOL."""
    network, port = case
    sources = _sources(network)
    assume(len(sources) >= 2)
    whole = _port(network, port, f)
    total, parts_scale = 0j, whole.vth_scale
    for e in sources:
        alone = _port(_only(network, e.name), port, f)
        total += alone.vth
        parts_scale = max(parts_scale, alone.vth_scale)
        _close(alone.zth, whole.zth, whole.zth_scale, f"Z_th with {e.name} alone")
    _close(total, whole.vth, parts_scale, "sum of V_th over the sources alone")
    # Homogeneity: every source times c (magnitude and phase) multiplies V_th by c.
    scaled = network.with_elements(
        replace(e, ac_mag=e.ac_mag * abs(c), ac_phase_deg=e.ac_phase_deg + math.degrees(np.angle(c)))
        if e.kind in "VI" else e for e in network.elements)
    times_c = _port(scaled, port, f)
    _close(times_c.vth, c * whole.vth, abs(c) * whole.vth_scale, "V_th with the sources times c")
    _close(times_c.zth, whole.zth, whole.zth_scale, "Z_th with the sources times c")


# --------------------------------------------------------------------------- reciprocity


@given(networks(max_nodes=7, kinds=PASSIVE).flatmap(lambda n: st.tuples(st.just(n), ports(n), ports(n))),
       frequencies(dc=True))
def test_reciprocity_of_passive_networks(case: tuple[Network, Port, Port], f: float) -> None:
    """Reciprocity (Desoer & Kuh, Basic Circuit Theory): in a network of R, L, C and coupled inductors,
    z12 = z21 — the voltage at port 2 per ampere into port 1 equals the converse. Normwise, REL_TOL."""
    network, p1, p2 = case
    s = _solve(network, p1, f)
    x2 = s.system.factorize(f).solve(s.system.injection_vector(p2.a, p2.b))
    z21 = s.v(1, p2.a, p2.b)
    z12 = complex(s.system.voltage(x2, p1.a) - s.system.voltage(x2, p1.b))
    _close(z12, z21, max(s.scale(1), float(np.max(np.abs(x2)))), "z12 against z21")


def test_reciprocity_check_fails_with_a_dependent_source() -> None:
    """The reciprocity check can fail: a VCCS makes z12 ≠ z21 (values by hand, to 1e-9 relative)."""
    r = [make_element(n, "R", nodes, 1e3) for n, nodes in
         (("r1", ("a", "0")), ("r2", ("a", "b")), ("r3", ("b", "0")))]
    g = make_element("g1", "G", ("b", "0", "a", "0"), 1e-2)  # 0.01·V(a) leaves b to ground
    system = MnaSystem(Network("non-reciprocal", tuple(r) + (g,)))
    fac = system.factorize(0.0)
    x1 = fac.solve(system.injection_vector("a", "0"))
    x2 = fac.solve(system.injection_vector("b", "0"))
    z21, z12 = complex(system.voltage(x1, "b")), complex(system.voltage(x2, "a"))
    # By hand (nodal): Y = [[2e-3, -1e-3], [-1e-3 + 1e-2, 2e-3]], det = 4e-6 + 9e-6 = 1.3e-5;
    # z21 = -9e-3/1.3e-5 = -692.31 Ω, z12 = 1e-3/1.3e-5 = 76.923 Ω.
    assert abs(z21 - (-9e-3 / 1.3e-5)) <= 1e-9 * 692.3 and abs(z12 - 1e-3 / 1.3e-5) <= 1e-9 * 76.92
    assert abs(z12 - z21) > 0.5 * abs(z12)


# --------------------------------------------------------------------------- positive real, Foster, one reactive kind


@given(network_and_port(max_nodes=7, kinds=PASSIVE), frequencies(dc=True))
def test_passive_impedance_is_positive_real(case: tuple[Network, Port], f: float) -> None:
    """Positive-real functions (Brune, J. Math. Phys. 10, 1931): for passive R, L, C networks with k ≤ 1,
    Re Z_th(jω) ≥ 0 at every frequency; ≥ −REL_TOL times the test solve's scale here."""
    network, port = case
    p = _port(network, port, f)
    assert p.zth.real >= -REL_TOL * p.zth_scale, f"Re Z_th = {p.zth.real:.6g} Ω < 0 at {f:g} Hz"


def _reactance(network: Network, port: Port, f: float) -> tuple[float, float]:
    p = _port(network, port, f)
    # Lossless: no resistance anywhere, so the real part is roundoff only.
    assert abs(p.zth.real) <= REL_TOL * p.zth_scale, f"lossless network has Re Z = {p.zth.real:.6g} Ω at {f:g} Hz"
    return p.zth.imag, p.zth_scale


@given(network_and_port(max_nodes=7, kinds="LCVIK", lossless=True), frequencies())
def test_lossless_reactance_increases_with_frequency(case: tuple[Network, Port], f: float) -> None:
    """Foster's reactance theorem (Foster, BSTJ 3, 1924): for a lossless LC network Z = jX with dX/dω > 0, indeed
    dX/dω ≥ |X|/ω (term by term in Foster's partial fractions). Checked on the secant over ω·(1, 1 + 1e-5):
    X rises, by at least min(|X1|, |X2|)·Δω/ω2 when no zero lies between, less 2·REL_TOL·scale for rounding.
    Points with a pole between (X1 > 0 > X2), |X| > 1e9 Ω, or X zero within rounding (a short) are skipped."""
    network, port = case
    step = 1e-5
    x1, scale1 = _reactance(network, port, f)
    x2, scale2 = _reactance(network, port, f * (1 + step))
    assume(not (x1 > 0 > x2))                       # a pole lies between
    assume(max(abs(x1), abs(x2)) < 1e9)             # too near a pole to judge
    rounding = 2 * REL_TOL * max(scale1, scale2)
    assume(max(abs(x1), abs(x2)) > rounding)        # the port is an ideal short (a zeroed V source across it)
    assert x2 - x1 > 0, f"X fell from {x1:.12g} to {x2:.12g} Ω between {f:g} and {f * (1 + step):g} Hz"
    if x1 * x2 > 0:
        bound = min(abs(x1), abs(x2)) * step / (1 + step)
        assert x2 - x1 >= bound - rounding, f"X rose by {x2 - x1:.6g} Ω, less than Foster's |X|·Δω/ω = {bound:.6g} Ω"


@given(network_and_port(max_nodes=7, kinds="RCVI", single_reactive="C"), frequencies(dc=True))
def test_rc_impedance_is_capacitive(case: tuple[Network, Port], f: float) -> None:
    """Single reactive kind (Van Valkenburg, Introduction to Modern Network Synthesis, 1960): an RC network has
    Im Z ≤ 0 (≤ REL_TOL times the test solve's scale here)."""
    network, port = case
    p = _port(network, port, f)
    assert p.zth.imag <= REL_TOL * p.zth_scale, f"RC network has Im Z = {p.zth.imag:.6g} Ω > 0 at {f:g} Hz"


@given(network_and_port(max_nodes=7, kinds="RLVIK", single_reactive="L"), frequencies(dc=True))
def test_rl_impedance_is_inductive(case: tuple[Network, Port], f: float) -> None:
    """Single reactive kind (Van Valkenburg, 1960): an RL network, coupled inductors included (k < 1), has
    Im Z ≥ 0 (≥ −REL_TOL times the test solve's scale here)."""
    network, port = case
    p = _port(network, port, f)
    assert p.zth.imag >= -REL_TOL * p.zth_scale, f"RL network has Im Z = {p.zth.imag:.6g} Ω < 0 at {f:g} Hz"


# --------------------------------------------------------------------------- scaling


def _impedance_scaled(network: Network, k: float) -> Network:
    """(R, L, C) → (kR, kL, C/k); current sources /k and transconductances /k, transresistances ×k, so that
    every voltage is unchanged and every current is divided by k."""
    factor = {"R": k, "L": k, "C": 1 / k, "G": 1 / k, "H": k}
    return network.with_elements(
        replace(e, value=e.value * factor[e.kind]) if e.kind in factor
        else replace(e, ac_mag=e.ac_mag / k) if e.kind == "I" else e
        for e in network.elements)


@given(network_and_port(max_nodes=7), frequencies(dc=True), st.floats(-2, 2))
def test_impedance_scaling(case: tuple[Network, Port], f: float, log_k: float) -> None:
    """Impedance scaling (Van Valkenburg, 1960): (R, L, C) → (kR, kL, C/k) multiplies Z_th by k and leaves V_th
    unchanged (current sources and G scaled by 1/k, H by k). Normwise, REL_TOL."""
    network, port = case
    k = 10.0 ** log_k
    s, t = _port(network, port, f), _port(_impedance_scaled(network, k), port, f)
    _close(t.vth, s.vth, s.vth_scale, "V_th after impedance scaling")
    _close(t.zth, k * s.zth, k * s.zth_scale, "Z_th after impedance scaling")


@given(network_and_port(max_nodes=7), frequencies(), st.floats(-2, 2))
def test_frequency_scaling(case: tuple[Network, Port], f: float, log_a: float) -> None:
    """Frequency scaling (Van Valkenburg, 1960): (ω, L, C) → (αω, L/α, C/α) changes neither V_th nor Z_th.
    Normwise, REL_TOL."""
    network, port = case
    a = 10.0 ** log_a
    scaled = network.with_elements(replace(e, value=e.value / a) if e.kind in "LC" else e for e in network.elements)
    s, t = _port(network, port, f), _port(scaled, port, f * a)
    _close(t.vth, s.vth, s.vth_scale, "V_th after frequency scaling")
    _close(t.zth, s.zth, s.zth_scale, "Z_th after frequency scaling")
