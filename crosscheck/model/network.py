"""The immutable network model that every engine and report works from.

Nothing downstream of the reader sees user text: only ``Network`` and
``Element``. Node names are lower-case strings; ground is ``"0"`` (``gnd`` is
an alias). Validation refuses what would make either engine silently wrong:
ngspice quietly accepts R = 0 as 1 mΩ, L or C <= 0, k > 1, and ties a node
reached only by current sources to ground, so we refuse those before it can.
"""

from __future__ import annotations

import itertools
import math
from collections import defaultdict
from collections.abc import Iterable, Iterator
from dataclasses import dataclass, field, fields, replace
from functools import cached_property
from operator import attrgetter
from typing import NamedTuple

import numpy as np

from crosscheck.errors import Location, NetworkError, PortError
from crosscheck.model.graph import UnionFind, connected_parts

GROUND = "0"
GROUND_ALIASES = frozenset({"0", "gnd"})

#: Element kinds by their SPICE letter.
PASSIVE_KINDS = frozenset("RLC")
SOURCE_KINDS = frozenset("VI")
VOLTAGE_CONTROLLED = frozenset("EG")  # control: a node pair
CURRENT_CONTROLLED = frozenset("FH")  # control: the current through a named V element
ALL_KINDS = PASSIVE_KINDS | SOURCE_KINDS | VOLTAGE_CONTROLLED | CURRENT_CONTROLLED | {"K"}

#: Branches whose output is a current: nodes reached only through these have no defined voltage.
CURRENT_OUTPUT_KINDS = frozenset("IGF")


def canonical_node(name: str) -> str:
    """Node names compare case-insensitively; ``gnd`` is ground."""
    n = str(name).strip().lower()
    return GROUND if n in GROUND_ALIASES else n


@dataclass(frozen=True)
class Element:
    """One element as SPICE defines it.

    ``nodes`` is ``(n+, n-)`` for every kind but K, plus ``(nc+, nc-)`` for E and G.
    ``value`` is ohms (R), henries (L), farads (C), gain (E, F), siemens (G),
    ohms (H) or the coupling coefficient (K); unused (0.0) for V and I, whose
    phasor is ``ac_mag`` at ``ac_phase_deg`` degrees.
    ``control`` names the V element whose current controls F and H.
    ``coupled`` names the two inductors of a K element; the dot of each
    inductor is on its first node, as in SPICE.
    """

    name: str
    kind: str
    nodes: tuple[str, ...]
    value: float = 0.0
    ac_mag: float = 0.0
    ac_phase_deg: float = 0.0
    control: str | None = None
    coupled: tuple[str, str] | None = None
    where: Location | None = field(default=None, compare=False, repr=False)

    @property
    def terminals(self) -> tuple[str, str]:
        """The two nodes the element's own branch connects (its output for controlled sources)."""
        return (self.nodes[0], self.nodes[1])

    @property
    def phasor(self) -> complex:
        """The AC phasor of an independent source, as written (peak or RMS is the case's convention)."""
        return self.ac_mag * complex(
            math.cos(math.radians(self.ac_phase_deg)), math.sin(math.radians(self.ac_phase_deg))
        )

    @property
    def is_short(self) -> bool:
        """R = 0 is an ideal short: a zero-volt branch, never a tiny resistor."""
        return self.kind == "R" and self.value == 0.0


@dataclass(frozen=True)
class Port:
    """The two terminals at which the equivalent is taken: V_th = V(a) - V(b)."""

    a: str
    b: str

    def __post_init__(self) -> None:
        object.__setattr__(self, "a", canonical_node(self.a))
        object.__setattr__(self, "b", canonical_node(self.b))

    def __iter__(self) -> Iterator[str]:
        return iter((self.a, self.b))


class _Topology(NamedTuple):
    """Every node of every element as an index into ``nodes`` (ground: -1), found in one pass."""

    nodes: tuple[str, ...]
    positions: dict[str, int]
    ids: np.ndarray  # the nodes of all elements, concatenated in element order
    starts: np.ndarray  # where each element's nodes begin in ``ids``
    counts: np.ndarray  # how many nodes each element has


