"""Shrink a failing case to a small reproducer that still fails.

Greedy passes in the spirit of delta debugging (Zeller and Hildebrandt, "Simplifying and isolating
failure-inducing input", IEEE TSE 28(2), 2002), each accepting a change only while the case still
fails: one frequency instead of several; an element removed; an element contracted (its two nodes
merged, which removes a node); values, gains, source phasors and frequencies rounded to a power of
ten or one significant figure. The passes repeat until none changes anything or the budget of
checks is spent. Every accepted step removes something or only rounds, so the result is never larger
than the original. Candidates that ``model.validation.validate`` refuses are skipped without a check.

The caller supplies ``still_fails(network, port, freqs)``: for the fuzzer it runs both engines and
asks whether the outcome is still the same kind of unexplained failure.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterator
from dataclasses import dataclass, replace

from crosscheck.errors import CrosscheckError
from crosscheck.model.network import GROUND, Element, Network, Port
from crosscheck.model.validation import validate

StillFails = Callable[[Network, Port, tuple[float, ...]], bool]


@dataclass(frozen=True)
class ShrinkResult:
    """The smallest failing case found, and what it took."""

    network: Network
    port: Port
    freqs_hz: tuple[float, ...]
    original_size: tuple[int, int, int]  # (elements, nodes, frequencies)
    checks: int  # calls of still_fails
    accepted: int  # changes kept

    @property
    def size(self) -> tuple[int, int, int]:
        return size_of(self.network, self.freqs_hz)


def size_of(network: Network, freqs: tuple[float, ...]) -> tuple[int, int, int]:
    return len(network.elements), len(network.nodes), len(freqs)


def shrink(
    network: Network,
    port: Port,
    freqs: tuple[float, ...],
    still_fails: StillFails,
    budget: int = 200,
    admissible: StillFails | None = None,
) -> ShrinkResult:
    """Shrink while ``still_fails``; at most ``budget`` checks. The input itself is assumed to fail.

    ``admissible`` (optional, free of charge) refuses candidates before they are checked, e.g. ones that
    leave the class of networks the failure was found in.
    """
    state = _State(network, port, tuple(freqs), still_fails, budget, admissible)
    passes = (_one_frequency, _removals, _contractions, _roundings, _round_frequencies)
    changed = True
    while changed and state.checks < budget:
        changed = False
        for make in passes:
            for candidate in make(state):
                if state.checks >= budget:
                    break
                changed |= state.try_(*candidate)
    return ShrinkResult(
        state.network, state.port, state.freqs, size_of(network, tuple(freqs)), state.checks, state.accepted
    )


class _State:
    def __init__(
        self,
        network: Network,
        port: Port,
        freqs: tuple[float, ...],
        still_fails: StillFails,
        budget: int,
        admissible: StillFails | None,
    ):
        self.network, self.port, self.freqs = network, port, freqs
        self.still_fails = still_fails
        self.admissible = admissible
        self.budget = budget
        self.checks = 0
        self.accepted = 0

    def try_(self, network: Network | None, port: Port | None = None, freqs: tuple[float, ...] | None = None) -> bool:
        """Keep the candidate if it is valid and still fails."""
        if network is None:
            return False
        port = port or self.port
        freqs = freqs if freqs is not None else self.freqs
        if not freqs or (network == self.network and port == self.port and freqs == self.freqs):
            return False
        try:
            validate(network, port)
        except CrosscheckError:
            return False
        if self.admissible is not None and not self.admissible(network, port, freqs):
            return False
        self.checks += 1
        if not self.still_fails(network, port, freqs):
            return False
        self.network, self.port, self.freqs = network, port, freqs
        self.accepted += 1
        return True


# --------------------------------------------------------------------------- passes
# Each pass yields candidates lazily from the *current* state, so an accepted change is built upon.


def _one_frequency(s: _State) -> Iterator[tuple]:
    if len(s.freqs) > 1:
        for f in tuple(s.freqs):
            if len(s.freqs) > 1:
                yield s.network, s.port, (f,)


def _removals(s: _State) -> Iterator[tuple]:
    for name in [e.name for e in reversed(s.network.elements)]:
        if any(e.name == name for e in s.network.elements):
            yield _without(s.network, {name}), s.port, None


def _contractions(s: _State) -> Iterator[tuple]:
    for name in [e.name for e in s.network.elements if e.kind != "K"]:
        e = next((x for x in s.network.elements if x.name == name), None)
        if e is None or e.nodes[0] == e.nodes[1]:
            continue
        a, b = e.terminals
        if b == GROUND or (a != GROUND and b in s.port and a not in s.port):
            a, b = b, a  # keep ground, else a port node; merge the other into it
        rename = {b: a}
        port = Port(*(rename.get(n, n) for n in s.port))
        if port.a == port.b:
            continue
        merged = s.network.with_elements(
            replace(x, nodes=tuple(rename.get(n, n) for n in x.nodes)) for x in s.network.elements if x.name != name
        )
        collapsed = {x.name for x in merged.elements if x.kind != "K" and x.nodes[0] == x.nodes[1]}
        yield _without(merged, collapsed), port, None


def _roundings(s: _State) -> Iterator[tuple]:
    for name in [e.name for e in s.network.elements]:
        e = next((x for x in s.network.elements if x.name == name), None)
        if e is None:
            continue
        for changed in _rounder(e):
            yield s.network.with_elements(changed if x.name == name else x for x in s.network.elements), s.port, None


def _round_frequencies(s: _State) -> Iterator[tuple]:
    for i in range(len(s.freqs)):
        for f in _round_number(s.freqs[i]):
            if i < len(s.freqs) and f != s.freqs[i] and f not in s.freqs:
                yield s.network, s.port, tuple(sorted(s.freqs[:i] + (f,) + s.freqs[i + 1 :]))


# --------------------------------------------------------------------------- helpers


def _without(network: Network, names: set[str]) -> Network | None:
    """The network less ``names`` and what depends on them (K on a removed L, F or H sensing a removed V)."""
    gone = set(names)
    while True:
        more = {
            e.name
            for e in network.elements
            if e.name not in gone
            and ((e.kind == "K" and any(n in gone for n in e.coupled or ())) or (e.kind in "FH" and e.control in gone))
        }
        if not more:
            break
        gone |= more
    kept = [e for e in network.elements if e.name not in gone]
    return network.with_elements(kept) if kept else None


def _round_number(x: float) -> list[float]:
    """A power of ten, then one significant figure (same sign); empty for 0."""
    if x == 0 or not math.isfinite(x):
        return []
    sign = math.copysign(1.0, x)
    power = sign * 10.0 ** round(math.log10(abs(x)))
    one = float(f"{x:.1g}")
    return [v for v in dict.fromkeys((power, one)) if v != x]


def _rounder(e: Element) -> list[Element]:
    if e.kind in "VI":
        out = []
        if e.ac_phase_deg != 0.0:
            out.append(replace(e, ac_phase_deg=0.0))
        out += [replace(e, ac_mag=m) for m in _round_number(e.ac_mag)]
        return out
    if e.kind == "K":
        return [replace(e, value=k) for k in (0.5, 0.9, 0.99) if k != e.value]
    values = _round_number(e.value)
    if e.kind in "EF":  # a unit gain often cancels exactly (E across its own control, F feeding its sense source),
        values = [v for v in values if abs(v) != 1.0]  # which trades the failure for a degenerate network
    return [replace(e, value=v) for v in values]
