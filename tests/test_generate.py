"""The random network generator: reproducible, well posed, readable back, solvable; and its strategies.

No ngspice here: the fuzz tests (test_fuzz.py) run the generated cases through both engines.
"""

from __future__ import annotations

import math
from collections import Counter

import pytest
from hypothesis import given

from crosscheck.own.equivalent import thevenin
from crosscheck.fuzz.generate import FAMILIES, SEED_STRIDE, TRAITS, GeneratedCase, Knobs, case_seed, generate_case, generate_cases, well_posed
from crosscheck.model.netlist import read_netlist
from crosscheck.model.netlist_writer import write_netlist
from crosscheck.model.network import GROUND
from crosscheck.model.validation import validate
from crosscheck.fuzz.strategies import family_network_and_port, frequencies, generated_cases, ports

PER_FAMILY = 80


@pytest.fixture(scope="module")
def cases() -> dict[str, list[GeneratedCase]]:
    """PER_FAMILY cases of each family, seeded."""
    return {f: list(generate_cases(11, PER_FAMILY, Knobs(family=f))) for f in FAMILIES}


def test_same_seed_same_case():
    """A case seed rebuilds its case exactly, alone, as it was inside its run."""
    run = list(generate_cases(5, 30))
    again = [generate_case(case_seed(5, i)) for i in range(30)]
    assert run == again
    assert case_seed(5, 29) == 5 * SEED_STRIDE + 29
    assert run[0].seed == case_seed(5, 0)


def test_different_seeds_differ():
    """Seeds are not ignored: 50 consecutive case seeds give 50 different networks."""
    nets = {write_netlist(c.network).split("\n", 1)[1] for c in generate_cases(2, 50)}
    assert len(nets) == 50


def test_known_case_is_pinned():
    """One case pinned by its text, so a change to the generator's stream (or numpy's) is noticed.

    Regenerate the expectation when the generator is changed on purpose: the seeds in old reports then
    rebuild other cases, which the change log must say.
    """
    case = generate_case(case_seed(1, 0))
    text = write_netlist(case.network)
    assert case.family == "ladder"
    assert text.splitlines()[0] == f"fuzz ladder seed {SEED_STRIDE}"
    assert len(case.network.elements) == 13 and len(case.network.nodes) == 6
    # Exact: the generator rounds to 12 significant figures, so these are the very numbers it wrote.
    assert case.freqs_hz == (21209.0729535, 171203.111389, 1157311.89865)


@pytest.mark.parametrize("family", FAMILIES)
def test_round_trip_through_the_reader(cases, family):
    """Every generated netlist is accepted by the reader after a write/read round trip, element for element."""
    for case in cases[family]:
        text = write_netlist(case.network)
        back = read_netlist(text, file=f"seed {case.seed}", port=case.port)
        assert back.elements == case.network.elements, case.seed
        validate(back, case.port)


@pytest.mark.parametrize("family", FAMILIES)
def test_generated_cases_are_well_posed(cases, family):
    """Valid, within the node budget, with the promised structure; a case outside it says why (caveat)."""
    k = Knobs()
    for case in cases[family]:
        validate(case.network, case.port)
        assert k.min_nodes <= len(case.network.nodes) <= k.max_nodes, case.seed
        assert case.freqs_hz and all(f == 0 or k.min_hz <= f <= k.max_hz for f in case.freqs_hz), case.seed
        assert well_posed(case.network, case.port, case.freqs_hz) or case.caveat, case.seed
        assert case.family == family


@pytest.mark.parametrize("family", [f for f in FAMILIES if f != "awkward"])
def test_regular_families_are_solvable(cases, family):
    """The own solver answers every point of a case without a caveat: no singular matrix, V_th and Z_th exist."""
    for case in cases[family]:
        assert not case.caveat or "controlled voltage source" in case.caveat, case.seed
        for eq in thevenin(case.network, case.port, case.freqs_hz):
            assert eq.vth is not None and eq.zth is not None, (case.seed, eq.freq_hz, eq.note)


def test_awkward_cases_state_their_reason(cases):
    """Every awkward case carries traits and, where an answer may be missing or inexact, a caveat naming why."""
    seen = Counter()
    for case in cases["awkward"]:
        assert case.traits and case.base in FAMILIES[:-1], case.seed
        seen.update(case.traits)
        stressing = set(case.traits) - {"no-dc-port"}
        if stressing:
            assert "ill-conditioned" in case.caveat, case.seed
        if "no-dc-port" in case.traits:
            assert 0.0 in case.freqs_hz and "no DC path" in case.caveat, case.seed
    assert set(seen) == set(TRAITS)


