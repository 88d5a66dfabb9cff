"""Write the ngspice decks for the three independent routes to an equivalent.

The deck is written afresh from the ``Network`` model, never from user text:
every node becomes ``n1..nN`` (ground ``0``), every element its kind letter
plus its position (``R1``, ``V3``, ...), every number ``repr(float)``. So no
user name, comment or stray control card can reach ngspice, and ``names``
maps each deck name back to the model's.

The three runs (Thevenin 1883, Norton 1926: any two give the third):

* ``open``:  the network as it is; V_th = V(a) - V(b).
* ``short``: a 0 V source ``VPORT a b`` across the port; I_N = i(VPORT), which
  SPICE counts flowing into the + terminal, i.e. from a through the short to b.
* ``test``:  independent sources set to zero (dependent ones stay), 1 A driven
  into a and out of b; Z_th = V(a) - V(b).

Facts of ngspice 39 that shape the deck: ``.ac lin 2 f1 f2`` yields one point
(so linear grids need three or more), ``.ac list`` does not exist, several
``.ac`` cards each give their own plot in no promised order, R = 0 is read as
1 mΩ (so an ideal short is written as a 0 V source), and a source without a
DC value prints a note that PySpice takes for an error (so every source says
``DC 0``). ``.options noopac`` skips the operating point, which a linear
network does not need and which fails where a node has no DC path.
``pivrel=1`` makes ngspice's threshold pivoting choose the largest pivot of a
column, as partial pivoting does: with its default (1e-3) ngspice keeps the
pivot order of the analysis it ran before, and on a network whose pivots
change size with frequency that cost 1e-5 relative accuracy at condition 164
(fuzz seed 1001640); with pivrel=1 the same point agrees to 1e-11.

Which options a deck gets is ``deck_options`` (measured with the packaged ngspice 39 shared library,
Sparse 1.3, no KLU compiled in, on this 2-core machine shared with other work, so times are +-30 %):

* the loss above comes from reusing a pivot order along a sweep: the same three frequencies of seed
  1001640 run one per deck with the default pivrel agree with the own solver to 9e-10 (V_th 1.2e-10,
  I_N 9.1e-10, Z_th 4e-19), so ``pivrel=1`` is kept for decks that sweep several frequencies only;
* its cost at scale depends on the network: a power grid of two full meshes (``fuzz.large.powergrid``,
  ``mesh=True``; 10,082 nodes, 22,741 elements) at one frequency in the combined deck took 38.0 s
  with the default pivrel and 92.1 s with pivrel=1 (ordering the matrix is nearly all of it: ngspice's
  ``rusage`` says "Matrix reorder time"); a grid of rails and straps (30,070 nodes, 48,034 elements,
  separate decks) 9.0 s with the default and 8.4 s with pivrel=1;
* ``.options klu`` is written only when the loaded library has KLU (``Engine.klu``): this library
  accepts the option silently and ignores it (10k mesh grid: 40.6 s with it, 38.0 s without; 30k
  rails-and-straps grid: 8.7 s with it, 9.0 s without; the library holds no KLU code), so the option
  alone says nothing about the solver used. Whether ``pivrel=1`` is still needed with KLU could not
  be measured here for want of a KLU build; the rule above keeps it along sweeps either way.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Literal

from crosscheck.model.frequencies import checked_frequencies, frequency_list
from crosscheck.model.graph import UnionFind
from crosscheck.model.network import GROUND, Element, Network, Port, floating_reference
from crosscheck.model.validation import validate

Run = Literal["open", "short", "test"]
RUNS: tuple[Run, ...] = ("open", "short", "test")

#: How exactly requested frequencies must follow a decade or linear grid to be sent as one sweep card.
_GRID_REL = 1e-12

PORT_SOURCE = "VPORT"
TEST_SOURCE = "ITEST"


@dataclass(frozen=True)
class Probe:
    """What to read from a run's plot: a node-voltage difference or a branch current (ngspice vector names)."""

    run: Run
    plus: str | None = None  # vector of V(a); None when a is ground
    minus: str | None = None  # vector of V(b); None when b is ground
    current: str | None = None  # branch-current vector, for the short run

    @property
    def vectors(self) -> tuple[str, ...]:
        return tuple(v for v in (self.plus, self.minus, self.current) if v is not None)


@dataclass(frozen=True)
class Deck:
    """One ngspice deck: its text, what it measures, and how its names map back to the model."""

    text: str
    runs: tuple[Run, ...]
    probes: Mapping[str, Probe]
    freqs: tuple[float, ...]  # distinct frequencies the analysis cards ask for
    cards: tuple[str, ...]
    names: Mapping[str, str] = field(repr=False)  # deck name (node or element) -> model name