class ElementArrays(NamedTuple):
    """The elements as columns, for checks and stamps done by numpy instead of one Python call per element."""

    kind: np.ndarray  # the kind letter's code point (``ord``); 0 for a kind that is not one character
    value: np.ndarray
    a: np.ndarray  # the first terminal's index in ``Network.nodes``; -1 is ground (and both terminals of K)
    b: np.ndarray  # the second terminal's index

    def of_kind(self, kinds: Iterable[str]) -> np.ndarray:
        """True for each element whose kind is one of ``kinds`` (letters)."""
        mask = np.zeros(len(self.kind), dtype=bool)
        for k in kinds:
            mask |= self.kind == ord(k)
        return mask


@dataclass(frozen=True)
class Network:
    """An immutable linear AC network: a title and its elements in netlist order.

    What is derived from the elements (nodes, their indices, the connected parts) is computed once
    per Network, on first use, and kept in the instance ``__dict__``; the fields never change, so
    it never goes stale. ``dataclasses.replace`` builds a new Network with nothing cached, and a
    pickle carries the fields only (the caches are rebuilt where it is loaded).
    """

    title: str
    elements: tuple[Element, ...]
    allow_negative: bool = field(default=False, compare=False)

    def __getstate__(self) -> dict:
        return {f.name: self.__dict__[f.name] for f in fields(self)}

    @cached_property
    def _topology(self) -> _Topology:
        per_element = list(map(attrgetter("nodes"), self.elements))
        counts = np.fromiter(map(len, per_element), np.intp, len(per_element))
        # One dictionary look-up per node occurrence: a node not seen before takes the next index.
        table: defaultdict[str, int] = defaultdict(itertools.count().__next__)
        table[GROUND] = -1
        ids = np.fromiter(
            map(table.__getitem__, itertools.chain.from_iterable(per_element)), np.intp, int(counts.sum())
        )
        del table[GROUND]
        table.default_factory = None  # from here on a plain mapping: a node it lacks raises KeyError
        index: dict[str, int] = table
        return _Topology(tuple(index), index, ids, np.cumsum(counts) - counts, counts)

    @cached_property
    def nodes(self) -> tuple[str, ...]:
        """Every non-ground node, in order of first appearance."""
        return self._topology.nodes

    @cached_property
    def node_index(self) -> dict[str, int]:
        """Each non-ground node's position in ``nodes``. Shared by every user: read it, never change it."""
        return self._topology.positions

    @cached_property
    def element_arrays(self) -> ElementArrays:
        """Kind, value and terminal indices of every element as numpy arrays (see ``ElementArrays``)."""
        elements = self.elements
        kinds = list(map(attrgetter("kind"), elements))
        kind = np.frombuffer("".join(kinds).encode("utf-32-le"), dtype=np.uint32)
        if len(kind) != len(elements):  # a kind of more than one letter (validate refuses it)
            kind = np.array([ord(k) if len(k) == 1 else 0 for k in kinds], dtype=np.uint32)
        value = np.fromiter(map(attrgetter("value"), elements), float, len(elements))
        top = self._topology
        two_terminal = kind != ord("K")
        short = two_terminal & (top.counts < 2)
        if short.any():
            e = elements[int(np.flatnonzero(short)[0])]
            raise IndexError(f"{e.name} has {len(e.nodes)} node(s); a {e.kind} element needs two terminals")
        a = np.full(len(elements), -1, dtype=np.intp)
        b = a.copy()
        a[two_terminal] = top.ids[top.starts[two_terminal]]
        b[two_terminal] = top.ids[top.starts[two_terminal] + 1]
        return ElementArrays(kind, value, a, b)

    @cached_property
    def _every_part(self) -> np.ndarray:
        """The connected part of each node (ground last) through every branch, current sources included."""
        return _parts(self, self.element_arrays.kind != ord("K"))[1]

    @cached_property
    def _conducting_part(self) -> np.ndarray:
        """The connected part of each node (ground last) through branches that fix a voltage relation."""
        arrays = self.element_arrays
        return _parts(self, ~arrays.of_kind(CURRENT_OUTPUT_KINDS | {"K"}))[1]

    @cached_property
    def _well_posed(self) -> bool:
        """Element values, references and voltage-source loops: checked once, as they depend on nothing else."""
        _check_elements(self)
        _check_references(self)
        _check_voltage_loops(self)
        return True

    def element(self, name: str) -> Element:
        """The element called ``name`` (case-insensitive)."""
        key = name.lower()
        for e in self.elements:
            if e.name == key:
                return e
        raise KeyError(name)

    def by_kind(self, kinds: str | Iterable[str]) -> tuple[Element, ...]:
        kinds = set(kinds)
        return tuple(e for e in self.elements if e.kind in kinds)

    def has_node(self, name: str) -> bool:
        n = canonical_node(name)
        return n == GROUND or n in self.node_index

    def with_elements(self, elements: Iterable[Element]) -> Network:
        return replace(self, elements=tuple(elements))

    def zero_sources(self) -> Network:
        """The same network with every independent source set to zero (dependent ones stay)."""
        return self.with_elements(replace(e, ac_mag=0.0) if e.kind in SOURCE_KINDS else e for e in self.elements)


