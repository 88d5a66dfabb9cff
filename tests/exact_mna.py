"""An exact-arithmetic oracle for Thevenin and Norton equivalents, independent of crosscheck's solver.

It shares only the netlist semantics with the solver, written out again here, and
uses a different formulation: sparse tableau analysis (Hachtel, Brayton and
Gustavson, IEEE Trans. Circuit Theory CT-18, 1971), in which *every* element
(K aside) has a current unknown and one branch equation, next to one KCL row per
node. The system is solved exactly over the Gaussian rationals Q(i) with sympy's
``DomainMatrix.lu_solve``, so "singular" means exactly singular.

Inputs are taken at their exact binary values: ω = Rational(2.0·π·f) (the same
double the solver multiplies by), each value and source phasor as the rational
equal to its float. The mutual inductance k·√(L1·L2) is irrational; its double
rounding is the one inexact step, a relative 1e-16 perturbation.

Semantics (SPICE): every element current I(e) flows from nodes[0] through the
element to nodes[1]. R: V = R·I; L: V = jωL·I + Σ jωM·I(other), dots on the first
nodes; C: I = jωC·V; V: V = phasor; I: I = phasor; E: V = gain·(V(nc+) − V(nc−));
G: I = gm·(V(nc+) − V(nc−)); F: I = gain·I(control); H: V = r·I(control).
"""

from __future__ import annotations

import cmath
import math
from dataclasses import dataclass
from fractions import Fraction

from sympy.polys.domains import QQ, QQ_I
from sympy.polys.matrices import DomainMatrix
from sympy.polys.matrices.exceptions import DMNonInvertibleMatrixError

from crosscheck.model.network import GROUND, Element, Network, Port

_ZERO = QQ_I(0, 0)
_ONE = QQ_I(1, 0)


def _q(x: float):
    """The exact rational value of a double."""
    f = Fraction(x)
    return QQ(f.numerator, f.denominator)


def _c(z: complex):
    """The exact Gaussian rational of a complex double."""
    return QQ_I(_q(z.real), _q(z.imag))


def _j(x: float):
    """j·x exactly."""
    return QQ_I(QQ(0), _q(x))


def _complex(z) -> complex:
    """Round an exact Gaussian rational once to the nearest complex double."""
    return complex(float(Fraction(int(z.x.numerator), int(z.x.denominator))),
                   float(Fraction(int(z.y.numerator), int(z.y.denominator))))


@dataclass(frozen=True)
class ExactEquivalent:
    """The exact answer at one frequency, rounded once to complex doubles.

    ``route``: "open" (the open-port system is solvable), "short" (only the shorted port is, so
    Y_N = 0) or "singular" (neither). ``in_`` and ``yn`` come from the shorted-port solve whenever
    it is solvable (so they exist even where Z_th is too large for a double to tell Y_N from 0).
    The ``*_scale`` fields are normwise floors for relative errors: the infinity norm of the
    whole exact solution (node voltages and element currents, as a backward-stable solve's
    error is normwise over its whole unknown vector) of the open-circuit solve (``vth_scale``),
    the 1 A test solve (``zth_scale``), the shorted solve (``in_scale``) and the 1 V test on the
    short (``yn_scale``). With the default 1 kΩ impedance level the currents are ~1e-3 of the
    voltages, so they matter only when every node voltage vanishes exactly.
    """

    route: str
    vth: complex | None = None
    zth: complex | None = None
    in_: complex | None = None
    yn: complex | None = None
    vth_scale: float = 0.0
    zth_scale: float = 0.0
    in_scale: float = 0.0
    yn_scale: float = 0.0


