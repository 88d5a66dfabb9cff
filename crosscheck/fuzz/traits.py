"""The awkward family's traits: changes that stress the numerics on purpose, and the caveats they earn.

Each trait draws from the case's own random stream (through the draft), so the same seed gives the
same stressed case; ``CAVEATS`` says what an engine may then legitimately not answer.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import replace

from crosscheck.fuzz.draft import CONTROLLED_PORT, Draft
from crosscheck.fuzz.knobs import SOURCE_CENTRES, TRAITS, tidy
from crosscheck.model.network import GROUND, Port

#: Values spanning 1e-12 to 1e9 (log10 bounds per kind) and high gains (log10 of |gain| / centre).
_WIDE = {"R": (-3.0, 9.0), "L": (-9.0, 0.0), "C": (-12.0, -3.0)}
_HIGH_GAIN = {"E": (3.0, 6.0), "F": (3.0, 5.0), "G": (3.0, 5.0), "H": (3.0, 6.0)}

#: What a case stressed by several traits adds to their caveats.
ILL_CONDITIONED = (
    "the equations may be too ill-conditioned for double precision at some frequencies (condition "
    "near 1/ε ≈ 4.5e15 or above), so either engine may refuse a point as singular, take a tiny Z_th "
    "or Y_N for zero, or differ from the other by as much as the condition allows"
)
#: Each trait's caveat, and the caveat of a port only a controlled voltage source can reach.
CAVEATS = {
    "wide-values": "element values span 1e-12 to 1e9",
    "high-gain": "dependent-source gains are 1e3 to 1e6 times their usual size",
    "tank": "a tank resonates within 1e-6 to 1e-2 of a test frequency",
    "tight-coupling": "coupling coefficients lie within 1e-6 to 1e-2 of 1",
    "controlled-port": CONTROLLED_PORT,
}


def awkward_traits(d: Draft, passive: str) -> list[str]:
    """One to three of the traits the knobs make possible, in ``TRAITS`` order."""
    kinds = d.knobs.kinds
    possible = [
        t
        for t in TRAITS
        if {
            "tank": "L" in passive and "C" in passive,
            "wide-values": True,
            "high-gain": any(x in kinds for x in "EFGH"),
            "tight-coupling": "L" in passive and "K" in kinds,
            "no-dc-port": "C" in passive and d.knobs.dc,
        }[t]
    ]
    count = int(d.rng.integers(1, min(3, len(possible)) + 1))
    order = [possible[i] for i in d.rng.permutation(len(possible))]
    return [t for t in possible if t in order[:count]]


def wide_values(d: Draft) -> None:
    """Every R, L and C redrawn log-uniformly over its wide range."""
    d.elements = [
        replace(e, value=tidy(10.0 ** d.uniform(*_WIDE[e.kind]))) if e.kind in "RLC" else e for e in d.elements
    ]


def high_gains(d: Draft) -> None:
    """Every dependent source's gain redrawn 1e3 to 1e6 times its usual size."""
    d.elements = [replace(e, value=d.gain(e.kind, _HIGH_GAIN[e.kind])) if e.kind in "EFGH" else e for e in d.elements]


def tank(d: Draft, freqs: Sequence[float]) -> bool:
    """A partner for an existing L (or C) that resonates within 1e-6..1e-2 of a test frequency."""
    f0 = d.choice([f for f in freqs if f > 0])
    detune = (1.0 + (-1.0 if d.chance(0.5) else 1.0) * 10.0 ** d.uniform(-6.0, -2.0)) * f0
    w2 = (2.0 * math.pi * detune) ** 2
    inductors = [e for e in d.elements if e.kind == "L" and e.nodes[0] != e.nodes[1]]
    if inductors:
        inductor = d.choice(inductors)
        d.add("C", inductor.nodes, tidy(1.0 / (w2 * inductor.value)), prefix="ct")
        return True
    uf = d.forest()
    caps = [e for e in d.elements if e.kind == "C" and uf.find(e.nodes[0]) != uf.find(e.nodes[1])]
    if not caps:
        return False
    c = d.choice(caps)
    d.add("L", c.nodes, tidy(1.0 / (w2 * c.value)), prefix="lt")
    return True


def no_dc_port(d: Draft, within: tuple[str, str] | None) -> tuple[Port, str]:
    """A new port node reached only through capacitors (and perhaps a current source); ``within`` keeps it
    inside an isolated part, whose port it takes over."""
    x = d.node()
    nodes = list(within) if within else [GROUND, *[n for n in d.all_nodes() if n != x]]
    d.add("C", d.swap(x, d.choice(nodes)), d.value("C"), prefix="cx")
    if d.chance(0.5):
        d.add("C", d.swap(x, d.choice(nodes)), d.value("C"), prefix="cx")
    if "I" in d.knobs.kinds and d.chance(0.5):
        d.add(
            "I",
            d.swap(x, d.choice(nodes)),
            ac_mag=tidy(SOURCE_CENTRES["I"] * 10.0 ** d.uniform(-1.0, 1.0)),
            ac_phase_deg=tidy(d.uniform(-180.0, 180.0)),
            prefix="ix",
        )
    b = d.choice(nodes) if within or d.chance(0.3) else GROUND
    note = (
        f"port node {x} is reached only through capacitors: at 0 Hz it has no DC path, so the port sees "
        "a current source there and V_th and Z_th do not exist (I_N does, and Y_N = 0)"
    )
    return Port(x, b), note