def make_element(
    name: str,
    kind: str | None = None,
    nodes: Iterable[str] = (),
    value: float = 0.0,
    *,
    ac_mag: float = 0.0,
    ac_phase_deg: float = 0.0,
    control: str | None = None,
    coupled: tuple[str, str] | None = None,
    where: Location | None = None,
) -> Element:
    """Build an element with names canonicalised (lower case, ``gnd`` -> ``0``)."""
    name = name.strip().lower()
    kind = (kind or name[:1]).upper()
    return Element(
        name=name,
        kind=kind,
        nodes=tuple(canonical_node(n) for n in nodes),
        value=float(value),
        ac_mag=float(ac_mag),
        ac_phase_deg=float(ac_phase_deg),
        control=control.lower() if control else None,
        coupled=(coupled[0].lower(), coupled[1].lower()) if coupled else None,
        where=where,
    )


# --------------------------------------------------------------------------- validation


_EXPECTED_NODES = {"R": 2, "L": 2, "C": 2, "V": 2, "I": 2, "E": 4, "G": 4, "F": 2, "H": 2, "K": 0}


def validate(network: Network, port: Port | None = None) -> Network:
    """Refuse an ill-posed network with a message that names the element, its line and the fix.

    Returns the network unchanged so calls can be chained. What does not depend on the port is
    checked once per network: validating the same network again costs only the port checks.
    """
    network._well_posed  # noqa: B018 -- computed on first use (raising while ill-posed), then kept
    _check_connectivity(network, port)
    if port is not None:
        check_port(network, port)
    return network


def _fail(e: Element, message: str) -> NetworkError:
    return NetworkError(f"{e.name}: {message}", e.where)


def _parts(network: Network, chosen: np.ndarray) -> tuple[int, np.ndarray]:
    """How many connected parts the ``chosen`` elements' branches make, and each node's part (ground last)."""
    arrays = network.element_arrays
    size = len(network.nodes) + 1
    return connected_parts(arrays.a[chosen] % size, arrays.b[chosen] % size, size)  # ground (-1) is last


def _check_elements(network: Network) -> None:
    if not network.elements:
        raise NetworkError("the network has no elements; a netlist needs at least one element line")
    try:
        clean = _elements_look_clean(network)
    except (TypeError, ValueError, AttributeError, IndexError, OverflowError):
        clean = False  # something unusual: the element-by-element pass below says what
    if not clean:
        _check_each_element(network)


