"""Seeded random networks that both engines can solve, for fuzzing the own solver against ngspice.

Reproducible: case i of a run with seed S is drawn from ``Generator(PCG64(case_seed(S, i)))`` with
``case_seed(S, i) = S·1_000_003 + i``; that one integer (printed with every failure) regenerates the
case alone through ``generate_case``. numpy keeps a seeded Generator's stream fixed for a given numpy
version on every platform (NEP 19); values are rounded to 12 significant figures so a last-bit
difference in the platform's ``pow`` cannot change a netlist. No set is iterated (hash order varies).

Well posed by construction, not by filtering:

* a skeleton of R, L and C branches joins every node to ground, so the network is connected and no
  node is reached through current sources alone (I, G, F go on top of it: no cut set of them);
* inductors and voltage-defined branches (V, E, H) form a forest: a loop of them is singular at DC
  in both engines and is what SPICE cannot bias. Independent V, the 0 V sources that F and H sense,
  and most E and H go in series with a skeleton branch on a new node, which never closes a loop;
* K couples disjoint pairs of inductors with 0 < k < 1 (k near 1 only in the awkward family);
* 0 Hz is asked for only when every node has a DC path (the awkward family breaks this on purpose
  at the port, and says so).

Families shape the skeleton: ``ladder``, ``grid`` (a mesh), ``random`` (a random graph), ``tree``
(a deep tree with one or two links), ``bridge`` (cascaded Wheatstone sections, often with the port
across a bridge). ``awkward`` takes one of those and adds traits that stress the numerics on
purpose; each case's ``caveat`` says what an engine may then legitimately not answer.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Sequence

import numpy as np

from crosscheck.model.network import GROUND, Element, Network, Port, _UnionFind, make_element, validate

FAMILIES = ("ladder", "grid", "random", "tree", "bridge", "awkward")
#: Each case picks its own family from FAMILIES.
MIXED = "mixed"
TRAITS = ("tank", "wide-values", "high-gain", "tight-coupling", "no-dc-port")
ALL_KINDS = "RLCVIEFGHK"

#: Seeds of the cases of one run: case_seed(S, i) = S * SEED_STRIDE + i (a prime, so runs rarely overlap).
SEED_STRIDE = 1_000_003

#: Centre values: √(L/C) = R, so R, ωL and 1/(ωC) all meet near 1 kΩ at F_CENTRE (as in ``strategies``).
CENTRES = {"R": 1e3, "L": 1e-2, "C": 1e-8}
F_CENTRE = 1.0 / (2.0 * math.pi * math.sqrt(CENTRES["L"] * CENTRES["C"]))
_SOURCE_CENTRES = {"V": 1.0, "I": 1e-3}
#: Gains of dependent sources scale with R so their effect is comparable to the passive network.
_GAIN_CENTRES = {"E": 1.0, "F": 1.0, "G": 1.0 / CENTRES["R"], "H": CENTRES["R"]}
#: Awkward: "values spanning 1e-12 to 1e9" (log10 bounds per kind) and high gains (log10 of |gain|/centre).
_WIDE = {"R": (-3.0, 9.0), "L": (-9.0, 0.0), "C": (-12.0, -3.0)}
_HIGH_GAIN = {"E": (3.0, 6.0), "F": (3.0, 5.0), "G": (3.0, 5.0), "H": (3.0, 6.0)}


_PORT_TRIES = 20
_ILL_CONDITIONED = ("the equations may be too ill-conditioned for double precision at some frequencies (condition "
                    "near 1/ε ≈ 4.5e15 or above), so either engine may refuse a point as singular, take a tiny Z_th "
                    "or Y_N for zero, or differ from the other by as much as the condition allows")
_CAVEATS = {
    "wide-values": "element values span 1e-12 to 1e9",
    "high-gain": "dependent-source gains are 1e3 to 1e6 times their usual size",
    "tank": "a tank resonates within 1e-6 to 1e-2 of a test frequency",
    "tight-coupling": "coupling coefficients lie within 1e-6 to 1e-2 of 1",
    "controlled-port": ("a controlled voltage source (E or H) joins the port's nodes: shorting the port puts it in "
                        "parallel with the short, which is singular, so SPICE's short-circuit run gives no I_N "
                        "(crosscheck's I_N is V_th / Z_th)"),
}


def _joined_through(elements: Sequence[Element], port: Port, kinds: str) -> bool:
    """The port's nodes are joined by a path of V, R = 0 and ``kinds`` branches, not by V and R = 0 alone.

    Shorting such a port closes a loop of zero-volt branches (E or H always, L at DC), which is
    singular: SPICE's short-circuit run then fails, or at 0 Hz may even return a number without
    meaning (ngspice 39 does). A path of V and R = 0 alone is a plain degenerate port (Z_th = 0),
    which both engines report alike.
    """
    every, plain = _UnionFind(), _UnionFind()
    for e in elements:
        if e.kind in "V" + kinds or e.is_short:
            every.union(*e.terminals)
            if e.kind == "V" or e.is_short:
                plain.union(*e.terminals)
    return every.find(port.a) == every.find(port.b) and plain.find(port.a) != plain.find(port.b)


def well_posed(network: Network, port: Port, freqs: Sequence[float]) -> bool:
    """What the generator promises beyond ``validate``: no loop of inductors and voltage-defined branches,
    no port joined through E or H, and at 0 Hz a DC path to every node but the port's, and no port
    whose short would close an inductor loop. The shrinker keeps to it, so a shrunk case fails for
    the reason the original did, not because shrinking made it ill-posed."""
    forest = _UnionFind()
    for e in network.elements:
        if (e.kind in "LVEH" or e.is_short) and not forest.union(*e.terminals):
            return False
    if _joined_through(network.elements, port, "EH"):
        return False
    if 0.0 not in freqs:
        return True
    if _joined_through(network.elements, port, "LEH"):
        return False
    dc, every = _UnionFind(), _UnionFind()
    for e in network.elements:
        if e.kind != "K":
            every.union(*e.terminals)
            if e.kind in "RLVEH":
                dc.union(*e.terminals)
    reference = GROUND if every.find(port.b) == every.find(GROUND) else port.b
    return all(dc.find(n) == dc.find(GROUND) or dc.find(n) == dc.find(reference) or n in (port.a, port.b)
               for n in network.nodes if every.find(n) in (every.find(GROUND), every.find(reference)))


def case_seed(run_seed: int, index: int) -> int:
    """The seed of case ``index`` of the run seeded ``run_seed``; ``generate_case`` rebuilds it alone."""
    if run_seed < 0 or index < 0:
        raise ValueError(f"seeds and case indices must be >= 0 (got seed {run_seed}, index {index})")
    return int(run_seed) * SEED_STRIDE + int(index)


@dataclass(frozen=True)
class Knobs:
    """What the generator may draw. Values are ``centre · 10**u`` with |u| <= ``decades``."""

    min_nodes: int = 2
    max_nodes: int = 8
    kinds: str = ALL_KINDS
    decades: float = 1.0
    min_hz: float = F_CENTRE / 100.0
    max_hz: float = F_CENTRE * 100.0
    max_freqs: int = 3
    dc: bool = True
    family: str = MIXED

    def __post_init__(self) -> None:
        kinds = "".join(dict.fromkeys(self.kinds.upper()))
        object.__setattr__(self, "kinds", kinds)
        if not 1 <= self.min_nodes <= self.max_nodes:
            raise ValueError(f"node counts must satisfy 1 <= min <= max (got {self.min_nodes}, {self.max_nodes})")
        unknown = [k for k in kinds if k not in ALL_KINDS]
        if unknown:
            raise ValueError(f"unknown element kind(s) {''.join(unknown)!r}; choose from {ALL_KINDS}")
        if not any(k in kinds for k in "RLC"):
            raise ValueError(f"kinds {self.kinds!r} has no R, L or C to join the nodes; add at least one")
        if not (0.0 <= self.decades <= 6.0):
            raise ValueError(f"decades must be between 0 and 6 (got {self.decades}); 6 already spans 12 decades")
        if not (0.0 < self.min_hz <= self.max_hz < math.inf):
            raise ValueError(f"need 0 < min_hz <= max_hz < inf (got {self.min_hz}, {self.max_hz})")
        if self.max_freqs < 1:
            raise ValueError(f"max_freqs must be at least 1 (got {self.max_freqs})")
        if self.family != MIXED and self.family not in FAMILIES:
            raise ValueError(f"unknown family {self.family!r}; choose from {MIXED}, {', '.join(FAMILIES)}")


@dataclass(frozen=True)
class GeneratedCase:
    """One generated case. ``caveat`` is empty unless an answer may be legitimately missing or unattainable
    in double precision (the awkward family's traits; a port only a controlled source can reach), and
    then says why."""

    seed: int
    family: str
    network: Network
    port: Port
    freqs_hz: tuple[float, ...]
    caveat: str = ""
    traits: tuple[str, ...] = ()
    base: str = ""  # the skeleton family an awkward case was built on

    @property
    def size(self) -> tuple[int, int]:
        """(elements, nodes)."""
        return len(self.network.elements), len(self.network.nodes)


def generate_case(seed: int, knobs: Knobs = Knobs()) -> GeneratedCase:
    """The case for ``seed`` (see ``case_seed``): the same seed and knobs give the same case everywhere."""
    if seed < 0:
        raise ValueError(f"seed must be >= 0 (got {seed})")
    rng = np.random.Generator(np.random.PCG64(seed))
    family = knobs.family if knobs.family != MIXED else FAMILIES[int(rng.integers(len(FAMILIES)))]
    return _Draft(rng, knobs, seed).build(family)


def generate_cases(run_seed: int, count: int, knobs: Knobs = Knobs()):
    """Cases 0..count-1 of the run seeded ``run_seed``, lazily."""
    for i in range(count):
        yield generate_case(case_seed(run_seed, i), knobs)


def _tidy(x: float) -> float:
    """12 significant figures: immune to last-bit differences between platforms' ``pow``."""
    return float(f"{x:.12g}")


# --------------------------------------------------------------------------- skeletons


def _ladder(d: "_Draft", nodes: list[str]) -> list[tuple[str, str]]:
    """Series branches along a chain, shunts to ground (the last node always has one)."""
    edges = [(nodes[-1], GROUND)] + [(nodes[i], nodes[i + 1]) for i in range(len(nodes) - 1)]
    edges += [(n, GROUND) for n in nodes[:-1] if d.chance(0.7)]
    return edges


def _grid(d: "_Draft", nodes: list[str]) -> list[tuple[str, str]]:
    """A mesh, row by row, with its first corner (and sometimes others) to ground."""
    cols = max(1, math.ceil(math.sqrt(len(nodes))))
    edges = [(nodes[0], GROUND)]
    for i, n in enumerate(nodes):
        if (i + 1) % cols and i + 1 < len(nodes):
            edges.append((n, nodes[i + 1]))
        if i + cols < len(nodes):
            edges.append((n, nodes[i + cols]))
    for corner in (nodes[-1], nodes[min(cols, len(nodes)) - 1]):
        if corner != nodes[0] and d.chance(0.5):
            edges.append((corner, GROUND))
    return edges


def _random_tree(d: "_Draft", nodes: list[str], depth: int | None) -> list[tuple[str, str]]:
    """Each node hangs from an earlier one (or ground); ``depth`` limits the choice to the last few: deeper trees."""
    edges = []
    earlier = [GROUND]
    for n in nodes:
        pool = earlier if depth is None else earlier[-depth:]
        edges.append((n, d.choice(pool)))
        earlier.append(n)
    return edges


def _random(d: "_Draft", nodes: list[str]) -> list[tuple[str, str]]:
    """A random tree plus up to as many random chords as nodes (parallel branches allowed)."""
    edges = _random_tree(d, nodes, None)
    everything = [GROUND, *nodes]
    for _ in range(int(d.rng.integers(0, len(nodes) + 1))):
        edges.append(d.pair(everything))
    return edges


def _tree(d: "_Draft", nodes: list[str]) -> list[tuple[str, str]]:
    """A deep tree with one or two links: few loops, long paths."""
    edges = _random_tree(d, nodes, 2)
    everything = [GROUND, *nodes]
    for _ in range(int(d.rng.integers(1, 3)) if len(everything) > 2 else 0):
        edges.append(d.pair(everything))
    return edges


def _bridge(d: "_Draft", nodes: list[str]) -> list[tuple[str, str]]:
    """Cascaded Wheatstone sections: from (p, q), two arms to x and y, x-y the bridge; the next section
    is fed from (x, y). The first is fed between nodes[0] and ground; a spare node hangs off the last."""
    top = nodes[0]
    edges = [(top, GROUND)]
    p, q = top, GROUND
    rest = nodes[1:]
    pairs = []
    while len(rest) >= 2:
        x, y, rest = rest[0], rest[1], rest[2:]
        edges += [(p, x), (p, y), (x, q), (y, q), (x, y)]
        pairs.append((x, y))
        p, q = x, y
    for n in rest:
        edges.append((n, d.choice([p, q] if q != GROUND else [p])))
    d.preferred_ports = pairs
    return edges


_SKELETONS = {"ladder": _ladder, "grid": _grid, "random": _random, "tree": _tree, "bridge": _bridge}


# --------------------------------------------------------------------------- the builder


@dataclass
class _Plan:
    """What to put on top of the skeleton, decided before it is drawn so the node budget is exact."""

    sources: list[tuple[str, str, str]] = field(default_factory=list)  # (kind, output mode, control mode)
    isolated: bool = False
    no_dc_port: bool = False

    def nodes_needed(self) -> int:
        used = sum((mode == "series") + (control == "sense") for _, mode, control in self.sources)
        return used + 2 * self.isolated + self.no_dc_port


class _Draft:
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
        return _tidy(CENTRES[kind] * 10.0 ** self.uniform(-d, d))

    def gain(self, kind: str, log_range: tuple[float, float] = (-1.0, 0.3)) -> float:
        sign = -1.0 if self.chance(0.5) else 1.0
        return _tidy(sign * _GAIN_CENTRES[kind] * 10.0 ** self.uniform(*log_range))

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

    def forest(self) -> _UnionFind:
        """Nodes joined by inductors and voltage-defined branches: a new one must not close a loop."""
        uf = _UnionFind()
        for e in self.elements:
            if e.kind in "LVEH":
                uf.union(*e.terminals)
        return uf

    # ---- the case

    def build(self, family: str) -> GeneratedCase:
        k = self.knobs
        passive = "".join(x for x in "RLC" if x in k.kinds)
        traits: list[str] = []
        base = family
        if family == "awkward":
            base = self.choice(FAMILIES[:-1])
            traits = self._awkward_traits(passive)
        n_total = int(self.rng.integers(k.min_nodes, k.max_nodes + 1))
        plan = self._plan(traits)
        while n_total - plan.nodes_needed() < 1:  # too small for the plan: drop the latest additions
            if plan.no_dc_port:
                plan.no_dc_port = False
            elif plan.isolated:
                plan.isolated = False
            else:
                plan.sources.pop()
        traits = [t for t in traits if (t != "no-dc-port" or plan.no_dc_port)]
        skeleton_nodes = [self.node() for _ in range(n_total - plan.nodes_needed())]
        edges = _SKELETONS[base](self, skeleton_nodes)
        self._passives(edges, passive, force_first_l=plan.isolated)
        self._place_sources(plan)
        if "K" in k.kinds:
            self._couple(tight="tight-coupling" in traits)
        port = None
        if plan.isolated:
            port = self._isolated_secondary(passive, tight="tight-coupling" in traits)
        freqs = self._frequencies()
        caveats: list[str] = []
        if "wide-values" in traits:
            self._wide_values()
        if "high-gain" in traits:
            self._high_gains()
        if "tank" in traits:
            applied = self._tank(freqs)
            traits = [t for t in traits if t != "tank" or applied]
        if plan.no_dc_port:
            port, note = self._no_dc_port(within=tuple(port) if port is not None else None)
            if self.dc_ok and self._dc_path_everywhere(except_node=port.a):
                freqs = tuple(sorted({0.0, *freqs}))
                caveats.append(note)
            else:  # the rest of the network has no DC path either: 0 Hz is out, and the trait with it
                traits.remove("no-dc-port")
        elif k.dc and self.dc_ok and self._dc_path_everywhere() and self.chance(0.2):
            freqs = (0.0, *freqs)
        if "tight-coupling" in traits and not any(e.kind == "K" for e in self.elements):
            traits.remove("tight-coupling")
        if "high-gain" in traits and not any(e.kind in "EFGH" for e in self.elements):
            traits.remove("high-gain")
        if family == "awkward" and not traits:  # every planned trait fell through: values are always possible
            self._wide_values()
            traits = ["wide-values"]
        stressed = [_CAVEATS[t] for t in traits if t in _CAVEATS]
        if stressed:
            caveats.insert(0, f"{'; '.join(stressed)}: {_ILL_CONDITIONED}")
        if port is None:
            port, note = self._port()
            caveats += [note] if note else []
        if 0.0 in freqs and len(freqs) > 1 and _joined_through(self.elements, port, "LEH"):
            freqs = tuple(f for f in freqs if f > 0)  # at DC, shorting this port closes an inductor loop
        title = f"fuzz {family}{f' on {base}' if family == 'awkward' else ''} seed {self.seed}"
        network = Network(title, tuple(self.elements))
        validate(network, port)
        return GeneratedCase(self.seed, family, network, port, freqs, "; ".join(caveats), tuple(traits),
                             base if family == "awkward" else "")

    def _awkward_traits(self, passive: str) -> list[str]:
        kinds = self.knobs.kinds
        possible = [t for t in TRAITS if {
            "tank": "L" in passive and "C" in passive,
            "wide-values": True,
            "high-gain": any(x in kinds for x in "EFGH"),
            "tight-coupling": "L" in passive and "K" in kinds,
            "no-dc-port": "C" in passive and self.knobs.dc,
        }[t]]
        count = int(self.rng.integers(1, min(3, len(possible)) + 1))
        order = [possible[i] for i in self.rng.permutation(len(possible))]
        return [t for t in possible if t in order[:count]]

    def _plan(self, traits: list[str]) -> _Plan:
        kinds = self.knobs.kinds
        plan = _Plan()
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
        plan.isolated = "L" in kinds and "K" in kinds and (
            "tight-coupling" in traits or self.chance(0.12))
        plan.no_dc_port = "no-dc-port" in traits
        return plan

    def _passives(self, edges: list[tuple[str, str]], passive: str, force_first_l: bool) -> None:
        """One passive element per skeleton edge; an inductor that would close a loop becomes R or C."""
        uf = _UnionFind()
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
        nodes = [GROUND, *self._all_nodes()]
        pairs = [(a, b) for i, a in enumerate(nodes) for b in nodes[i + 1:] if uf.find(a) != uf.find(b)]
        return self.choice(pairs) if pairs else None

    def _all_nodes(self) -> list[str]:
        return list(Network("", tuple(self.elements)).nodes)

    def _control_pair(self, output: tuple[str, str]) -> tuple[str, str]:
        nodes = [GROUND, *self._all_nodes()]
        pairs = [(a, b) for a in nodes for b in nodes if a != b and {a, b} != set(output)]
        return self.choice(pairs) if pairs else (output[0], output[1])

    def _place_sources(self, plan: _Plan) -> None:
        """Series sources first (they take the planned nodes), then the rest; F and H after every V exists."""
        senses: dict[int, str] = {}
        for i, (kind, mode, control) in enumerate(plan.sources):
            if control == "sense":  # a 0 V source in series with a passive element, to sense its current
                m, far = self._split()
                senses[i] = self.add("V", self.swap(m, far), prefix="vs").name
        outputs: dict[int, tuple[str, str]] = {}
        for i, (kind, mode, _) in enumerate(plan.sources):
            if mode == "series":
                outputs[i] = self.swap(*self._split())
        # Series outputs first (the forest must hold them before a parallel one looks for a free pair),
        # then the rest; F and H after the others, so that every V they might sense exists.
        for i, (kind, mode, control) in sorted(enumerate(plan.sources),
                                               key=lambda t: (t[1][1] != "series", t[1][0] in "FH")):
            nodes = outputs.get(i)
            if nodes is None and kind in "VEH":
                nodes = self._free_pair()
                if nodes is None:
                    continue  # every loop-free place is taken: leave this source out
                nodes = self.swap(*nodes)
            elif nodes is None:
                nodes = self.pair([GROUND, *self._all_nodes()])
            if kind in "FH" and i not in senses and not any(e.kind == "V" for e in self.elements):
                kind = {"F": "G", "H": "E"}[kind]  # nothing to sense yet: the voltage-controlled twin instead
            if kind in "VI":
                self.add(kind, nodes, ac_mag=_tidy(_SOURCE_CENTRES[kind] * 10.0 ** self.uniform(-1.0, 1.0)),
                         ac_phase_deg=_tidy(self.uniform(-180.0, 180.0)))
            elif kind in "EG":
                self.add(kind, nodes + self._control_pair(nodes), self.gain(kind))
            else:
                ctl = senses.get(i) or self.choice([e.name for e in self.elements if e.kind == "V"])
                self.add(kind, nodes, self.gain(kind), control=ctl)

    def _couple(self, tight: bool) -> None:
        """K between disjoint pairs of inductors, so the inductance matrix stays positive definite."""
        free = [e.name for e in self.elements if e.kind == "L"]
        order = [free[i] for i in self.rng.permutation(len(free))]
        pairs = [(order[i], order[i + 1]) for i in range(0, len(order) - 1, 2)]
        for pair in pairs[: int(self.rng.integers(0, len(pairs) + 1))]:
            self.add("K", (), self._k(tight), coupled=pair)

    def _k(self, tight: bool) -> float:
        return _tidy(1.0 - 10.0 ** self.uniform(-6.0, -2.0)) if tight else _tidy(self.uniform(0.1, 0.95))

    def _isolated_secondary(self, passive: str, tight: bool) -> Port:
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

    def _frequencies(self) -> tuple[float, ...]:
        k = self.knobs
        count = int(self.rng.integers(1, k.max_freqs + 1))
        lo, hi = math.log10(k.min_hz), math.log10(k.max_hz)
        return tuple(sorted({_tidy(min(max(10.0 ** self.uniform(lo, hi), k.min_hz), k.max_hz))
                             for _ in range(count)}))

    def _dc_path_everywhere(self, except_node: str | None = None) -> bool:
        """Every node reaches ground (or its isolated part's reference) through R, L, V, E or H."""
        dc = _UnionFind()
        every = _UnionFind()
        for e in self.elements:
            if e.kind == "K":
                continue
            every.union(*e.terminals)
            if e.kind in "RLVEH":
                dc.union(*e.terminals)
        for n in self._all_nodes():
            if n == except_node:
                continue
            if every.find(n) == every.find(GROUND) and dc.find(n) != dc.find(GROUND):
                return False
            if every.find(n) != every.find(GROUND):  # an isolated part: all of it must hang together at DC
                if any(dc.find(n) != dc.find(m) for m in self._all_nodes() if every.find(m) == every.find(n)):
                    return False
        return True

    # ---- awkward traits

    def _wide_values(self) -> None:
        self.elements = [replace(e, value=_tidy(10.0 ** self.uniform(*_WIDE[e.kind]))) if e.kind in "RLC" else e
                         for e in self.elements]

    def _high_gains(self) -> None:
        self.elements = [replace(e, value=self.gain(e.kind, _HIGH_GAIN[e.kind])) if e.kind in "EFGH" else e
                         for e in self.elements]

    def _tank(self, freqs: Sequence[float]) -> bool:
        """A partner for an existing L (or C) that resonates within 1e-6..1e-2 of a test frequency."""
        f0 = self.choice([f for f in freqs if f > 0])
        detune = (1.0 + (-1.0 if self.chance(0.5) else 1.0) * 10.0 ** self.uniform(-6.0, -2.0)) * f0
        w2 = (2.0 * math.pi * detune) ** 2
        inductors = [e for e in self.elements if e.kind == "L" and e.nodes[0] != e.nodes[1]]
        if inductors:
            l = self.choice(inductors)
            self.add("C", l.nodes, _tidy(1.0 / (w2 * l.value)), prefix="ct")
            return True
        uf = self.forest()
        caps = [e for e in self.elements if e.kind == "C" and uf.find(e.nodes[0]) != uf.find(e.nodes[1])]
        if not caps:
            return False
        c = self.choice(caps)
        self.add("L", c.nodes, _tidy(1.0 / (w2 * c.value)), prefix="lt")
        return True

    def _no_dc_port(self, within: tuple[str, str] | None) -> tuple[Port, str]:
        """A new port node reached only through capacitors (and perhaps a current source); ``within`` keeps it
        inside an isolated part, whose port it takes over."""
        x = self.node()
        nodes = list(within) if within else [GROUND, *[n for n in self._all_nodes() if n != x]]
        self.add("C", self.swap(x, self.choice(nodes)), self.value("C"), prefix="cx")
        if self.chance(0.5):
            self.add("C", self.swap(x, self.choice(nodes)), self.value("C"), prefix="cx")
        if "I" in self.knobs.kinds and self.chance(0.5):
            self.add("I", self.swap(x, self.choice(nodes)), ac_mag=_tidy(1e-3 * 10.0 ** self.uniform(-1.0, 1.0)),
                     ac_phase_deg=_tidy(self.uniform(-180.0, 180.0)), prefix="ix")
        b = self.choice(nodes) if within or self.chance(0.3) else GROUND
        note = (f"port node {x} is reached only through capacitors: at 0 Hz it has no DC path, so the port sees "
                "a current source there and V_th and Z_th do not exist (I_N does, and Y_N = 0)")
        return Port(x, b), note

    def _port(self) -> tuple[Port, str]:
        """A port, ground-referenced or floating; not one whose nodes a controlled voltage source joins
        (shorting such a port puts two voltage-defined branches in parallel: singular for SPICE's short run)."""
        nodes = self._all_nodes()
        for _ in range(_PORT_TRIES):
            if self.preferred_ports and self.chance(0.6):
                port = Port(*self.swap(*self.choice(self.preferred_ports)))
            elif len(nodes) >= 2 and self.chance(0.35):
                port = Port(*self.pair(nodes))
            else:
                port = Port(*self.swap(self.choice(nodes), GROUND))
            if not _joined_through(self.elements, port, "EH"):
                return port, ""
        return port, _CAVEATS["controlled-port"]
