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

The work is split by job: ``knobs`` (what may be drawn, shared with the hypothesis strategies),
``draft`` (the case under construction and its random stream), ``skeletons`` (the families'
topologies), ``traits`` (the awkward family's stresses and caveats); this module puts a case together.
"""

from __future__ import annotations

from collections.abc import Iterator, Sequence
from dataclasses import dataclass

import numpy as np

from crosscheck.fuzz.draft import Draft, Plan, joined_through
from crosscheck.fuzz.knobs import ALL_KINDS, FAMILIES, MIXED, TRAITS, Knobs, KnobsError
from crosscheck.fuzz.skeletons import SKELETONS
from crosscheck.fuzz.traits import CAVEATS, ILL_CONDITIONED, awkward_traits, high_gains, no_dc_port, tank, wide_values
from crosscheck.model.graph import UnionFind
from crosscheck.model.network import GROUND, Network, Port
from crosscheck.model.validation import validate

__all__ = [
    "ALL_KINDS",
    "FAMILIES",
    "MIXED",
    "SEED_STRIDE",
    "TRAITS",
    "GeneratedCase",
    "Knobs",
    "case_seed",
    "generate_case",
    "generate_cases",
    "well_posed",
]

#: Seeds of the cases of one run: case_seed(S, i) = S * SEED_STRIDE + i (a prime, so runs rarely overlap).
SEED_STRIDE = 1_000_003
#: The knobs of ``crosscheck fuzz`` when none are given.
DEFAULT_KNOBS = Knobs()


def well_posed(network: Network, port: Port, freqs: Sequence[float]) -> bool:
    """What the generator promises beyond ``validate``: no loop of inductors and voltage-defined branches,
    no port joined through E or H, and at 0 Hz a DC path to every node but the port's, and no port
    whose short would close an inductor loop. The shrinker keeps to it, so a shrunk case fails for
    the reason the original did, not because shrinking made it ill-posed."""
    forest = UnionFind()
    for e in network.elements:
        if (e.kind in "LVEH" or e.is_short) and not forest.union(*e.terminals):
            return False
    if joined_through(network.elements, port, "EH"):
        return False
    if 0.0 not in freqs:
        return True
    if joined_through(network.elements, port, "LEH"):
        return False
    dc, every = UnionFind(), UnionFind()
    for e in network.elements:
        if e.kind != "K":
            every.union(*e.terminals)
            if e.kind in "RLVEH":
                dc.union(*e.terminals)
    reference = GROUND if every.find(port.b) == every.find(GROUND) else port.b
    return all(
        dc.find(n) == dc.find(GROUND) or dc.find(n) == dc.find(reference) or n in (port.a, port.b)
        for n in network.nodes
        if every.find(n) in (every.find(GROUND), every.find(reference))
    )


def case_seed(run_seed: int, index: int) -> int:
    """The seed of case ``index`` of the run seeded ``run_seed``; ``generate_case`` rebuilds it alone."""
    if run_seed < 0 or index < 0:
        raise KnobsError(f"seeds and case indices must be >= 0 (got seed {run_seed}, index {index})")
    return int(run_seed) * SEED_STRIDE + int(index)


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


def generate_case(seed: int, knobs: Knobs = DEFAULT_KNOBS) -> GeneratedCase:
    """The case for ``seed`` (see ``case_seed``): the same seed and knobs give the same case everywhere."""
    if seed < 0:
        raise KnobsError(f"seed must be >= 0 (got {seed})")
    rng = np.random.Generator(np.random.PCG64(seed))
    family = knobs.family if knobs.family != MIXED else FAMILIES[int(rng.integers(len(FAMILIES)))]
    return _build(Draft(rng, knobs, seed), family)


def generate_cases(run_seed: int, count: int, knobs: Knobs = DEFAULT_KNOBS) -> Iterator[GeneratedCase]:
    """Cases 0..count-1 of the run seeded ``run_seed``, lazily."""
    for i in range(count):
        yield generate_case(case_seed(run_seed, i), knobs)


def _build(d: Draft, family: str) -> GeneratedCase:
    """The whole case, drawn in a fixed order from the draft's random stream."""
    passive = "".join(x for x in "RLC" if x in d.knobs.kinds)
    traits: list[str] = []
    base = family
    if family == "awkward":
        base = d.choice(FAMILIES[:-1])
        traits = awkward_traits(d, passive)
    plan, traits = _skeleton(d, base, passive, traits)
    port = None
    if plan.isolated:
        port = d.isolated_secondary(passive, tight="tight-coupling" in traits)
    freqs = d.frequencies()
    traits = _stress(d, traits, freqs)
    port, freqs, caveats, traits = _direct_current(d, plan, port, freqs, traits)
    if "tight-coupling" in traits and not any(e.kind == "K" for e in d.elements):
        traits.remove("tight-coupling")
    if "high-gain" in traits and not any(e.kind in "EFGH" for e in d.elements):
        traits.remove("high-gain")
    if family == "awkward" and not traits:  # every planned trait fell through: values are always possible
        wide_values(d)
        traits = ["wide-values"]
    stressed = [CAVEATS[t] for t in traits if t in CAVEATS]
    if stressed:
        caveats.insert(0, f"{'; '.join(stressed)}: {ILL_CONDITIONED}")
    if port is None:
        port, note = d.port()
        caveats += [note] if note else []
    if 0.0 in freqs and len(freqs) > 1 and joined_through(d.elements, port, "LEH"):
        freqs = tuple(f for f in freqs if f > 0)  # at DC, shorting this port closes an inductor loop
    title = f"fuzz {family}{f' on {base}' if family == 'awkward' else ''} seed {d.seed}"
    network = Network(title, tuple(d.elements))
    validate(network, port)
    return GeneratedCase(
        d.seed, family, network, port, freqs, "; ".join(caveats), tuple(traits), base if family == "awkward" else ""
    )


def _skeleton(d: Draft, base: str, passive: str, traits: list[str]) -> tuple[Plan, list[str]]:
    """The node budget, the plan (trimmed to fit it), the skeleton's branches, the sources and couplings."""
    k = d.knobs
    n_total = int(d.rng.integers(k.min_nodes, k.max_nodes + 1))
    plan = d.plan(traits)
    while n_total - plan.nodes_needed() < 1:  # too small for the plan: drop the latest additions
        if plan.no_dc_port:
            plan.no_dc_port = False
        elif plan.isolated:
            plan.isolated = False
        else:
            plan.sources.pop()
    traits = [t for t in traits if (t != "no-dc-port" or plan.no_dc_port)]
    skeleton_nodes = [d.node() for _ in range(n_total - plan.nodes_needed())]
    edges = SKELETONS[base](d, skeleton_nodes)
    d.passives(edges, passive, force_first_l=plan.isolated)
    d.place_sources(plan)
    if "K" in k.kinds:
        d.couple(tight="tight-coupling" in traits)
    return plan, traits


def _stress(d: Draft, traits: list[str], freqs: tuple[float, ...]) -> list[str]:
    """Wide values, high gains and a tank, as the traits ask; a tank that finds no partner drops its trait."""
    if "wide-values" in traits:
        wide_values(d)
    if "high-gain" in traits:
        high_gains(d)
    if "tank" in traits:
        applied = tank(d, freqs)
        traits = [t for t in traits if t != "tank" or applied]
    return traits


def _direct_current(
    d: Draft, plan: Plan, port: Port | None, freqs: tuple[float, ...], traits: list[str]
) -> tuple[Port | None, tuple[float, ...], list[str], list[str]]:
    """Whether 0 Hz is asked for: always with a port reached only through capacitors (when the rest of the
    network has a DC path), otherwise sometimes when every node has one. Returns the port, the
    frequencies, the caveats so far and the traits."""
    caveats: list[str] = []
    if plan.no_dc_port:
        port, note = no_dc_port(d, within=(port.a, port.b) if port is not None else None)
        if d.dc_ok and d.dc_path_everywhere(except_node=port.a):
            freqs = tuple(sorted({0.0, *freqs}))
            caveats.append(note)
        else:  # the rest of the network has no DC path either: 0 Hz is out, and the trait with it
            traits.remove("no-dc-port")
    elif d.knobs.dc and d.dc_ok and d.dc_path_everywhere() and d.chance(0.2):
        freqs = (0.0, *freqs)
    return port, freqs, caveats, traits
