"""The immutable network model that every engine and report works from.

Nothing downstream of the reader sees user text: only ``Network`` and
``Element``. Node names are lower-case strings; ground is ``"0"`` (``gnd`` is
an alias). ``model.validation`` refuses a network that would make either
engine silently wrong before it runs; this module holds the model it checks.
"""

from __future__ import annotations

import itertools
import math
from collections import defaultdict
from collections.abc import Iterable, Iterator
from dataclasses import dataclass, field, fields, replace
from functools import cached_property, lru_cache
from operator import attrgetter
from typing import NamedTuple

import numpy as np

from crosscheck.errors import Location, NetlistError, PortError
from crosscheck.model.graph import connected_parts

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
    phasor is ``ac_mag`` at ``ac_phase_deg`` degrees and whose DC value (the excitation of a
    network read under DC, see ``dc_view``) is ``dc_value``. ``dc_unknown`` says why the reader
    could not tell the DC value ngspice's operating point would use (None: ``dc_value`` is it).
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
    dc_value: float = 0.0
    dc_unknown: str | None = field(default=None, compare=False, repr=False)

    @property
    def terminals(self) -> tuple[str, str]:
        """The two nodes the element's own branch connects (its output for controlled sources)."""
        return (self.nodes[0], self.nodes[1])

    @property
    def phasor(self) -> complex:
        """The AC phasor of an independent source, as written (peak or RMS is the case's convention).

        0° and 180° give an exactly real phasor (a DC value carried as a phasor stays real, ``dc_view``)."""
        if self.ac_phase_deg in (0.0, 180.0):
            return complex(-self.ac_mag if self.ac_phase_deg else self.ac_mag)
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
        table = _kind_table(frozenset(kinds))
        if table is None:  # a kind outside ASCII: one comparison per kind
            mask = np.zeros(len(self.kind), dtype=bool)
            for k in kinds:
                mask |= self.kind == ord(k)
            return mask
        # One look-up in a table of the ASCII code points (codes past it clip to its last entry, False).
        return np.take(table, self.kind, mode="clip")


@lru_cache(maxsize=64)
def _kind_table(kinds: frozenset[str]) -> np.ndarray | None:
    """A table over the ASCII code points (and one more, False, for any code past them): True at ``kinds``;
    None when a kind is not one ASCII character."""
    if any(len(k) != 1 or ord(k) >= 128 for k in kinds):
        return None
    table = np.zeros(129, dtype=bool)
    table[[ord(k) for k in kinds]] = True
    table.flags.writeable = False
    return table


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
    #: The user's own lines the reader accepted (element, subcircuit, parameter and model cards), for the
    #: reading check that ngspice makes from the text itself (``spice.reading``); () when not read from text.
    source_lines: tuple[str, ...] = field(default=(), compare=False, repr=False)
    #: What excites the network: "ac" (the sources' AC phasors, at any frequency) or "dc" (their DC values,
    #: at 0 Hz only; every route solves ``dc_view(network)`` and ngspice's route uses ``.op``).
    excitation: str = "ac"

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
        return node_parts(self, self.element_arrays.kind != ord("K"))[1]

    @cached_property
    def _conducting_part(self) -> np.ndarray:
        """The connected part of each node (ground last) through branches that fix a voltage relation."""
        arrays = self.element_arrays
        return node_parts(self, ~arrays.of_kind(CURRENT_OUTPUT_KINDS | {"K"}))[1]

    @cached_property
    def _checks_passed(self) -> set[str]:
        """The port-independent checks this network has passed, so ``validate`` runs them once per network."""
        return set()

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
        return self.with_elements(
            replace(e, ac_mag=0.0, dc_value=0.0, dc_unknown=None) if e.kind in SOURCE_KINDS else e
            for e in self.elements
        )


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
    dc_value: float = 0.0,
    dc_unknown: str | None = None,
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
        dc_value=float(dc_value),
        dc_unknown=dc_unknown,
    )


EXCITATIONS = ("ac", "dc")


def dc_view(network: Network) -> Network:
    """The network as its DC excitation drives it: each V/I source's DC value as its (real) phasor.

    Under ``excitation == "dc"`` both routes solve this view at 0 Hz, so the own solver needs no case of
    its own: a DC value d becomes AC magnitude |d| at 0° (180° when d < 0), which ``Element.phasor``
    gives back exactly real. The view is idempotent. A source whose DC value the reader could not tell
    (``Element.dc_unknown``) is refused here, naming its file and line, rather than read as 0.
    """
    for e in network.elements:
        if e.kind in SOURCE_KINDS and e.dc_unknown is not None:
            raise NetlistError(f"{e.name}: {e.dc_unknown}", e.where)
    return network.with_elements(
        replace(e, ac_mag=abs(e.dc_value), ac_phase_deg=180.0 if e.dc_value < 0 else 0.0)
        if e.kind in SOURCE_KINDS
        else e
        for e in network.elements
    )


def check_excitation(excitation: str, freqs: Iterable[float], where: str) -> None:
    """``excitation`` is "ac" or "dc", and under "dc" every frequency is 0 Hz; ``where`` names the setting."""
    if excitation not in EXCITATIONS:
        raise ValueError(f"{where}: excitation must be 'ac' or 'dc' (got {str(excitation)[:40]!r})")
    if excitation == "dc":
        other = [f for f in freqs if f != 0]
        if other:
            raise ValueError(
                f"{where}: {other[0]!r} Hz with DC excitation; a DC network is solved at 0 Hz only: "
                "give no frequency (or 0), or use excitation 'ac'"
            )


def node_parts(network: Network, chosen: np.ndarray) -> tuple[int, np.ndarray]:
    """How many connected parts the ``chosen`` elements' branches make, and each node's part (ground last)."""
    arrays = network.element_arrays
    size = len(network.nodes) + 1
    return connected_parts(arrays.a[chosen] % size, arrays.b[chosen] % size, size)  # ground (-1) is last


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
