"""The operating-point (``.op``) decks of the DC route, written from the model like ``deck``'s AC decks.

Under DC excitation the sources' DC values drive the network and ngspice's answer comes from its
operating-point analysis, a different path in ngspice from ``.ac`` (its DC load and Newton loop instead
of the complex small-signal matrix), which makes the comparison with the own route stronger. The three
runs are ``deck``'s: ``open`` (V(a) − V(b)), ``short`` (a 0 V ``VPORT`` across the port; I_N = i(VPORT))
and ``test`` (independent sources at DC 0, a 1 A ``ITEST`` into a and out of b; Z_th = V(a) − V(b)).

Why it is safe: as in ``deck``, nothing of the user's text is written. Nodes are ``n1..nN`` (a
disjoint copy per run, sharing ground), elements their kind letter and position, every number
``repr(float)``; sources carry ``DC value`` only (``.op`` does not read AC values). The element lines
are written here rather than by ``deck._copy``, which writes ``DC 0 AC ...`` for the AC analysis.
"""

from __future__ import annotations

from collections.abc import Sequence

from crosscheck.model.network import GROUND, Element, Network, Port, floating_reference
from crosscheck.model.validation import validate
from crosscheck.spice.deck import (
    PORT_SOURCE,
    RUNS,
    TEST_SOURCE,
    Deck,
    Probe,
    Run,
    copy_names,
    deck_options,
    element_cards,
)

#: Today's options line of ``deck`` (noopac has no effect on ``.op``; pivrel=1 as there). When ``deck``
#: exposes its options as a function (KLU where the library has it), this line is to come from it.


def build_op_deck(network: Network, port: Port, runs: Sequence[Run] = RUNS, *, klu: bool = False) -> Deck:
    """One ``.op`` deck holding a disjoint copy of ``network`` per run (its sources at their DC values).

    ``network`` is the DC view (``model.network.dc_view``'s input is fine too: only ``dc_value`` is written).
    The deck's ``freqs`` is (0.0,): an operating point is the network at 0 Hz.
    """
    validate(network, port)
    runs = tuple(runs)
    if any(run not in RUNS for run in runs) or len(set(runs)) != len(runs):
        raise ValueError(f"runs must be distinct names from {', '.join(RUNS)} (got {runs!r})")
    lines = [
        f"crosscheck operating-point deck for the {' '.join(runs)} run{'s' if len(runs) > 1 else ''}",
        deck_options(klu=klu, sweep=False),  # one factorisation per run: ngspice's default pivoting is right
    ]
    names: dict[str, str] = {}
    probes: dict[str, Probe] = {}
    reference = floating_reference(network, port)
    for copy, run in enumerate(runs):
        body, probe, copy_names = _op_copy(network, port, run, reference, copy)
        lines += body
        probes[run] = probe
        names.update(copy_names)
    saved = sorted({v for p in probes.values() for v in p.vectors})
    lines.append(
        ".save " + " ".join(f"i({v[: -len('#branch')]})" if v.endswith("#branch") else f"v({v})" for v in saved)
    )
    lines += [".op", ".end"]
    return Deck(text="\n".join(lines) + "\n", runs=runs, probes=probes, freqs=(0.0,), cards=(".op",), names=names)


def _op_copy(
    network: Network, port: Port, run: Run, reference: str | None, copy: int
) -> tuple[list[str], Probe, dict[str, str]]:
    """Element lines of one copy of the network for ``run``, renamed, with the extra source its run needs."""
    offsets = copy * len(network.nodes), copy * len(network.elements)
    node_of, element_of, names = copy_names(network, network.nodes, reference, *offsets)

    def source(e: Element) -> str:  # an operating point: DC values only (independent sources zeroed in test)
        return "DC 0" if e.is_short else f"DC {0.0 if run == 'test' else e.dc_value!r}"

    lines = element_cards(network, node_of, element_of, source)
    a, b = node_of[port.a], node_of[port.b]
    if run == "short":
        lines.append(f"{PORT_SOURCE}{copy} {a} {b} DC 0")
        return lines, Probe(run, current=f"{PORT_SOURCE.lower()}{copy}#branch"), names
    if run == "test":  # SPICE's current flows from n+ through the source to n-: from b into a
        lines.append(f"{TEST_SOURCE}{copy} {b} {a} DC 1.0")
    return lines, Probe(run, plus=None if a == GROUND else a, minus=None if b == GROUND else b), names
