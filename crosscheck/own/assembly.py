"""The MNA matrix of a network, A(ω) = A0 + jω·A1, on one sparsity pattern built once per network.

The stamps are those of Ho, Ruehli and Brennan, "The modified nodal approach to network analysis",
IEEE Trans. Circuits and Systems CAS-22 (1975): node voltages plus a branch current for every element
whose voltage is fixed (V, E, H, L, ideal shorts). Inductors carry a branch current so that DC (L is a
short) and mutual coupling (K) need no special case.

How an element enters the matrix, and where the port's test current enters, is a ``Stamps`` object
passed in by the caller; ``STAMPS`` is the correct one and the default everywhere. The seam exists so
that the fuzzer's measurements can hand the solver deliberately broken stamps
(``crosscheck.fuzz.faults``) without the engine holding any switch for them: nothing here reads a global.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from crosscheck.model.network import GROUND, SOURCE_KINDS, Element, Network

if TYPE_CHECKING:  # scipy.sparse is loaded by ``assemble`` only: the small-network path needs numpy alone
    import scipy.sparse as sp

#: Kinds that carry a branch current (with ideal shorts, R = 0).
BRANCH_KINDS = frozenset("VEHL")
#: Kinds whose entries the correct stamps write in bulk with numpy.
_BULK_KINDS = frozenset("RCLV")

#: Matrix entries as (rows, columns, A0 values, A1 values); index -1 is ground.
Entries = tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]


class Stamps:
    """How each element enters the MNA matrix, and where the test current enters: correct as defined here.

    A subclass may change a stamp (the fault catalogue does); it must then set ``bulk`` False, so that
    every element goes through the per-element methods below instead of the numpy pass that writes R, C,
    L and V entries directly (that pass knows only the correct stamps).
    """

    #: Whether R, C, L and V elements may be stamped in one numpy pass (the correct stamps only).
    bulk: bool = True
    #: Whether a capacitor is stamped as the impedance 1/(jωC) (a branch, like an inductor of C henries).
    capacitor_as_impedance: bool = False

    def vccs_gain(self, gm: float) -> float:
        """The transconductance stamped for a VCCS (G) of gain ``gm``."""
        return gm

    def mutual(self, m: float) -> float:
        """The mutual inductance stamped for a coupled pair whose M is ``m``."""
        return m

    def per_omega(self, entries: np.ndarray) -> np.ndarray:
        """The A1 entries (multiplied by jω at each frequency) as stamped."""
        return entries

    def injection_rows(self, a: int | None, b: int | None, nodes: int) -> tuple[int | None, int | None]:
        """The rows where the test current enters (``a``) and leaves (``b``); None is ground."""
        return a, b


#: The correct stamps.
STAMPS = Stamps()


@dataclass(frozen=True)
class Assembled:
    """A0 and A1 on one shared CSC pattern (``pattern`` holds A0 + j·A1), and the number of unknowns."""

    pattern: sp.csc_matrix
    a0: np.ndarray
    a1: np.ndarray
    size: int


def assemble(
    network: Network,
    node_index: Mapping[str, int],
    branch_index: Mapping[str, int],
    branch_elements: np.ndarray,
    ties: Sequence[str],
    stamps: Stamps = STAMPS,
) -> Assembled:
    """Stamp every element (and the ties of floating parts to ground) into A0 and A1 (``entries``), on one
    sparse pattern."""
    import scipy.sparse as sp  # start-up time: the small-network path (``own.small``) needs numpy alone

    rows, cols, constant, per_omega, size = entries(network, node_index, branch_index, branch_elements, ties, stamps)
    # Sum duplicates once, keeping A0 and A1 on one shared pattern.
    combined = sp.coo_matrix((constant + 1j * per_omega, (rows, cols)), shape=(size, size)).tocsc()
    combined.sum_duplicates()
    combined.sort_indices()
    return Assembled(combined, combined.data.real.copy(), combined.data.imag.copy(), size)


def entries(
    network: Network,
    node_index: Mapping[str, int],
    branch_index: Mapping[str, int],
    branch_elements: np.ndarray,
    ties: Sequence[str],
    stamps: Stamps = STAMPS,
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, int]:
    """Every element's entries (and the ties of floating parts to ground): rows, columns, A0 values, A1
    values (duplicates not yet summed, ground dropped) and the number of unknowns.

    ``branch_elements``: the mask of elements that carry a branch current, in element order; their
    rows follow the nodes in that order (``branch_index``).
    """
    bulk: list[Entries] = []
    rest: Sequence[Element] = network.elements
    if stamps.bulk:
        bulk, rest = _bulk_entries(network, node_index, branch_elements)
    noted = _Noted(node_index, branch_index, len(node_index) + len(branch_index), stamps)
    noted.stamp(network, rest)
    for n in ties:
        noted.incidence(branch_index[f"tie:{n}"], n, GROUND)
    blocks: list[tuple] = [(noted.rows, noted.cols, noted.constant, noted.per_omega), *bulk]
    if noted.two_terminal or noted.incidences:
        blocks.append(_noted_entries(noted.two_terminal, noted.incidences))
    rows, cols, constant, per_omega = _joined(blocks)
    return rows, cols, constant, np.asarray(stamps.per_omega(per_omega), dtype=float), noted.size


class _Noted:
    """Entries noted one element at a time (the elements the numpy pass does not take).

    Two-terminal admittances and branch incidences are noted as one index row per element and stamped as
    arrays at the end (``_noted_entries``); the other entries are noted one by one.
    """

    def __init__(self, node_index: Mapping[str, int], branch_index: Mapping[str, int], size: int, stamps: Stamps):
        self.node = node_index.get
        self.branch_index = branch_index
        self.size = size
        self.stamps = stamps
        self.rows: list[int] = []
        self.cols: list[int] = []
        self.constant: list[float] = []  # A0 entries
        self.per_omega: list[float] = []  # A1 entries (multiplied by jω)
        self.two_terminal: list[tuple[int, int, float, float]] = []
        self.incidences: list[tuple[int, int, int]] = []

    def put(self, r: int | None, c: int | None, a0: float = 0.0, a1: float = 0.0) -> None:
        if r is None or c is None:
            return
        self.rows.append(r)
        self.cols.append(c)
        self.constant.append(a0)
        self.per_omega.append(a1)

    def admittance(self, a: str, b: str, a0: float, a1: float) -> None:
        self.two_terminal.append((self.node(a, -1), self.node(b, -1), a0, a1))

    def incidence(self, k: int, a: str, b: str) -> None:
        """KCL: the branch current leaves node a and enters node b; branch row: V(a) - V(b)."""
        self.incidences.append((k, self.node(a, -1), self.node(b, -1)))

    def stamp(self, network: Network, elements: Sequence[Element]) -> None:
        """Note the entries of ``elements``, each by the stamps of its kind."""
        by_name = {}  # K elements look up their inductors by name
        if any(e.kind == "K" for e in elements):
            by_name = {e.name: e for e in network.elements if e.kind == "L"}
        for e in elements:
            kind = e.kind
            if kind == "R" and not e.is_short:
                self.admittance(*e.terminals, 1.0 / e.value, 0.0)
            elif kind == "C" and self.stamps.capacitor_as_impedance:
                self.size += 1
                self.incidence(self.size - 1, *e.terminals)
                self.put(self.size - 1, self.size - 1, 0.0, -e.value)
            elif kind == "C":
                self.admittance(*e.terminals, 0.0, e.value)
            elif kind == "G":
                self._vccs(e)
            elif kind == "F":
                k_ctl = self.branch_index[e.control]  # type: ignore[index]
                self.put(self.node(e.nodes[0]), k_ctl, e.value)
                self.put(self.node(e.nodes[1]), k_ctl, -e.value)
            elif kind in BRANCH_KINDS or e.is_short:
                self._branch(e)
            elif kind == "K":
                l1, l2 = (by_name[n] for n in e.coupled)  # type: ignore[union-attr]
                mutual = self.stamps.mutual(e.value * math.sqrt(l1.value * l2.value))
                k1, k2 = self.branch_index[l1.name], self.branch_index[l2.name]
                self.put(k1, k2, 0.0, -mutual)
                self.put(k2, k1, 0.0, -mutual)

    def _vccs(self, e: Element) -> None:
        """Current gm·(V(nc+) - V(nc-)) flows from n+ through the source to n-."""
        p, m, cp, cm = (self.node(n) for n in e.nodes)
        gm = self.stamps.vccs_gain(e.value)
        self.put(p, cp, gm)
        self.put(p, cm, -gm)
        self.put(m, cp, -gm)
        self.put(m, cm, gm)

    def _branch(self, e: Element) -> None:
        """An element with a branch current (V, E, H, L, ideal short): its incidence and its branch row."""
        k = self.branch_index[e.name]
        self.incidence(k, *e.terminals)
        if e.kind == "L":
            self.put(k, k, 0.0, -e.value)
        elif e.kind == "E":
            self.put(k, self.node(e.nodes[2]), -e.value)
            self.put(k, self.node(e.nodes[3]), e.value)
        elif e.kind == "H":
            self.put(k, self.branch_index[e.control], -e.value)  # type: ignore[index]


def _bulk_entries(
    network: Network, node_index: Mapping[str, int], branch_elements: np.ndarray
) -> tuple[list[Entries], list[Element]]:
    """Blocks of entries for every R, C, L and V element (ideal shorts included), and the other elements.

    Read from the network's element columns (``Network.element_arrays``, built once per network), so
    numpy does the work and Python touches only the elements of other kinds.
    """
    arrays = network.element_arrays
    kind, value, a, b = arrays.kind, arrays.value, arrays.a, arrays.b
    chosen = arrays.of_kind(_BULK_KINDS)
    elements = network.elements
    rest = [elements[i] for i in np.flatnonzero(~chosen).tolist()]
    resistor = (kind == ord("R")) & (value != 0.0)
    capacitor = kind == ord("C")
    branch = chosen & branch_elements  # L, V and ideal shorts carry a branch current
    # Branch rows follow the nodes in element order: each one's row is its rank among them.
    k = len(node_index) + (np.cumsum(branch_elements) - 1)[branch]
    conductance = 1.0 / value[resistor]
    inductor = kind[branch] == ord("L")
    k_l = k[inductor]
    return [
        _admittance_entries(a[resistor], b[resistor], conductance, np.zeros(len(conductance))),
        _admittance_entries(a[capacitor], b[capacitor], np.zeros(int(capacitor.sum())), value[capacitor]),
        _incidence_entries(k, a[branch], b[branch]),
        (k_l, k_l, np.zeros(len(k_l)), -value[branch][inductor]),  # a branch row: V(a) - V(b) - jωL·I = 0
    ], rest


def _admittance_entries(a: np.ndarray, b: np.ndarray, y0: np.ndarray, y1: np.ndarray) -> Entries:
    """An admittance y between a and b: +y at (a, a) and (b, b), −y at (a, b) and (b, a)."""
    return (
        np.concatenate([a, b, a, b]),
        np.concatenate([a, b, b, a]),
        np.concatenate([y0, y0, -y0, -y0]),
        np.concatenate([y1, y1, -y1, -y1]),
    )


def _incidence_entries(k: np.ndarray, a: np.ndarray, b: np.ndarray) -> Entries:
    """Branch k from a to b: its current leaves a and enters b (KCL rows), its row reads V(a) − V(b)."""
    one = np.ones(len(k))
    return (
        np.concatenate([a, b, k, k]),
        np.concatenate([k, k, a, b]),
        np.concatenate([one, -one, one, -one]),
        np.zeros(4 * len(k)),
    )


def _noted_entries(two_terminal: list, incidence: list) -> Entries:
    """The admittances and incidences noted one element at a time, as entry arrays."""
    adm = np.array(two_terminal, dtype=float).reshape(-1, 4)
    inc = np.array(incidence, dtype=np.intp).reshape(-1, 3)
    return _joined(
        [
            _admittance_entries(adm[:, 0].astype(np.intp), adm[:, 1].astype(np.intp), adm[:, 2], adm[:, 3]),
            _incidence_entries(inc[:, 0], inc[:, 1], inc[:, 2]),
        ]
    )


def _joined(parts: Sequence[tuple]) -> Entries:
    """Entry blocks (arrays or lists) as one block, with every entry in a ground row or column dropped."""
    r, c, v0, v1 = (
        np.concatenate([np.asarray(p[i], dtype=dtype) for p in parts])
        for i, dtype in enumerate((np.intp, np.intp, float, float))
    )
    keep = (r >= 0) & (c >= 0)
    return r[keep], c[keep], v0[keep], v1[keep]


def source_vector(
    network: Network, node_index: Mapping[str, int], branch_index: Mapping[str, int], size: int
) -> np.ndarray:
    """The independent sources' phasors, placed in their KCL or branch rows (one writer for every solver)."""
    z = np.zeros(size, dtype=complex)
    elements = network.elements
    for e in (elements[i] for i in np.flatnonzero(network.element_arrays.of_kind(SOURCE_KINDS)).tolist()):
        if e.ac_mag == 0:
            continue
        if e.kind == "V":
            z[branch_index[e.name]] += e.phasor
        else:
            # SPICE: the current flows from n+ through the source to n-.
            p, m = (node_index.get(n) for n in e.terminals)
            if p is not None:
                z[p] -= e.phasor
            if m is not None:
                z[m] += e.phasor
    return z


