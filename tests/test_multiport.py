"""Multi-port forms (own/multiport, spice/multiport, judge/multiport) against exact arithmetic, the one-port
route, ngspice and the degenerate cases the conventions of model/port_matrices promise to name.

Random small networks are drawn here from a seeded generator (R, L, C between six nodes and ground, one or
two independent sources, and with ``controlled`` a VCCS and a VCVS); ports are two or three node pairs,
some of them between two non-ground nodes. Errors are normwise: ||M - M_exact||_F / ||M_exact||_F.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from exact_mna import _ONE, _ZERO, _complex, _Tableau
from sympy.polys.matrices.exceptions import DMNonInvertibleMatrixError

from crosscheck.judge.multiport import FORTESCUE, value_of
from crosscheck.model.netlist import read_netlist
from crosscheck.model.network import Element, Network, Port
from crosscheck.model.port_matrices import MatrixPoint
from crosscheck.own.equivalent import thevenin
from crosscheck.own.multiport import reduce_ports

NODES = ["n1", "n2", "n3", "n4", "n5", "n6"]
#: Normwise agreement with exact arithmetic on these small, well-conditioned networks (rounding seen ~1e-15).
EXACT_TOL = 1e-10


def random_network(seed: int, controlled: bool = False) -> Network:
    """A connected network over NODES: a spanning chain to ground plus random R, L, C branches and sources."""
    rng = np.random.default_rng(seed)
    elements: list[Element] = []
    order = ["0", *rng.permutation(NODES).tolist()]
    for k in range(1, len(order)):  # a spanning tree of resistors: every node has a conducting path to ground
        a, b = order[k], order[int(rng.integers(0, k))]
        elements.append(Element(f"rt{k}", "R", (a, b), float(10 ** rng.uniform(1, 4))))
    for k in range(6):
        a, b = rng.choice(["0", *NODES], size=2, replace=False).tolist()
        kind = str(rng.choice(["R", "L", "C"]))
        value = {"R": 10 ** rng.uniform(1, 4), "L": 10 ** rng.uniform(-4, -1), "C": 10 ** rng.uniform(-8, -5)}[kind]
        if kind == "L":  # with a series resistor: no loop of inductors (singular at DC, as thevenin says too)
            elements.append(Element(f"rx{k}", "R", (a, f"m{k}"), 1.0))
            a = f"m{k}"
        elements.append(Element(f"{kind.lower()}x{k}", kind, (a, b), float(value)))
    elements.append(Element("vs", "V", ("nv", "0"), 0.0, ac_mag=1.0, ac_phase_deg=30.0))
    elements.append(Element("rs", "R", ("nv", str(rng.choice(NODES))), 50.0))  # in series: no loop of sources
    elements.append(Element("is", "I", tuple(rng.choice(NODES, size=2, replace=False).tolist()), 0.0, ac_mag=1e-3))
    if controlled:
        c = rng.choice(NODES, size=4, replace=False).tolist()
        elements.append(Element("g1", "G", (c[0], "0", c[1], c[2]), 2e-3))
        elements.append(Element("e1", "E", ("ne", "0", c[3], "0"), 3.0))
        elements.append(Element("re", "R", ("ne", c[0]), 470.0))
    return Network(f"random multiport {seed}", tuple(elements))


def random_ports(seed: int, count: int) -> list[Port]:
    rng = np.random.default_rng(seed + 1000)
    picked = rng.choice(NODES, size=2 * count, replace=False).tolist()
    return [Port(picked[2 * k], picked[2 * k + 1] if k % 2 else "0") for k in range(count)]


def exact_matrices(network: Network, ports: list[Port], freq_hz: float) -> tuple[np.ndarray, np.ndarray]:
    """voc and Z in exact arithmetic (sparse tableau, tests/exact_mna.py), rounded once."""
    tab = _Tableau(network, 2.0 * math.pi * freq_hz)
    columns = [tab.sources()]
    for port in ports:  # 1 A into a, out of b
        test = [_ZERO] * tab.size
        for node, sign in ((port.a, _ONE), (port.b, -_ONE)):
            if node in tab.v:
                test[tab.v[node]] = sign
        columns.append(test)
    x = tab.solve(columns)
    volts = [[_complex(tab.volt(x, c, p.a) - tab.volt(x, c, p.b)) for c in range(len(columns))] for p in ports]
    v = np.array(volts, dtype=complex)
    return v[:, 0], v[:, 1:]


def _normwise(got: np.ndarray, exact: np.ndarray) -> float:
    scale = float(np.linalg.norm(exact))
    return float(np.linalg.norm(got - exact)) / scale if scale else float(np.linalg.norm(got))


@pytest.mark.parametrize("seed", range(12))
@pytest.mark.parametrize("controlled", [False, True])
def test_own_route_matches_exact_arithmetic(seed: int, controlled: bool) -> None:
    """voc, Z, and isc = inv(Z)·voc (checked against the exact voc and Z) agree with exact arithmetic."""
    network = random_network(seed, controlled)
    ports = random_ports(seed, 2 + seed % 2)
    compared = 0
    for f in (0.0, 1e3, 1e5):
        try:
            voc_exact, z_exact = exact_matrices(network, ports, f)
        except DMNonInvertibleMatrixError:
            continue  # no such frequency in these networks so far; the degenerate tests cover singular ones
        [point] = reduce_ports(network, ports, [f])
        assert point.z is not None
        assert _normwise(point.voc, voc_exact) <= EXACT_TOL
        assert _normwise(point.z, z_exact) <= EXACT_TOL
        compared += 1
        if point.y is not None:
            assert _normwise(point.isc, np.linalg.solve(z_exact, voc_exact)) <= 1e3 * EXACT_TOL * point.z_condition
            assert _normwise(point.y @ point.z, np.eye(len(ports))) <= 1e-9
    assert compared >= 2


@pytest.mark.parametrize("seed", range(8))
def test_one_port_is_thevenin(seed: int) -> None:
    """With one port, voc, Z, isc and Y are V_th, Z_th, I_N and Y_N of the one-port route (same solve)."""
    network = random_network(seed, controlled=seed % 2 == 1)
    [port] = random_ports(seed, 1)
    freqs = [0.0, 50.0, 1e4]
    checked: set[str] = set()
    for point, eq in zip(reduce_ports(network, [port], freqs), thevenin(network, port, freqs), strict=True):
        assert point.voc[0] == eq.vth and point.z is not None and point.z[0, 0] == eq.zth
        assert point.condition == eq.condition
        assert (point.isc is None) == (eq.in_ is None) and (point.y is None) == (eq.yn is None)  # Z_th = 0 alike
        if point.isc is not None and point.y is not None and eq.in_ is not None and eq.yn is not None:
            checked.add("norton")
            assert abs(point.isc[0] - eq.in_) <= 1e-14 * abs(eq.in_)
            assert abs(point.y[0, 0] - eq.yn) <= 1e-14 * abs(eq.yn)
    assert "norton" in checked


def test_reciprocity_is_measured_not_assumed() -> None:
    """A passive network is reciprocal to rounding; a VCCS makes Z21 differ from Z12 (figure far above 0)."""
    passive = read_netlist("p\nV1 in 0 AC 1\nR1 in a 100\nR2 a 0 200\nR3 a b 50\nR4 b 0 300\nC1 b 0 1u\n.end\n")
    active = read_netlist("p\nV1 in 0 AC 1\nR1 in a 100\nR2 a 0 200\nR3 a b 50\nR4 b 0 300\nG1 b 0 a 0 0.01\n.end\n")
    ports = [Port("a", "0"), Port("b", "0")]
    [p] = reduce_ports(passive, ports, [1e3])
    [q] = reduce_ports(active, ports, [1e3])
    assert p.reciprocity is not None and p.reciprocity <= 1e-14
    assert q.reciprocity is not None and q.reciprocity >= 0.1  # by hand: z12 = 32.4, z21 = 16.2 (0.297)
    assert q.z is not None and abs(q.z[0, 1] - 2 * q.z[1, 0]) <= 1e-12 * abs(q.z[0, 1])


def test_two_ports_joined_by_a_voltage_source_have_no_norton_form() -> None:
    """V1 between a and b: V(a) - V(b) is fixed, so Z is singular along (1, -1); the note names both ports."""
    network = read_netlist("j\nV1 a b AC 1\nR1 a 0 100\nR2 b 0 200\n.end\n")
    [point] = reduce_ports(network, [Port("a", "0"), Port("b", "0")], [1e3])
    assert point.z is not None and point.y is None and point.isc is None
    assert "ports 1 and 2" in point.notes[0] and "no Norton form" in point.notes[0]
    assert abs(point.voc[0] - point.voc[1] - 1) <= 1e-12  # V1's 1 V between the ports


def test_ideal_source_across_one_port_names_that_port() -> None:
    network = read_netlist("s\nV1 a 0 AC 2\nR1 a b 100\nR2 b 0 100\n.end\n")
    [point] = reduce_ports(network, [Port("b", "0"), Port("a", "0")], [0.0])
    assert point.y is None and "port 2" in point.notes[0] and "ports" not in point.notes[0]
    assert point.z is not None and abs(point.z[1, 1]) <= 1e-12 and abs(point.z[0, 0] - 50) <= 1e-9


def test_port_behind_a_capacitor_at_dc_has_only_the_norton_form() -> None:
    """At DC the 1 µF leaves node b fed by I1 alone: the open network is singular, the shorted one is not."""
    network = read_netlist("c\nI1 0 b AC 1m\nC1 b a 1u\nR1 a 0 100\n.end\n")
    [point] = reduce_ports(network, [Port("a", "0"), Port("b", "0")], [0.0])
    assert point.z is None and point.y is not None and point.isc is not None
    assert "no Thevenin form" in point.notes[0] and "port 2" in point.notes[0]
    assert abs(point.isc[1] - (-1e-3)) <= 1e-15 or abs(point.isc[1] - 1e-3) <= 1e-15  # I1 into b, through the short


def test_floating_port_is_referred_to_its_own_node() -> None:
    """A transformer secondary with no ground: port 1 across it, port 2 on the primary side."""
    text = "t\nV1 in 0 AC 1\nR1 in p 10\nL1 p 0 1m\nL2 s1 s2 4m\nK1 L1 L2 0.99\nR2 s1 s2 1k\n.end\n"
    network = read_netlist(text, port=Port("s1", "s2"))
    [point] = reduce_ports(network, [Port("s1", "s2"), Port("p", "0")], [1e3])
    [one] = thevenin(network, Port("s1", "s2"), [1e3])
    assert point.z is not None and abs(point.voc[0] - one.vth) <= 1e-12 * abs(one.vth)
    assert abs(point.z[0, 0] - one.zth) <= 1e-12 * abs(one.zth)


def test_mode_and_sequence_quantities() -> None:
    """zdiff, zcomm of a two-port and z0, z1, z2 of a balanced three-port (common practice: Zs - Zm, Zs + 2 Zm)."""
    zs, zm = 3 + 4j, 1 + 0.5j
    z3 = np.full((3, 3), zm) + np.eye(3) * (zs - zm)
    p3 = MatrixPoint(50.0, np.zeros(3, complex), z3, None, None, None)
    assert abs(value_of(p3, "z1") - (zs - zm)) <= 1e-12 and abs(value_of(p3, "z2") - (zs - zm)) <= 1e-12
    assert abs(value_of(p3, "z0") - (zs + 2 * zm)) <= 1e-12
    z2 = np.array([[50, 10], [10, 50]], dtype=complex)
    p2 = MatrixPoint(50.0, np.zeros(2, complex), z2, None, None, None)
    assert value_of(p2, "zdiff") == 80 and value_of(p2, "zcomm") == 30
    assert np.allclose(np.linalg.inv(FORTESCUE) @ FORTESCUE, np.eye(3))


def test_a_wrong_element_fails_by_name_and_the_norm_error_shows_it() -> None:
    """ngspice's z21 moved by 1e-4 relative: that element fails (cause: model difference), the others pass, and
    the normwise Z error is about the same size; the case verdict and JUnit follow."""
    from dataclasses import replace

    from crosscheck.judge.multiport import MultiportResult, judge_multiport
    from crosscheck.judge.result import CaseResult, case_verdict
    from crosscheck.model.tolerance import SOLVER_VS_SPICE
    from crosscheck.report.junit import junit_xml

    network = random_network(3, controlled=True)
    ports = random_ports(3, 2)
    own = reduce_ports(network, ports, [1e3])
    z = own[0].z.copy()
    z[1, 0] *= 1 + 1e-4
    spice = (replace(own[0], z=z, condition=None, y=np.linalg.inv(z), isc=np.linalg.solve(z, own[0].voc)),)
    part = MultiportResult(("1", "2"), tuple((p.a, p.b) for p in ports), own, spice)
    part = judge_multiport(part, None, SOLVER_VS_SPICE, compare=True)
    [check] = part.checks
    failed = {q.quantity for q in check.quantities if q.verdict == "fail"}
    assert "z21" in failed and "z12" not in failed and "voc1" not in failed
    assert check.z_norm_error is not None and 1e-6 < check.z_norm_error < 1e-4
    assert "z21 differs by" in check.explanation
    result = CaseResult("c", "c", ("a", "b"), (1e3,), SOLVER_VS_SPICE, own=(), multiport=part)
    result = replace(result, verdict=case_verdict(result))
    assert result.verdict == "fail" and "<failure" in junit_xml([result])
