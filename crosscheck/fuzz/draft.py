"""One generated case under construction: the random stream, the elements so far, fresh names.

Every random draw goes through the draft's own ``numpy`` Generator in a fixed order, so a seed
rebuilds its case exactly. Voltage-defined branches (V, E, H) and inductors are kept a forest:
a loop of them is singular at DC in both engines and is what SPICE cannot bias.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field, replace

import numpy as np

from crosscheck.fuzz.knobs import CENTRES, GAIN_CENTRES, SOURCE_CENTRES, Knobs, tidy
from crosscheck.model.graph import UnionFind
from crosscheck.model.network import GROUND, Element, Network, Port, make_element

_PORT_TRIES = 20
#: Why a port that a controlled voltage source joins may have no I_N from SPICE.
CONTROLLED_PORT = (
    "a controlled voltage source (E or H) joins the port's nodes: shorting the port puts it in "
    "parallel with the short, which is singular, so SPICE's short-circuit run gives no I_N "
    "(crosscheck's I_N is V_th / Z_th)"
)


def joined_through(elements: Sequence[Element], port: Port, kinds: str) -> bool:
    """The port's nodes are joined by a path of V, R = 0 and ``kinds`` branches, not by V and R = 0 alone.

    Shorting such a port closes a loop of zero-volt branches (E or H always, L at DC), which is
    singular: SPICE's short-circuit run then fails, or at 0 Hz may even return a number without
    meaning (ngspice 39 does). A path of V and R = 0 alone is a plain degenerate port (Z_th = 0),
    which both engines report alike.
    """
    every, plain = UnionFind(), UnionFind()
    for e in elements:
        if e.kind in "V" + kinds or e.is_short:
            every.union(*e.terminals)
            if e.kind == "V" or e.is_short:
                plain.union(*e.terminals)
    return every.find(port.a) == every.find(port.b) and plain.find(port.a) != plain.find(port.b)


@dataclass
class Plan:
    """What to put on top of the skeleton, decided before it is drawn so the node budget is exact."""

    sources: list[tuple[str, str, str]] = field(default_factory=list)  # (kind, output mode, control mode)
    isolated: bool = False
    no_dc_port: bool = False

    def nodes_needed(self) -> int:
        used = sum((mode == "series") + (control == "sense") for _, mode, control in self.sources)
        return used + 2 * self.isolated + self.no_dc_port


class Draft:
    """One case under construction: the random stream, the elements so far, fresh names."""

    def __init__(self, rng: np.random.Generator, knobs: Knobs, seed: int):
        self.rng = rng
        self.knobs = knobs
        self.seed = seed
        self.elements: list[Element] = []
        self._counts: dict[str, int] = {}
        self._nodes = 0
        self.preferred_ports: list[tuple[str, str]] = []
        self.dc_ok = True  # False once an inductor had to close a loop (singular at DC)
        self.notes: list[str] = []

    # ---- random draws (all through self.rng, in a fixed order)

    def chance(self, p: float) -> bool:
        return bool(self.rng.random() < p)

    def uniform(self, lo: float, hi: float) -> float:
        return float(lo + (hi - lo) * self.rng.random())

    def choice(self, items: Sequence):
        return items[int(self.rng.integers(len(items)))]

    def pair(self, nodes: Sequence[str]) -> tuple[str, str]:
        a = self.choice(nodes)
        return a, self.choice([n for n in nodes if n != a])

    def value(self, kind: str, decades: float | None = None) -> float:
        d = self.knobs.decades if decades is None else decades
        return tidy(CENTRES[kind] * 10.0 ** self.uniform(-d, d))

    def gain(self, kind: str, log_range: tuple[float, float] = (-1.0, 0.3)) -> float:
        sign = -1.0 if self.chance(0.5) else 1.0
        return tidy(sign * GAIN_CENTRES[kind] * 10.0 ** self.uniform(*log_range))

    # ---- names and elements

    def node(self) -> str:
        self._nodes += 1
        return f"n{self._nodes}"

    def add(self, kind: str, nodes: Sequence[str], value: float = 0.0, prefix: str | None = None, **kw) -> Element:
        prefix = prefix or kind.lower()
        self._counts[prefix] = self._counts.get(prefix, 0) + 1
        e = make_element(f"{prefix}{self._counts[prefix]}", kind, tuple(nodes), value, **kw)
        self.elements.append(e)
        return e

    def swap(self, a: str, b: str) -> tuple[str, str]:
        return (b, a) if self.chance(0.5) else (a, b)

    def forest(self) -> UnionFind:
        """Nodes joined by inductors and voltage-defined branches: a new one must not close a loop."""
        uf = UnionFind()
        for e in self.elements:
            if e.kind in "LVEH":
                uf.union(*e.terminals)
        return uf

    def plan(self, traits: list[str]) -> Plan:
        kinds = self.knobs.kinds
        plan = Plan()
        independent = [x for x in "VI" if x in kinds]
        dependent = [x for x in "EFGH" if x in kinds]
        chosen = [self.choice(independent) for _ in range(int(self.rng.integers(1, 3)))] if independent else []
        chosen += [self.choice(dependent) for _ in range(int(self.rng.integers(0, 3)))] if dependent else []
        if "high-gain" in traits and not any(x in "EFGH" for x in chosen):
            chosen.append(self.choice(dependent))
        has_v = "V" in chosen
        for kind in chosen:
            mode = ("parallel" if self.chance(0.25) else "series") if kind in "VEH" else ""
            control = ""
            if kind in "FH":
                control = "existing" if has_v and self.chance(0.5) else "sense"
            plan.sources.append((kind, mode, control))
        plan.isolated = "L" in kinds and "K" in kinds and ("tight-coupling" in traits or self.chance(0.12))
        plan.no_dc_port = "no-dc-port" in traits
        return plan

    def passives(self, edges: list[tuple[str, str]], passive: str, force_first_l: bool) -> None:
        """One passive element per skeleton edge; an inductor that would close a loop becomes R or C."""
        uf = UnionFind()
        for i, (a, b) in enumerate(edges):
            kind = "L" if (force_first_l and i == 0) else self.choice(passive)
            if kind == "L" and uf.find(a) == uf.find(b):
                others = passive.replace("L", "")
                if others:
                    kind = self.choice(others)
                else:
                    self.dc_ok = False  # an inductor loop: fine at f > 0, singular at DC
            if kind == "L":
                uf.union(a, b)
            self.add(kind, self.swap(a, b), self.value(kind))

    def _split(self) -> tuple[str, str]:
        """Put a new node in series with a random R, L or C: returns (new node, far node)."""
        candidates = [i for i, e in enumerate(self.elements) if e.kind in "RLC" and e.nodes[0] != e.nodes[1]]
        i = self.choice(candidates)
        e = self.elements[i]
        m = self.node()
        self.elements[i] = replace(e, nodes=(e.nodes[0], m))
        return m, e.nodes[1]

    def _free_pair(self) -> tuple[str, str] | None:
        """Two nodes a voltage-defined branch may join without closing a loop with inductors and sources."""
        uf = self.forest()
        nodes = [GROUND, *self.all_nodes()]
        pairs = [(a, b) for i, a in enumerate(nodes) for b in nodes[i + 1 :] if uf.find(a) != uf.find(b)]
        return self.choice(pairs) if pairs else None

    def all_nodes(self) -> list[str]:
        return list(Network("", tuple(self.elements)).nodes)

    def _control_pair(self, output: tuple[str, str]) -> tuple[str, str]:
        nodes = [GROUND, *self.all_nodes()]
        pairs = [(a, b) for a in nodes for b in nodes if a != b and {a, b} != set(output)]
        return self.choice(pairs) if pairs else (output[0], output[1])

    def place_sources(self, plan: Plan) -> None:
        """Series sources first (they take the planned nodes), then the rest; F and H after every V exists."""
        senses: dict[int, str] = {}
        for i, (_, _, control) in enumerate(plan.sources):
            if control == "sense":  # a 0 V source in series with a passive element, to sense its current
                m, far = self._split()
                senses[i] = self.add("V", self.swap(m, far), prefix="vs").name
        outputs: dict[int, tuple[str, str]] = {}
        for i, (_, mode, _) in enumerate(plan.sources):
            if mode == "series":
                outputs[i] = self.swap(*self._split())
        # Series outputs first (the forest must hold them before a parallel one looks for a free pair),
        # then the rest; F and H after the others, so that every V they might sense exists.
        for i, (kind, _, _) in sorted(enumerate(plan.sources), key=lambda t: (t[1][1] != "series", t[1][0] in "FH")):
            nodes = outputs.get(i)
            if nodes is None and kind in "VEH":
                nodes = self._free_pair()
                if nodes is None:
                    continue  # every loop-free place is taken: leave this source out
                nodes = self.swap(*nodes)
            elif nodes is None:
                nodes = self.pair([GROUND, *self.all_nodes()])
            if kind in "FH" and i not in senses and not any(e.kind == "V" for e in self.elements):
                kind = {"F": "G", "H": "E"}[kind]  # nothing to sense yet: the voltage-controlled twin instead
            if kind in "VI":
                self.add(
                    kind,
                    nodes,
                    ac_mag=tidy(SOURCE_CENTRES[kind] * 10.0 ** self.uniform(-1.0, 1.0)),
                    ac_phase_deg=tidy(self.uniform(-180.0, 180.0)),
                )
            elif kind in "EG":
                self.add(kind, nodes + self._control_pair(nodes), self.gain(kind))
            else:
                ctl = senses.get(i) or self.choice([e.name for e in self.elements if e.kind == "V"])
                self.add(kind, nodes, self.gain(kind), control=ctl)

    def couple(self, tight: bool) -> None:
        """K between disjoint pairs of inductors, so the inductance matrix stays positive definite."""
        free = [e.name for e in self.elements if e.kind == "L"]
        order = [free[i] for i in self.rng.permutation(len(free))]
        pairs = [(order[i], order[i + 1]) for i in range(0, len(order) - 1, 2)]
        for pair in pairs[: int(self.rng.integers(0, len(pairs) + 1))]:
            self.add("K", (), self._k(tight), coupled=pair)

    def _k(self, tight: bool) -> float:
        return tidy(1.0 - 10.0 ** self.uniform(-6.0, -2.0)) if tight else tidy(self.uniform(0.1, 0.95))

    def isolated_secondary(self, passive: str, tight: bool) -> Port:
        """A winding with no ground, coupled to an inductor of the main network; the port sits on it."""
        taken = [n for e in self.elements if e.kind == "K" for n in e.coupled or ()]
        primaries = [e.name for e in self.elements if e.kind == "L" and e.name not in taken]
        if not primaries:  # every inductor is coupled already: release one pair
            k_index = next(i for i, e in enumerate(self.elements) if e.kind == "K")
            primaries = list(self.elements.pop(k_index).coupled or ())
        s1, s2 = self.node(), self.node()
        winding = self.add("L", self.swap(s1, s2), self.value("L"), prefix="ls")
        self.add("K", (), self._k(tight), coupled=(self.choice(primaries), winding.name), prefix="ks")
        loads = passive.replace("L", "")  # a second inductor across the winding would close an inductor loop
        if loads and self.chance(0.7):
            kind = self.choice(loads)
            self.add(kind, self.swap(s1, s2), self.value(kind), prefix=kind.lower() + "s")
        return Port(*self.swap(s1, s2))

    def frequencies(self) -> tuple[float, ...]:
        k = self.knobs
        count = int(self.rng.integers(1, k.max_freqs + 1))
        lo, hi = math.log10(k.min_hz), math.log10(k.max_hz)
        return tuple(sorted({tidy(min(max(10.0 ** self.uniform(lo, hi), k.min_hz), k.max_hz)) for _ in range(count)}))

    def dc_path_everywhere(self, except_node: str | None = None) -> bool:
        """Every node reaches ground (or its isolated part's reference) through R, L, V, E or H."""
        dc = UnionFind()
        every = UnionFind()
        for e in self.elements:
            if e.kind == "K":
                continue
            every.union(*e.terminals)
            if e.kind in "RLVEH":
                dc.union(*e.terminals)
        for n in self.all_nodes():
            if n == except_node:
                continue
            if every.find(n) == every.find(GROUND) and dc.find(n) != dc.find(GROUND):
                return False
            if every.find(n) != every.find(GROUND):  # an isolated part: all of it must hang together at DC
                if any(dc.find(n) != dc.find(m) for m in self.all_nodes() if every.find(m) == every.find(n)):
                    return False
        return True

    def port(self) -> tuple[Port, str]:
        """A port, ground-referenced or floating; not one whose nodes a controlled voltage source joins
        (shorting such a port puts two voltage-defined branches in parallel: singular for SPICE's short run)."""
        nodes = self.all_nodes()
        for _ in range(_PORT_TRIES):
            if self.preferred_ports and self.chance(0.6):
                port = Port(*self.swap(*self.choice(self.preferred_ports)))
            elif len(nodes) >= 2 and self.chance(0.35):
                port = Port(*self.pair(nodes))
            else:
                port = Port(*self.swap(self.choice(nodes), GROUND))
            if not joined_through(self.elements, port, "EH"):
                return port, ""
        return port, CONTROLLED_PORT