def _elements_look_clean(network: Network) -> bool:
    """True when no element breaks a rule of ``_check_each_element``, tested on whole columns at once.

    It may say False for a network that is fine (the slow pass then finds nothing), never True for
    one that is not: the slow pass runs only to name the first element at fault.
    """
    elements = network.elements
    arrays = network.element_arrays
    kind = arrays.kind
    if not arrays.of_kind(ALL_KINDS).all():
        return False
    expected = np.zeros(128, dtype=np.intp)
    for k, count in _EXPECTED_NODES.items():
        expected[ord(k)] = count
    if not np.array_equal(network._topology.counts, expected[kind]):
        return False
    # Names: equal names have equal hashes, so distinct hashes clear them all (a tie goes to the slow pass).
    hashes = np.sort(np.fromiter((hash(e.name) for e in elements), np.int64, len(elements)))
    if (hashes[1:] == hashes[:-1]).any():
        return False
    value = arrays.value
    # A sum is finite only if every term is (an overflow only sends a good network to the slow pass).
    if not (np.isfinite(value).all() and math.isfinite(sum(e.ac_mag + e.ac_phase_deg for e in elements))):
        return False
    is_ = {k: kind == ord(k) for k in "LCRKVEHI"}
    if any(elements[i].ac_mag < 0 for i in np.flatnonzero(is_["V"] | is_["I"]).tolist()):
        return False
    refused = (
        ((is_["L"] | is_["C"]) & (value <= 0))
        | (is_["K"] & ~((value > 0) & (value <= 1)))
        | ((is_["V"] | is_["E"] | is_["H"]) & (arrays.a == arrays.b))
    )
    if not network.allow_negative:
        refused |= is_["R"] & (value < 0)
    return not refused.any()


def _check_each_element(network: Network) -> None:
    seen: dict[str, Element] = {}
    for e in network.elements:
        if e.kind not in ALL_KINDS:
            raise _fail(e, f"unknown element kind {e.kind!r}; supported: R L C V I E F G H K")
        if e.name in seen:
            first = seen[e.name].where
            raise _fail(e, f"duplicate element name (first defined at {first}); give each element its own name")
        seen[e.name] = e
        if len(e.nodes) != _EXPECTED_NODES[e.kind]:
            raise _fail(e, f"expected {_EXPECTED_NODES[e.kind]} nodes, got {len(e.nodes)}")
        for label, number in (("value", e.value), ("AC magnitude", e.ac_mag), ("AC phase", e.ac_phase_deg)):
            if not math.isfinite(number):
                raise _fail(e, f"{label} is {number}; give a finite number")
        if e.kind in "LC" and e.value <= 0:
            unit = "H" if e.kind == "L" else "F"
            raise _fail(
                e,
                f"{'inductance' if e.kind == 'L' else 'capacitance'} must be positive (got {e.value} {unit}); "
                "remove the element or give it a positive value",
            )
        if e.kind == "R" and e.value < 0 and not network.allow_negative:
            raise _fail(
                e,
                f"negative resistance ({e.value} Ω) is refused; allow active models explicitly "
                "(--allow-negative) if it is intended",
            )
        if e.kind == "K" and not (0 < e.value <= 1):
            raise _fail(e, f"coupling coefficient must be in (0, 1] (got {e.value}); k > 1 is not physical")
        if e.kind in "VEH" and e.nodes[0] == e.nodes[1]:
            raise _fail(
                e,
                f"both terminals are on node {e.nodes[0]!r}: a voltage source shorted on itself; "
                "connect it between two different nodes",
            )
        if e.kind in "VI" and e.ac_mag < 0:
            raise _fail(e, f"AC magnitude must not be negative (got {e.ac_mag}); add 180° to the phase instead")


def _check_references(network: Network) -> None:
    referring = np.flatnonzero(network.element_arrays.of_kind("FHK"))
    if not referring.size:
        return
    by_name = {e.name: e for e in network.elements}
    coupled_pairs: set[frozenset[str]] = set()
    for e in (network.elements[i] for i in referring.tolist()):
        if e.kind in CURRENT_CONTROLLED:
            ctl = by_name.get(e.control or "")
            if ctl is None or ctl.kind != "V":
                found = f" ({ctl.name} is a {ctl.kind} element)" if ctl is not None else ""
                raise _fail(
                    e,
                    f"controlling source {e.control!r} is not a voltage source in this network{found}; "
                    "name an independent V element (add a 0 V source in series to sense a current)",
                )
        if e.kind == "K":
            assert e.coupled is not None
            for lname in e.coupled:
                target = by_name.get(lname)
                if target is None or target.kind != "L":
                    raise _fail(e, f"couples {lname!r}, which is not an inductor in this network")
            if e.coupled[0] == e.coupled[1]:
                raise _fail(e, f"couples {e.coupled[0]!r} with itself; name two different inductors")
            pair = frozenset(e.coupled)
            if pair in coupled_pairs:
                raise _fail(e, f"a second coupling between {e.coupled[0]} and {e.coupled[1]}; keep one K per pair")
            coupled_pairs.add(pair)