def test_awkward_traits_do_what_they_say(cases):
    """Tight couplings are within 1e-2 of 1; wide values reach far outside ±decades; tanks resonate near a
    test frequency (within the 1e-2 detuning drawn, plus the 12-digit rounding of values)."""
    for case in cases["awkward"]:
        els = case.network.elements
        if "tight-coupling" in case.traits:
            assert all(0.99 <= e.value < 1.0 for e in els if e.kind == "K"), case.seed
        if "tank" in case.traits:
            partner = next(e for e in els if e.name.startswith(("ct", "lt")))
            other = next(e for e in els if e.kind != partner.kind and e.kind in "LC" and e.nodes == partner.nodes)
            f0 = 1.0 / (2.0 * math.pi * math.sqrt(partner.value * other.value))
            assert any(f > 0 and abs(f0 / f - 1.0) <= 1.01e-2 for f in case.freqs_hz), case.seed
    spans = [max(e.value for e in c.network.elements if e.kind in "RLC")
             / min(e.value for e in c.network.elements if e.kind in "RLC")
             for c in cases["awkward"] if "wide-values" in c.traits]
    assert spans and max(spans) > 1e12  # regular cases span at most 1e2 · (L/C centre ratio 1e6) per kind


def test_knobs_are_respected():
    """Node counts, element kinds and frequency range hold; F and H bring only 0 V sensing sources."""
    knobs = Knobs(min_nodes=3, max_nodes=4, kinds="RCFG", min_hz=1e3, max_hz=2e3, max_freqs=2, dc=False)
    for case in generate_cases(3, 60, knobs):
        assert 3 <= len(case.network.nodes) <= 4
        kinds = {e.kind for e in case.network.elements}
        assert kinds <= set("RCFGV"), kinds
        assert all(e.ac_mag == 0 for e in case.network.elements if e.kind == "V")
        assert all(1e3 <= f <= 2e3 for f in case.freqs_hz) and len(case.freqs_hz) <= 2


def test_ports_ground_referenced_and_floating(cases):
    """Both kinds of port occur, and bridges often measure across the bridge."""
    every = [c for f in FAMILIES for c in cases[f]]
    floating = sum(GROUND not in (c.port.a, c.port.b) for c in every)
    assert 0.1 * len(every) < floating < 0.9 * len(every)
    across = sum(GROUND not in (c.port.a, c.port.b) for c in cases["bridge"])
    assert across > len(cases["bridge"]) / 3


def test_bad_knobs_are_refused():
    """Knobs that cannot make a network say what is wrong."""
    with pytest.raises(ValueError, match="no R, L or C"):
        Knobs(kinds="VI")
    with pytest.raises(ValueError, match="unknown family"):
        Knobs(family="star")
    with pytest.raises(ValueError, match="min <= max"):
        Knobs(min_nodes=5, max_nodes=2)
    with pytest.raises(ValueError, match=">= 0"):
        case_seed(-1, 0)


@given(generated_cases(family="ladder", max_nodes=5))
def test_strategy_cases_round_trip(case):
    """The family strategy yields cases the reader takes back unchanged."""
    assert read_netlist(write_netlist(case.network), port=case.port).elements == case.network.elements
    assert case.family == "ladder" and len(case.network.nodes) <= 5


@given(family_network_and_port(), frequencies())
def test_strategy_composes_with_frequencies(network_port, f):
    """Family networks at drawn frequencies solve: one equivalent at exactly that frequency, with a Thevenin or
    a Norton form (a port always has one of them) and a finite condition number."""
    network, port = network_port
    [eq] = thevenin(network, port, [f])
    assert eq.freq_hz == f
    assert eq.zth is not None or eq.yn is not None
    assert math.isfinite(eq.condition) and eq.condition >= 1.0


@given(generated_cases(family="grid").flatmap(lambda c: ports(c.network).map(lambda p: (c, p))))
def test_strategy_composes_with_ports(case_port):
    """``ports`` draws any pair of a family network's nodes; each is a valid port of it (no isolated parts here)."""
    case, port = case_port
    assert port.a != port.b and {port.a, port.b} <= set(case.network.nodes) | {"0"}
    if not any(e.name.startswith("ls") for e in case.network.elements):  # no isolated secondary
        validate(case.network, port)


@given(family_network_and_port(family="ladder", max_nodes=6, kinds="RLCVI"), frequencies())
def test_readme_property_example(network_port, f):
    """The README's example property holds: a passive ladder's Z_th has no negative resistance.

    Tolerance 1e-9 of |Z_th|: roundoff of one solve (common practice).
    """
    network, port = network_port
    [eq] = thevenin(network, port, [f])
    assert eq.zth.real >= -1e-9 * abs(eq.zth)