def check_freqs(freqs: Iterable[float]) -> tuple[float, ...]:
    """Frequencies as floats, refusing what no AC analysis can mean."""
    return checked_frequencies(freqs, where="frequencies")


def port_is_voltage_defined(network: Network, port: Port) -> bool:
    """True when voltage-defined branches (V, E, H, ideal shorts) alone join a and b.

    Shorting such a port closes a loop of voltage-defined branches, which makes
    the shorted run singular, so ngspice cannot give I_N by its own route. With
    only V sources and shorts Z_th = 0 (no Norton form); a controlled source (E,
    H) in the path can leave Z_th finite, and I_N then comes from V_th / Z_th only.
    """
    uf = UnionFind()
    for e in network.elements:
        if e.kind in "VEH" or e.is_short:
            uf.union(*e.terminals)
    return uf.find(port.a) == uf.find(port.b)


def analysis_cards(freqs: Sequence[float], *, grids: bool = True) -> tuple[str, ...]:
    """``.ac`` cards covering exactly ``freqs``: one sweep card when they form a decade or linear grid.

    Otherwise one ``.ac lin 1 f f`` card per distinct frequency (ngspice 39 has no ``.ac list``).
    """
    distinct = list(frequency_list(freqs, where="frequencies"))
    if grids and len(distinct) >= 3:
        per_decade = _decade_grid(distinct)
        if per_decade is not None:
            return (f".ac dec {per_decade} {distinct[0]!r} {distinct[-1]!r}",)
        if _linear_grid(distinct):
            return (f".ac lin {len(distinct)} {distinct[0]!r} {distinct[-1]!r}",)
    return tuple(f".ac lin 1 {f!r} {f!r}" for f in distinct)


def _decade_grid(fs: Sequence[float]) -> int | None:
    """Points per decade when ``fs`` is f0·10^(i/N) for i = 0, 1, ... (ngspice's ``.ac dec``), else None."""
    if fs[0] <= 0:
        return None
    step = math.log10(fs[1] / fs[0])
    if step <= 0:
        return None
    n = round(1 / step)
    if n < 1 or n > 1000 or abs(1 / step - n) > 1e-6 * n:
        return None
    ok = all(math.isclose(f, fs[0] * 10 ** (i / n), rel_tol=_GRID_REL) for i, f in enumerate(fs))
    return n if ok else None


def _linear_grid(fs: Sequence[float]) -> bool:
    delta = (fs[-1] - fs[0]) / (len(fs) - 1)
    return delta > 0 and all(
        math.isclose(f, fs[0] + i * delta, rel_tol=_GRID_REL, abs_tol=_GRID_REL * fs[-1]) for i, f in enumerate(fs)
    )


def deck_options(*, klu: bool = False, sweep: bool = True) -> str:
    """The ``.options`` card of every deck crosscheck writes (AC decks here, ``.op`` decks too).

    ``klu``: the loaded library has KLU (``Engine.klu``); ``sweep``: the deck's analysis factors the
    matrix at more than one frequency, where ngspice reuses its pivot order (then ``pivrel=1``; see
    the module's docstring for the measurements behind both). ``noopac``: no operating point before
    an AC analysis (a linear network needs none; it is harmless in an ``.op`` deck).
    """
    words = ["noopac"]
    if klu:
        words.append("klu")
    if sweep:
        words.append("pivrel=1")
    return ".options " + " ".join(words)


def build_deck(
    network: Network, port: Port, freqs: Sequence[float], run: Run, *, grids: bool = True, klu: bool = False
) -> Deck:
    """The deck for one run (``open``, ``short`` or ``test``) at ``freqs``."""
    return build_combined_deck(network, port, freqs, (run,), grids=grids, klu=klu)