def injection_vector(
    stamps: Stamps, node_index: Mapping[str, int], size: int, a: str, b: str, amps: complex
) -> np.ndarray:
    """A test current driven into node a and out of node b (sources left out), in ``stamps``' rows."""
    z = np.zeros(size, dtype=complex)
    ia, ib = stamps.injection_rows(node_index.get(a), node_index.get(b), len(node_index))
    if ia is not None:
        z[ia] += amps
    if ib is not None:
        z[ib] -= amps
    return z


class RightHandSides:
    """The right-hand sides and the node read-out every MNA system offers, dense or sparse; the system sets
    ``network``, ``node_index``, ``branch_index``, ``size`` and ``_stamps``."""

    network: Network
    node_index: dict[str, int]
    branch_index: dict[str, int]
    size: int
    _stamps: Stamps

    def source_vector(self) -> np.ndarray:
        """The independent sources' phasors, placed in their KCL or branch rows (``source_vector``)."""
        return source_vector(self.network, self.node_index, self.branch_index, self.size)

    def injection_vector(self, a: str, b: str, amps: complex = 1.0) -> np.ndarray:
        """A test current driven into node a and out of node b (sources left out)."""
        return injection_vector(self._stamps, self.node_index, self.size, a, b, amps)

    def voltage(self, x: np.ndarray, node: str) -> np.ndarray | complex:
        """Node voltage from a solution vector (or columns); ground is 0."""
        i = self.node_index.get(node)
        return 0.0 * x[0] if i is None else x[i]
