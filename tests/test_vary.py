"""The spread statement: --vary options, [[vary]] tables, and resolving patterns against a network."""

from __future__ import annotations

from pathlib import Path

import pytest

from crosscheck.errors import CaseFileError
from crosscheck.model.netlist import read_netlist
from crosscheck.model.network import dc_view
from crosscheck.model.vary import (
    SpreadError,
    SpreadSpec,
    Vary,
    apply_values,
    parse_tolerance,
    parse_vary_option,
    part_label,
    resolve,
    vary_from_case,
)

NETLIST = """filter in a subcircuit, our own scenario
V1 in 0 AC 1 DC 5
R1 in a 1k
R2 a 0 2k
X1 a out stage
.subckt stage p q
R1 p m 100
C1 m q 1u
.ends
RL out 0 10k
"""


@pytest.fixture(scope="module")
def network():
    return read_netlist(NETLIST)


def test_option_forms():
    assert parse_vary_option("R*=1%") == Vary(("r*",), 0.01, None, "uniform", None, "")
    assert parse_vary_option("C1=10n") == Vary(("c1",), None, 1e-8, "uniform", None, "")
    assert parse_vary_option("V1=10%:normal").dist == "normal"
    both = parse_vary_option("R1, R2=0.5%:corners@Pair")
    assert both.parts == ("r1", "r2") and both.group == "pair" and both.dist == "corners"
    assert both.tol_rel == pytest.approx(0.005, rel=1e-12)


@pytest.mark.parametrize(
    "text, words",
    [
        ("R1", "PATTERNS=TOL"),
        ("=1%", "no part names"),
        ("R1=150%", "below 100%"),
        ("R1=0%", "above 0%"),
        ("R1=-1n", "positive"),
        ("R1=1%:gauss", "unknown distribution 'gauss'"),
        ("R1=abc", "cannot read the tolerance 'abc'"),
        ("R1;rm=1%", "not a part name"),
        ("R" * 300 + "=1%", "at most 200"),
        (",".join(f"R{i}" for i in range(1001)) + "=1%", "at most 1000"),
    ],
)
def test_option_errors_say_what(text, words):
    with pytest.raises(SpreadError, match=words):
        parse_vary_option(text)


def test_tolerance_number_forms():
    assert parse_tolerance("5 %") == (pytest.approx(0.05, rel=1e-12), None)
    assert parse_tolerance(1e-9) == (None, 1e-9)
    assert parse_tolerance("2.2u") == (None, pytest.approx(2.2e-6, rel=1e-12))


def test_case_tables_and_their_errors():
    path = Path("case.toml")
    data = {
        "vary": [
            {"parts": ["R*", "X1.*"], "tol": "1%", "why": "E96 parts"},
            {"parts": "V1", "tol": "10%", "dist": "normal", "group": "Mains"},
        ]
    }
    varies = vary_from_case(path, data)
    assert varies[0] == Vary(("r*", "x1.*"), 0.01, None, "uniform", None, "E96 parts")
    assert varies[1].group == "mains" and varies[1].dist == "normal"
    cases = [
        ({"vary": [{"tol": "1%"}]}, r"vary\[1\]'.*no parts"),
        ({"vary": [{"parts": ["R1"], "tol": "1%", "spread": 2}]}, r"vary\[1\]'.*unknown key"),
        ({"vary": [{"parts": ["R1"], "tol": "x%"}]}, r"vary\[1\].tol'"),
        ({"vary": [{"parts": [1], "tol": "1%"}]}, r"vary\[1\].parts'"),
        ({"vary": [{"parts": ["R1"], "tol": "1%", "dist": "flat"}]}, r"vary\[1\].dist'"),
        ({"vary": [{"parts": ["R1"], "tol": "1%", "group": 3}]}, r"vary\[1\].group'"),
        ({"vary": {"parts": ["R1"]}}, "key 'vary'"),
    ]
    for data, words in cases:
        with pytest.raises(CaseFileError, match=words):
            vary_from_case(path, data)


def test_patterns_match_labels_inside_subcircuits(network):
    parts = resolve(network, SpreadSpec((parse_vary_option("R*=1%"), parse_vary_option("X1.*=5%@stage"))))
    assert [p.name for p in parts] == ["r1", "r2", "x1.r1", "x1.c1", "rl"]
    inner = {p.name: p for p in parts}["x1.c1"]
    assert inner.element == "c.x1.c1" and inner.group == "stage"
    assert inner.low == pytest.approx(0.95e-6, rel=1e-12) and inner.high == pytest.approx(1.05e-6, rel=1e-12)
    assert part_label("r.x1.r1") == "x1.r1" and part_label("rload") == "rload"


def test_sources_vary_their_excitation(network):
    ac = resolve(network, [parse_vary_option("V1=10%")])[0]
    assert (ac.parameter, ac.nominal, ac.delta) == ("ac_mag", 1.0, pytest.approx(0.1, rel=1e-12))
    dc_network = network.with_elements(network.elements)
    object.__setattr__(dc_network, "excitation", "dc")
    dc = resolve(dc_network, [parse_vary_option("V1=10%")])[0]
    assert (dc.parameter, dc.nominal) == ("dc_value", 5.0)
    moved = apply_values(dc_network, [dc], {"v1": 5.5})
    assert dc_view(moved).element("v1").ac_mag == 5.5


@pytest.mark.parametrize(
    "options, words",
    [
        (["Q*=1%"], "'q\\*' matches no element"),
        (["R*=1%", "R1=5%"], "r1 is named by both 'r\\*' and 'r1'"),
        (["R1=1%@g", "R2=1%:normal@g"], "group 'g' mixes"),
        (["R1=1.5k"], "would reach -500 at its low end"),
    ],
)
def test_resolve_errors_name_the_pattern(network, options, words):
    with pytest.raises(SpreadError, match=words):
        resolve(network, [parse_vary_option(o) for o in options])


def test_apply_values_changes_only_the_named_part(network):
    parts = resolve(network, [parse_vary_option("X1.*=5%")])
    moved = apply_values(network, parts, {"x1.r1": 105.0})
    assert moved.element("r.x1.r1").value == 105.0
    assert moved.element("c.x1.c1").value == network.element("c.x1.c1").value
    assert moved.element("r1").value == 1000.0
    with pytest.raises(SpreadError, match="no varied part is called"):
        apply_values(network, parts, {"r9": 1.0})
