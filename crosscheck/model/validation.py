"""Validation: refuse a network that would make either engine silently wrong, before it runs.

ngspice quietly accepts R = 0 as 1 mΩ, L or C <= 0, k > 1, and ties a node reached only by current
sources to ground, so ``validate`` refuses those first, with a message that names the element, its
line and the fix: bad element values and names, references to missing elements, loops of voltage
sources, and parts of the network whose voltage is undefined. The model it checks is
``model.network``; the column-wise pass ``_elements_look_clean`` clears a large network at once, and
the element-by-element pass runs only to name the first fault.
"""

from __future__ import annotations

import math
from collections import defaultdict
from collections.abc import Iterable

import numpy as np

from crosscheck.errors import Location, NetworkError
from crosscheck.model.graph import UnionFind
from crosscheck.model.network import (
    ALL_KINDS,
    CURRENT_CONTROLLED,
    CURRENT_OUTPUT_KINDS,
    Element,
    Network,
    Port,
    check_port,
    node_parts,
)

_EXPECTED_NODES = {"R": 2, "L": 2, "C": 2, "V": 2, "I": 2, "E": 4, "G": 4, "F": 2, "H": 2, "K": 0}
_WELL_POSED = "well-posed"
#: A nonzero resistance smaller in size, or an L or C larger, is refused: 1/R, ω·L and ω·C at up to
#: 1e15 Hz must stay far from a double's overflow (1e-320 ohms would make 1/R infinite).
MIN_RESISTANCE = 1e-100
MAX_REACTIVE = 1e100  # the name of the port-independent checks in ``Network._checks_passed``


#: Up to this many elements the checks run element by element: at a dozen elements that is ~10x quicker
#: than the column-wise test's fixed cost of some thirty numpy calls (the two say the same).
ELEMENT_BY_ELEMENT = 64


def validate(network: Network, port: Port | None = None) -> Network:
    """Refuse an ill-posed network with a message that names the element, its line and the fix.

    Returns the network unchanged so calls can be chained. What does not depend on the port is
    checked once per network: validating the same network again costs only the port checks.
    """
    if _WELL_POSED not in network._checks_passed:
        _check_elements(network)
        _check_references(network)
        _check_voltage_loops(network)
        network._checks_passed.add(_WELL_POSED)
    _check_connectivity(network, port)
    if port is not None:
        check_port(network, port)
    return network


def _fail(e: Element, message: str) -> NetworkError:
    return NetworkError(f"{e.name}: {message}", e.where)


def _check_elements(network: Network) -> None:
    if not network.elements:
        raise NetworkError("the network has no elements; a netlist needs at least one element line")
    if len(network.elements) <= ELEMENT_BY_ELEMENT:
        _check_each_element(network)
        return
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
    magnitude = np.abs(value)
    tiny_r = (kind == ord("R")) & (magnitude != 0) & (magnitude < MIN_RESISTANCE)
    huge_lc = ((kind == ord("L")) | (kind == ord("C"))) & (magnitude > MAX_REACTIVE)
    if (tiny_r | huge_lc).any():
        return False
    is_ = {k: kind == ord(k) for k in "LCRKVEHI"}
    if any(elements[i].ac_mag < 0 for i in np.flatnonzero(is_["V"] | is_["I"]).tolist()):
        return False
    refused = (
        ((is_["L"] | is_["C"]) & (value <= 0))
        | (is_["K"] & ~((value != 0) & (np.abs(value) <= 1)))
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
        if (e.kind == "R" and e.value != 0 and abs(e.value) < MIN_RESISTANCE) or (
            e.kind in "LC" and e.value > MAX_REACTIVE
        ):
            raise _fail(
                e,
                f"value {e.value:g} is outside the range the engines compute with (a resistance at least "
                f"{MIN_RESISTANCE:g} Ω in size, L and C at most {MAX_REACTIVE:g}): its conductance or "
                "its reactance would overflow; give a value in that range",
            )
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
        if e.kind == "K" and not (0 < abs(e.value) <= 1):
            raise _fail(
                e,
                f"coupling coefficient must be in [-1, 0) or (0, 1] (got {e.value}); |k| > 1 is not physical "
                "and k = 0 couples nothing (a negative k reverses one dot)",
            )
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
    parts, _ = node_parts(network, fixing)
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
