"""The shrinker, driven by the own solver with and without an injected fault (no ngspice needed)."""

from __future__ import annotations

import pytest

from crosscheck.own.equivalent import thevenin
from crosscheck.fuzz.faults import faulty_route
from crosscheck.fuzz.generate import Knobs, generate_cases, well_posed
from crosscheck.model.network import Network, Port, make_element
from crosscheck.model.validation import validate
from crosscheck.fuzz.shrink import shrink, size_of

#: Relative difference that counts as "the fault shows": far above roundoff (~1e-12 on these networks).
SHOWS = 1e-6


def _fault_shows(fault: str):
    def still_fails(network: Network, port: Port, freqs: tuple[float, ...]) -> bool:
        healthy = thevenin(network, port, freqs)
        broken = faulty_route(fault)(network, port, freqs)
        for h, b in zip(healthy, broken):
            for q in ("vth", "zth"):
                x, y = getattr(h, q), getattr(b, q)
                if (x is None) != (y is None):
                    return True
                if x is not None and abs(x - y) > SHOWS * max(abs(x), abs(y)):
                    return True
        return False
    return still_fails


def _first_failing(fault: str, kinds: str):
    check = _fault_shows(fault)
    for case in generate_cases(4, 200, Knobs(kinds=kinds, min_nodes=4)):
        if check(case.network, case.port, case.freqs_hz):
            return case, check
    pytest.fail(f"no generated case showed {fault} in 200 tries")


@pytest.mark.parametrize("fault, kinds, max_elements", [
    ("vccs-sign", "RCVIG", 3),          # R and G (and perhaps a source) suffice
    ("capacitor-inverted", "RLCVI", 3),  # a capacitor and whatever makes it visible
    ("mutual-sign", "RLVIK", 5),         # two inductors, their K, and a path
])
def test_shrunk_case_still_fails_and_is_smaller(fault, kinds, max_elements):
    """Shrinking keeps the failure, never grows the case, and reaches a handful of elements, one frequency."""
    case, check = _first_failing(fault, kinds)
    result = shrink(case.network, case.port, case.freqs_hz, check, budget=300, admissible=well_posed)
    validate(result.network, result.port)
    assert check(result.network, result.port, result.freqs_hz)
    before, after = size_of(case.network, case.freqs_hz), result.size
    assert all(a <= b for a, b in zip(after, before)), (before, after)
    assert after[0] <= max_elements and after[2] == 1, (before, after, result.network)
    assert result.checks <= 300


def test_rounding_makes_values_round():
    """With a predicate that only needs a G element, every value ends as a power of ten or one digit."""
    net = Network("t", (make_element("r1", "R", ("n1", "0"), 1234.5678),
                        make_element("g1", "G", ("n1", "0", "n1", "0"), 0.0123456),
                        make_element("v1", "V", ("n2", "0"), ac_mag=1.7, ac_phase_deg=33.0),
                        make_element("r2", "R", ("n2", "n1"), 777.0)))

    def has_g(network, port, freqs):
        return any(e.kind == "G" for e in network.elements)

    result = shrink(net, Port("n1", "0"), (1234.0, 5678.0), has_g)
    values = [e.value for e in result.network.elements]
    assert all(float(f"{abs(v):.1g}") == abs(v) for v in values if v), values
    assert result.freqs_hz in ((1000.0,), (1e3,)) and result.size[0] < 4


def test_budget_is_respected():
    """The shrinker stops after ``budget`` checks even if it could go on."""
    case = next(iter(generate_cases(9, 1, Knobs(min_nodes=6))))
    calls = []

    def always(network, port, freqs):
        calls.append(1)
        return True

    result = shrink(case.network, case.port, case.freqs_hz, always, budget=7)
    assert len(calls) == result.checks == 7