def build_combined_deck(
    network: Network,
    port: Port,
    freqs: Sequence[float],
    runs: Sequence[Run] = RUNS,
    *,
    grids: bool = True,
    klu: bool = False,
) -> Deck:
    """One deck holding a disjoint copy of the network per run; the copies share only ground.

    One load and one analysis then give all the runs. With a single run this is the plain deck.
    ``klu``: ask for ngspice's KLU solver (only when the loaded library has it, ``Engine.klu``).
    """
    validate(network, port)
    runs = tuple(runs)
    for run in runs:
        if run not in RUNS:
            raise ValueError(f"unknown run {run!r}; choose from {', '.join(RUNS)}")
    if len(set(runs)) != len(runs):
        raise ValueError(f"a run is repeated in {runs!r}; name each run once")
    cards = analysis_cards(freqs, grids=grids)
    kinds = " ".join(runs)
    distinct = frequency_list(freqs, where="frequencies")
    lines = [
        f"crosscheck deck for the {kinds} run{'s' if len(runs) > 1 else ''}",
        deck_options(klu=klu, sweep=len(distinct) > 1),
    ]
    names: dict[str, str] = {}
    probes: dict[str, Probe] = {}
    nodes = network.nodes
    reference = floating_reference(network, port)
    for copy, run in enumerate(runs):
        body, probe, copy_names = _copy(
            network,
            port,
            run,
            nodes,
            reference,
            node_offset=copy * len(nodes),
            element_offset=copy * len(network.elements),
        )
        lines += body
        probes[run] = probe
        names.update(copy_names)
    saved = sorted({v for p in probes.values() for v in p.vectors})
    if saved:
        lines.append(".save " + " ".join(_save_name(v) for v in saved))
    lines += list(cards)
    lines.append(".end")
    return Deck(
        text="\n".join(lines) + "\n",
        runs=runs,
        probes=probes,
        freqs=distinct,
        cards=cards,
        names=names,
    )


def _save_name(vector: str) -> str:
    return f"i({vector[: -len('#branch')]})" if vector.endswith("#branch") else f"v({vector})"


def copy_names(
    network: Network, nodes: Sequence[str], reference: str | None, node_offset: int, element_offset: int
) -> tuple[dict[str, str], dict[str, str], dict[str, str]]:
    """One copy's deck names: model node -> ``n<k>``, model element -> kind letter and number (an ideal
    short is a 0 V source), and deck name -> model name. ``reference``: the b node of a port whose part
    has no ground, written as ground (as the own solver refers it), so the matrix is not singular."""
    node_of: dict[str, str] = {GROUND: GROUND}
    for i, n in enumerate(nodes, start=1):
        node_of[n] = f"n{node_offset + i}"
    if reference is not None:
        node_of[reference] = GROUND
    element_of = {
        e.name: f"{'V' if e.is_short else e.kind}{element_offset + i}" for i, e in enumerate(network.elements, 1)
    }
    names = {deck: model for model, deck in node_of.items() if deck != GROUND}
    names.update({deck: model for model, deck in element_of.items()})
    return node_of, element_of, names


def element_cards(
    network: Network, node_of: Mapping[str, str], element_of: Mapping[str, str], source: Callable[[Element], str]
) -> list[str]:
    """The deck card of each element under its deck names; ``source(e)`` writes what follows the nodes of a
    V or I source or an ideal short (its values for this deck's analysis and run)."""
    lines: list[str] = []
    for e in network.elements:
        name, nodes = element_of[e.name], [node_of[n] for n in e.nodes]
        if e.kind == "K":
            assert e.coupled is not None
            lines.append(f"{name} {element_of[e.coupled[0]]} {element_of[e.coupled[1]]} {e.value!r}")
        elif e.is_short or e.kind in "VI":
            lines.append(f"{name} {nodes[0]} {nodes[1]} {source(e)}")
        elif e.kind in "FH":
            assert e.control is not None
            lines.append(f"{name} {nodes[0]} {nodes[1]} {element_of[e.control]} {e.value!r}")
        else:  # R L C E G: nodes then value
            lines.append(f"{name} {' '.join(nodes)} {e.value!r}")
    return lines


def _copy(
    network: Network,
    port: Port,
    run: Run,
    nodes: Sequence[str],
    reference: str | None,
    *,
    node_offset: int,
    element_offset: int,
) -> tuple[list[str], Probe, dict[str, str]]:
    """Element lines of one copy of the network, renamed, with the extra source its run needs."""
    node_of, element_of, names = copy_names(network, nodes, reference, node_offset, element_offset)

    def source(e: Element) -> str:  # an ideal short, and in the test run every source, is 0
        return "DC 0 AC 0.0 0.0" if e.is_short or run == "test" else f"DC 0 AC {e.ac_mag!r} {e.ac_phase_deg!r}"

    lines = element_cards(network, node_of, element_of, source)

    a, b = node_of[port.a], node_of[port.b]
    if run == "short":
        lines.append(f"{PORT_SOURCE} {a} {b} DC 0 AC 0.0 0.0")
        probe = Probe(run, current=f"{PORT_SOURCE.lower()}#branch")
    else:
        if run == "test":
            # SPICE's current flows from n+ through the source to n-: from b into a.
            lines.append(f"{TEST_SOURCE} {b} {a} DC 0 AC 1.0 0.0")
        probe = Probe(run, plus=None if a == GROUND else a, minus=None if b == GROUND else b)
    return lines, probe, names