def _check_voltage_loops(network: Network) -> None:
    """Voltage sources (and ideal shorts) closing a loop make the MNA matrix singular at every frequency.

    A graph is a forest exactly when its branches number its nodes less its connected parts; only
    when they number more is there a loop, and the union-find walk then names the branch closing it.
    """
    arrays = network.element_arrays
    fixing = arrays.of_kind("VEH") | ((arrays.kind == ord("R")) & (arrays.value == 0.0))
    parts, _ = _parts(network, fixing)
    if int(fixing.sum()) <= len(network.nodes) + 1 - parts:
        return
    uf = UnionFind()
    for e in network.elements:
        if e.kind in "VEH" or e.is_short:
            a, b = e.terminals
            if not uf.union(a, b):
                raise _fail(
                    e,
                    "closes a loop of voltage sources and ideal shorts (R = 0); "
                    "the loop's voltages over-determine the network: remove one or add series resistance",
                )


def _check_connectivity(network: Network, port: Port | None) -> None:
    """Every node needs a voltage: a conducting path (not only current sources) to ground, or to the port.

    A part of the network joined to the rest only through current sources, or not at all, has no
    defined voltage. A part with no ground may stand on its own only if it holds the whole port
    (a floating port, such as a transformer secondary): it is then referred to the port's b node.
    """
    conducting = network._conducting_part
    away = np.flatnonzero(conducting != conducting[-1])
    if not away.size:
        return
    every = network._every_part
    nodes = network.nodes
    by_part: dict[int, list[str]] = defaultdict(list)
    for i in away.tolist():
        by_part[int(conducting[i])].append(nodes[i])
    arrays = network.element_arrays
    current_output = arrays.of_kind(CURRENT_OUTPUT_KINDS)
    # Part by part in the order of their first node name, each listed in name order.
    for members in sorted((sorted(m) for m in by_part.values()), key=lambda m: m[0]):
        names = ", ".join(members[:8]) + (" …" if len(members) > 8 else "")
        holds_port = port is not None and port.a in members and port.b in members
        part = conducting[network.node_index[members[0]]]
        touches_current_source = every[network.node_index[members[0]]] == every[-1] or bool(
            np.any(current_output & ((conducting[arrays.a] == part) != (conducting[arrays.b] == part)))
        )
        if touches_current_source:
            raise NetworkError(
                f"node(s) {names} are reached only through current sources: their voltage is undefined "
                "(a cut set of current sources); add a resistive path to ground or to the rest of the network",
                _first_where(network, members),
            )
        if holds_port:
            continue
        where = "neither to ground nor to the port" if port is not None else "not to ground"
        raise NetworkError(
            f"node(s) {names} are connected {where}: a floating part of the network; "
            "connect it, remove it, or choose a port inside it",
            _first_where(network, members),
        )


def _first_where(network: Network, nodes: Iterable[str]) -> Location | None:
    """Where the first element touching any of ``nodes`` was defined, so the message can name a line."""
    top = network._topology
    wanted = np.zeros(len(top.nodes) + 1, dtype=bool)  # the last entry, ground, is never wanted
    wanted[[top.positions[n] for n in nodes if n in top.positions]] = True
    hits = np.flatnonzero(wanted[top.ids])
    if not hits.size:
        return None
    first = int(np.searchsorted(top.starts, hits[0], side="right")) - 1
    return network.elements[first].where


def check_port(network: Network, port: Port) -> None:
    """The port's nodes must exist and be distinct."""
    for n in port:
        if not network.has_node(n):
            known = ", ".join(sorted(network.nodes)[:12])
            raise PortError(f"port node {n!r} is not in the network (nodes: 0, {known}); check the spelling")
    if port.a == port.b:
        raise PortError(f"the port's two nodes are both {port.a!r}; name two different nodes")


def floating_reference(network: Network, port: Port) -> str | None:
    """The node that stands in for ground when the port sits in a part with no ground (else None)."""
    if port.b == GROUND:
        return None
    i = network.node_index.get(port.b)
    if i is None:  # not in the network: a part of its own
        return port.b
    every = network._every_part
    return port.b if every[i] != every[-1] else None
