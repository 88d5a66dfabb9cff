"""Hypothesis strategies for well-posed linear AC networks, for property tests (ours and users').

Every network drawn here passes ``model.validation.validate`` by construction, not by
filtering: a spanning tree of R/L/C branches from ground gives every node a
conducting path (so no cut set of current sources), voltage-defined branches
(V, E, H) are placed with a union-find so they never close a loop, F and H sense
the current of an existing V (a 0 V source is put in series with an element when
needed), and K couples disjoint pairs of inductors with 0 < k < 1, which keeps
the inductance matrix positive definite (passive).

Default value centres make R, ωL and 1/(ωC) all about 1 kΩ at ``F_CENTRE``
(√(L/C) = R), so reactances are comparable and the MNA matrix is well
conditioned. Networks may still be singular at particular frequencies (an
inductor loop at DC, a lossless resonance): tests filter on the solver's
condition estimate, not this module.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import replace

from hypothesis import strategies as st
from hypothesis.errors import InvalidArgument

from crosscheck.fuzz.generate import generate_case
from crosscheck.fuzz.knobs import ALL_KINDS, CENTRES, F_CENTRE, FAMILIES, GAIN_CENTRES, MIXED, SOURCE_CENTRES, Knobs
from crosscheck.model.graph import UnionFind
from crosscheck.model.network import GROUND, Element, Network, Port, make_element
from crosscheck.model.validation import validate

__all__ = [
    "CENTRES",
    "F_CENTRE",
    "frequencies",
    "network_and_port",
    "networks",
    "ports",
]

_GAIN_DECADES = (-1.0, 0.3)  # dependent-source gains between 0.1 and 2 (times R or 1/R for H and G)


def _passive_kinds(kinds: str, lossless: bool, single_reactive: str | None) -> str:
    allowed = "".join(k for k in "RLC" if k in kinds)
    if lossless:
        allowed = allowed.replace("R", "")
    if single_reactive == "C":
        allowed = allowed.replace("L", "")
    elif single_reactive == "L":
        allowed = allowed.replace("C", "")
    elif single_reactive is not None:
        raise InvalidArgument(f"single_reactive must be None, 'L' or 'C' (got {single_reactive!r})")
    if not allowed:
        raise InvalidArgument(
            f"kinds={kinds!r} with lossless={lossless}, single_reactive={single_reactive!r} "
            "leaves no R, L or C for the spanning tree; allow at least one of them"
        )
    return allowed


def _scaled(draw: st.DrawFn, centre: float, decades: tuple[float, float]) -> float:
    return centre * 10.0 ** draw(st.floats(decades[0], decades[1]))


def _gain(draw: st.DrawFn, centre: float = 1.0) -> float:
    """A gain of either sign; it shrinks towards the smallest magnitude, not towards 1, since a unit gain
    often cancels exactly (E across its own control, F feeding its sensing source) and makes a singular network."""
    sign = draw(st.sampled_from((1.0, -1.0)))
    low, high = _GAIN_DECADES
    return sign * centre * 10.0 ** (low + draw(st.floats(0.0, high - low)))


def _pair(draw: st.DrawFn, nodes: list[str]) -> tuple[str, str]:
    a = draw(st.sampled_from(nodes))
    b = draw(st.sampled_from([n for n in nodes if n != a]))
    return a, b


class _Builder:
    """Collects elements with unique names per kind (r1, r2, l1, ...)."""

    def __init__(self) -> None:
        self.elements: list[Element] = []
        self._count: dict[str, int] = {}

    def name(self, prefix: str) -> str:
        self._count[prefix] = self._count.get(prefix, 0) + 1
        return f"{prefix}{self._count[prefix]}"

    def add(self, kind: str, nodes: Iterable[str], value: float = 0.0, prefix: str | None = None, **kw) -> Element:
        e = make_element(self.name(prefix or kind.lower()), kind, tuple(nodes), value, **kw)
        self.elements.append(e)
        return e


def _passive(
    draw: st.DrawFn, b: _Builder, kinds: str, nodes: tuple[str, str], decades: tuple[float, float], suffix: str = ""
) -> Element:
    kind = draw(st.sampled_from(kinds))
    return b.add(kind, nodes, _scaled(draw, CENTRES[kind], decades), prefix=kind.lower() + suffix)


def _source(draw: st.DrawFn, b: _Builder, kind: str, nodes: tuple[str, str], decades: tuple[float, float]) -> None:
    b.add(kind, nodes, ac_mag=_scaled(draw, SOURCE_CENTRES[kind], decades), ac_phase_deg=draw(st.floats(-180.0, 180.0)))


def _add_sense_source(draw: st.DrawFn, b: _Builder, node: str) -> Element:
    """Split a passive element with a fresh node and a 0 V source in series, to sense its current."""
    passives = [i for i, e in enumerate(b.elements) if e.kind in "RLC"]
    i = draw(st.sampled_from(passives))
    e = b.elements[i]
    b.elements[i] = replace(e, nodes=(e.nodes[0], node))
    return b.add("V", (node, e.nodes[1]), prefix="vs")


@st.composite
def networks(
    draw: st.DrawFn,
    min_nodes: int = 2,
    max_nodes: int = 8,
    kinds: str = ALL_KINDS,
    passive_only: bool = False,
    lossless: bool = False,
    single_reactive: str | None = None,
    value_decades: tuple[float, float] = (-1.0, 1.0),
    max_extra: int = 6,
    coupling: tuple[float, float] = (0.1, 0.95),
    min_sources: int = 1,
) -> Network:
    """A valid network of ``min_nodes``..``max_nodes`` non-ground nodes.

    ``kinds`` limits the element letters; ``passive_only`` drops dependent sources (E F G H);
    ``lossless`` drops R; ``single_reactive`` = "C" (RC) or "L" (RL, K allowed) keeps one reactive kind.
    Values are ``centre · 10**u`` with u in ``value_decades``; ``max_extra`` elements are added to the
    tree; at least ``min_sources`` independent sources when V or I is allowed.
    """
    kinds = kinds.upper()
    if not 1 <= min_nodes <= max_nodes:
        raise InvalidArgument(f"need 1 <= min_nodes <= max_nodes (got {min_nodes}, {max_nodes})")
    if not 0.0 < coupling[0] <= coupling[1] <= 1.0:
        raise InvalidArgument(f"coupling must satisfy 0 < low <= high <= 1 (got {coupling})")
    passive = _passive_kinds(kinds, lossless, single_reactive)
    dependent = "" if passive_only else "".join(k for k in "EFGH" if k in kinds)
    sources = "".join(k for k in "VI" if k in kinds)
    extra_kinds = passive + sources + dependent

    extras = draw(st.lists(st.sampled_from(extra_kinds), max_size=max_extra))
    if sources:
        missing = max(0, min_sources - sum(k in "VI" for k in extras))
        extras = [draw(st.sampled_from(sources)) for _ in range(missing)] + extras
    wants_sense = any(k in "FH" for k in extras)
    n = draw(st.integers(min_nodes, max_nodes))
    # A sensing source takes a node of the budget; with one node only, F and H are left out.
    sense = wants_sense and n >= 2 and ("V" not in extras or draw(st.booleans()))
    if wants_sense and not sense and "V" not in extras:
        extras = [k for k in extras if k not in "FH"]
    tree_nodes = [f"n{i}" for i in range(1, n + (0 if sense else 1))]

    b = _Builder()
    loops = UnionFind()
    everything = [GROUND]
    for node in tree_nodes:
        parent = draw(st.sampled_from(everything))
        _passive(draw, b, passive, (node, parent) if draw(st.booleans()) else (parent, node), value_decades)
        everything.append(node)
    if sense:
        vs = _add_sense_source(draw, b, f"n{n}")
        loops.union(*vs.terminals)
        everything.append(f"n{n}")

    _add_extras(draw, b, loops, extras, everything, value_decades)

    if "K" in kinds and "L" in passive:
        _couple(draw, b, coupling)
    return validate(Network("hypothesis network", tuple(b.elements)))


def _add_extras(
    draw: st.DrawFn,
    b: _Builder,
    loops: UnionFind,
    extras: list[str],
    everything: list[str],
    value_decades: tuple[float, float],
) -> None:
    """The elements beyond the spanning tree; V, E and H only where no loop of voltage-defined branches closes."""
    for kind in sorted(extras, key=lambda k: k in "FH"):  # F and H last: their control must exist
        if kind in "EG" and len(everything) < 3:  # the control pair would be the output pair itself
            continue
        if kind in "RLCIGF":
            nodes = _pair(draw, everything)
        else:  # V, E, H: only where no loop of voltage-defined branches closes
            pairs = loops.open_pairs(everything)
            if not pairs:
                continue
            nodes = draw(st.sampled_from(pairs))
            if draw(st.booleans()):
                nodes = nodes[::-1]
            loops.union(*nodes)
        if kind in "RLC":
            b.add(kind, nodes, _scaled(draw, CENTRES[kind], value_decades))
        elif kind in "VI":
            _source(draw, b, kind, nodes, value_decades)
        elif kind in "EG":
            others = [(p, q) for p in everything for q in everything if p != q and {p, q} != set(nodes)]
            control = draw(st.sampled_from(others))
            gain = _gain(draw, GAIN_CENTRES[kind])
            b.add(kind, nodes + control, gain)
        else:  # F, H
            controls = [e.name for e in b.elements if e.kind == "V"]
            if not controls:  # every loop-free place was taken before a V could be put down
                continue
            gain = _gain(draw, GAIN_CENTRES[kind])
            b.add(kind, nodes, gain, control=draw(st.sampled_from(controls)))


def _couple(draw: st.DrawFn, b: _Builder, coupling: tuple[float, float]) -> None:
    """K elements between disjoint pairs of uncoupled inductors (so the inductance matrix stays positive definite)."""
    taken = {n for e in b.elements if e.kind == "K" for n in e.coupled or ()}
    free = [e.name for e in b.elements if e.kind == "L" and e.name not in taken]
    if len(free) < 2:
        return
    order = draw(st.permutations(free))
    pairs = [(order[i], order[i + 1]) for i in range(0, len(order) - 1, 2)]
    count = draw(st.integers(0, len(pairs)))
    for pair in pairs[:count]:
        b.add("K", (), draw(st.floats(*coupling)), coupled=pair)


def ports(network: Network) -> st.SearchStrategy[Port]:
    """Two distinct nodes of ``network`` (ground included) as a port."""
    nodes = [GROUND, *network.nodes]
    return st.sampled_from([Port(a, b) for a in nodes for b in nodes if a != b])


def frequencies(
    min_hz: float = F_CENTRE / 10.0, max_hz: float = F_CENTRE * 10.0, dc: bool = False
) -> st.SearchStrategy[float]:
    """Frequencies in hertz, log-uniform over [min_hz, max_hz]; with ``dc`` also 0 Hz."""
    if not 0.0 < min_hz <= max_hz or not math.isfinite(max_hz):
        raise InvalidArgument(f"need 0 < min_hz <= max_hz < inf (got {min_hz}, {max_hz})")
    positive = st.floats(math.log10(min_hz), math.log10(max_hz)).map(lambda u: min(max(10.0**u, min_hz), max_hz))
    return st.one_of(st.just(0.0), positive) if dc else positive


@st.composite
def network_and_port(draw: st.DrawFn, floating: bool | None = None, **network_kwargs) -> tuple[Network, Port]:
    """A network and a valid port; ``floating`` adds a transformer secondary with no ground and puts the port on it.

    ``floating=None`` draws whether to (when K and L are allowed); the secondary takes two or three
    nodes of the ``max_nodes`` budget.
    """
    kinds = network_kwargs.get("kinds", ALL_KINDS).upper()
    passive = _passive_kinds(kinds, network_kwargs.get("lossless", False), network_kwargs.get("single_reactive"))
    possible = "K" in kinds and "L" in passive
    if floating is None:
        floating = possible and draw(st.booleans())
    elif floating and not possible:
        raise InvalidArgument("a floating port needs K and L among the allowed kinds")
    if not floating:
        network = draw(networks(**network_kwargs))
        return network, draw(ports(network))

    secondary = draw(st.integers(2, 3))
    main_max = max(1, network_kwargs.get("max_nodes", 8) - secondary)
    main_kwargs = dict(network_kwargs, max_nodes=main_max, min_nodes=min(network_kwargs.get("min_nodes", 2), main_max))
    network = draw(networks(**main_kwargs))
    decades = network_kwargs.get("value_decades", (-1.0, 1.0))
    b = _Builder()  # new names carry a "t" or "p" so they never clash with the main network's
    b.elements = list(network.elements)
    taken = {n for e in b.elements if e.kind == "K" for n in e.coupled or ()}
    free = [e.name for e in b.elements if e.kind == "L" and e.name not in taken]
    if free:
        primary = draw(st.sampled_from(free))
    else:
        primary = b.add(
            "L", (draw(st.sampled_from(network.nodes)), GROUND), _scaled(draw, CENTRES["L"], decades), prefix="lp"
        ).name
    t = [f"t{i}" for i in range(1, secondary + 1)]
    winding = b.add(
        "L", (t[0], t[1]) if draw(st.booleans()) else (t[1], t[0]), _scaled(draw, CENTRES["L"], decades), prefix="lt"
    )
    b.add(
        "K",
        (),
        draw(st.floats(*network_kwargs.get("coupling", (0.1, 0.95)))),
        coupled=(primary, winding.name),
        prefix="kt",
    )
    if draw(st.booleans()):
        _passive(draw, b, passive, (t[0], t[1]), decades, suffix="t")
    if secondary == 3:
        _passive(draw, b, passive, (t[2], draw(st.sampled_from(t[:2]))), decades, suffix="t")
    port = Port(*_pair(draw, t))
    result = Network("hypothesis network, floating port", tuple(b.elements))
    return validate(result, port), port


# --------------------------------------------------------------------------- topology families
# The seeded generator behind `crosscheck fuzz` (crosscheck.fuzz.generate), offered as strategies with its knobs.
# Hypothesis draws a seed and the generator draws the case from it: a failing example shrinks towards a smaller
# seed and an earlier family, not towards a smaller network (`crosscheck fuzz` shrinks networks itself), and
# the reported seed rebuilds the case with ``generate_case(seed, Knobs(...))``.


def generated_cases(
    family: str | None = None,
    min_nodes: int = 2,
    max_nodes: int = 8,
    kinds: str = ALL_KINDS,
    decades: float = 1.0,
    min_hz: float = F_CENTRE / 100.0,
    max_hz: float = F_CENTRE * 100.0,
    max_freqs: int = 3,
    dc: bool = True,
) -> st.SearchStrategy:
    """``GeneratedCase`` objects (network, port, frequencies, caveat) from a topology family.

    ``family``: ``ladder``, ``grid``, ``random``, ``tree``, ``bridge`` or ``awkward``; ``None`` draws one of
    the five well-posed families, ``"mixed"`` any of the six. Awkward cases may carry a ``caveat`` saying
    which answers may legitimately be missing. The other knobs are ``crosscheck.fuzz.generate.Knobs``'.
    """
    try:
        knobs = Knobs(
            min_nodes=min_nodes,
            max_nodes=max_nodes,
            kinds=kinds,
            decades=decades,
            min_hz=min_hz,
            max_hz=max_hz,
            max_freqs=max_freqs,
            dc=dc,
            family=family or MIXED,
        )
    except ValueError as exc:
        raise InvalidArgument(str(exc)) from None
    if family is None:
        chosen = st.sampled_from(FAMILIES[:-1])
    elif family == MIXED:
        chosen = st.sampled_from(FAMILIES)
    else:
        chosen = st.just(family)
    return st.builds(
        lambda seed, fam: generate_case(seed, replace(knobs, family=fam)), st.integers(0, 2**63 - 1), chosen
    )


def family_networks(family: str | None = None, **knobs) -> st.SearchStrategy[Network]:
    """Networks of a topology family (knobs as ``generated_cases``); compose with ``ports`` and ``frequencies``."""
    return generated_cases(family, **knobs).map(lambda case: case.network)


def family_network_and_port(family: str | None = None, **knobs) -> st.SearchStrategy[tuple[Network, Port]]:
    """A network of a topology family and the port the generator chose for it (never one through E or H)."""
    return generated_cases(family, **knobs).map(lambda case: (case.network, case.port))


__all__ += ["family_network_and_port", "family_networks", "generated_cases"]