class _Tableau:
    """Unknowns: node voltages (the reference node of a grounded-free part left out), then element currents."""

    def __init__(self, network: Network, omega: float, extra: tuple[Element, ...] = ()):
        self.elements = [e for e in network.elements + extra if e.kind != "K"]
        self.couplings = [e for e in network.elements if e.kind == "K"]
        nodes = list(dict.fromkeys(n for e in self.elements for n in e.nodes if n != GROUND))
        references = _references(self.elements, nodes)
        self.nodes = [n for n in nodes if n not in references]
        self.v = {n: i for i, n in enumerate(self.nodes)}
        self.i = {e.name: len(self.nodes) + k for k, e in enumerate(self.elements)}
        self.size = len(self.nodes) + len(self.elements)
        self.omega = omega
        self.rows = [dict() for _ in range(self.size)]
        self._fill()

    def _add(self, row: int, col: int | None, value) -> None:
        if col is not None:
            self.rows[row][col] = self.rows[row].get(col, _ZERO) + value

    def _voltage(self, row: int, a: str, b: str, scale=_ONE) -> None:
        """Add scale·(V(a) − V(b)) to a row."""
        self._add(row, self.v.get(a), scale)
        self._add(row, self.v.get(b), -scale)

    def _fill(self) -> None:
        by_name = {e.name: e for e in self.elements}
        mutual: dict[str, list[tuple[str, float]]] = {}
        for k in self.couplings:
            l1, l2 = (by_name[n] for n in k.coupled)
            m = k.value * math.sqrt(l1.value) * math.sqrt(l2.value)
            mutual.setdefault(l1.name, []).append((l2.name, m))
            mutual.setdefault(l2.name, []).append((l1.name, m))
        w = self.omega
        for e in self.elements:
            row, cur = self.i[e.name], self.i[e.name]
            a, b = e.nodes[0], e.nodes[1]
            # KCL (row of each node): the sum of element currents leaving the node.
            for node, sign in ((a, _ONE), (b, -_ONE)):
                if node in self.v:
                    self._add(self.v[node], cur, sign)
            # Branch equation.
            if e.kind == "R":
                self._voltage(row, a, b)
                self._add(row, cur, -_c(e.value))
            elif e.kind == "L":
                self._voltage(row, a, b)
                self._add(row, cur, -_j(w * e.value))
                for other, m in mutual.get(e.name, ()):
                    self._add(row, self.i[other], -_j(w * m))
            elif e.kind == "C":
                self._voltage(row, a, b, _j(w * e.value))
                self._add(row, cur, -_ONE)
            elif e.kind == "V":
                self._voltage(row, a, b)
            elif e.kind == "I":
                self._add(row, cur, _ONE)
            elif e.kind == "E":
                self._voltage(row, a, b)
                self._voltage(row, e.nodes[2], e.nodes[3], -_c(e.value))
            elif e.kind == "G":
                self._add(row, cur, _ONE)
                self._voltage(row, e.nodes[2], e.nodes[3], -_c(e.value))
            elif e.kind == "F":
                self._add(row, cur, _ONE)
                self._add(row, self.i[e.control], -_c(e.value))
            elif e.kind == "H":
                self._voltage(row, a, b)
                self._add(row, self.i[e.control], -_c(e.value))
            else:
                raise ValueError(f"{e.name}: kind {e.kind!r} is not known to the oracle")

    def sources(self, on: bool = True) -> list:
        """Right-hand side of the independent sources (all zero when ``on`` is False)."""
        rhs = [_ZERO] * self.size
        for e in self.elements:
            if on and e.kind in "VI" and e.ac_mag:
                rhs[self.i[e.name]] = _c(cmath.rect(e.ac_mag, math.radians(e.ac_phase_deg)))
        return rhs

    def solve(self, columns: list[list]):
        a = DomainMatrix([[r.get(c, _ZERO) for c in range(self.size)] for r in self.rows],
                         (self.size, self.size), QQ_I)
        b = DomainMatrix([[col[r] for col in columns] for r in range(self.size)],
                         (self.size, len(columns)), QQ_I)
        return a.lu_solve(b)

    def volt(self, x, col: int, node: str):
        return x[self.v[node], col].element if node in self.v else _ZERO

    def scale(self, x, col: int) -> float:
        """‖x‖∞ of one solution column."""
        return max((abs(_complex(x[k, col].element)) for k in range(self.size)), default=0.0)


def _references(elements: list[Element], nodes: list[str]) -> set[str]:
    """One node per part with no path to ground: its voltage is taken as 0 (any choice gives the same differences)."""
    parent = {n: n for n in nodes + [GROUND]}

    def find(x: str) -> str:
        while parent[x] != x:
            x = parent[x]
        return x

    for e in elements:
        parent[find(e.nodes[0])] = find(e.nodes[1])
    roots = {find(n) for n in nodes} - {find(GROUND)}
    return {min(n for n in nodes if find(n) == r) for r in roots}


def exact_thevenin(network: Network, port: Port, freq_hz: float) -> ExactEquivalent:
    """V_th and Z_th (1 A test current, sources zeroed) with the port open; I_N and Y_N with it shorted."""
    omega = 2.0 * math.pi * freq_hz
    shorted = _shorted(network, port, omega)
    open_ = _Tableau(network, omega)
    test = [_ZERO] * open_.size
    for node, sign in ((port.a, _ONE), (port.b, -_ONE)):  # the test current enters a, leaves b
        if node in open_.v:
            test[open_.v[node]] = sign
    try:
        x = open_.solve([open_.sources(), test])
    except DMNonInvertibleMatrixError:
        if shorted is None:
            return ExactEquivalent("singular")
        in_, yn, in_scale, yn_scale = shorted
        assert yn == _ZERO, "open port singular, yet the shorted port has Y_N != 0"
        return ExactEquivalent("short", None, None, _complex(in_), 0j, in_scale=in_scale, yn_scale=yn_scale)
    vth = open_.volt(x, 0, port.a) - open_.volt(x, 0, port.b)
    zth = open_.volt(x, 1, port.a) - open_.volt(x, 1, port.b)
    scales = dict(vth_scale=open_.scale(x, 0), zth_scale=open_.scale(x, 1))
    if zth == _ZERO:
        return ExactEquivalent("open", _complex(vth), 0j, None, None, **scales)
    # Norton's theorem holds exactly: the two routes must agree in rational arithmetic.
    assert shorted is not None, "Z_th != 0, yet the shorted port is singular"
    in_, yn, in_scale, yn_scale = shorted
    assert in_ == vth / zth and yn == _ONE / zth, "I_N != V_th/Z_th or Y_N != 1/Z_th in exact arithmetic"
    return ExactEquivalent("open", _complex(vth), _complex(zth), _complex(in_), _complex(yn),
                           in_scale=in_scale, yn_scale=yn_scale, **scales)


def _shorted(network: Network, port: Port, omega: float):
    """Short the port with a 0 V source: its current (a → b through the short) is I_N; 1 V on it gives Y_N.

    Returns (I_N, Y_N, scale of the source solve, scale of the 1 V solve), or None when singular.
    """
    short = Element(name="oracle:short", kind="V", nodes=(port.a, port.b))
    tab = _Tableau(network, omega, (short,))
    test = [_ZERO] * tab.size
    test[tab.i[short.name]] = _ONE
    try:
        x = tab.solve([tab.sources(), test])
    except DMNonInvertibleMatrixError:
        return None
    k = tab.i[short.name]
    return x[k, 0].element, -x[k, 1].element, tab.scale(x, 0), tab.scale(x, 1)
