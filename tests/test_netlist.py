"""Reading the SPICE subset (as others write it), flattening subcircuits, and writing netlists back."""

from __future__ import annotations

import itertools
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from crosscheck.errors import Location, NetlistError, NetworkError, ValueSyntaxError
from crosscheck.model.netlist import (MAX_SUBCKT_DEPTH, read_netlist, read_netlist_file, read_netlist_file_with_notes,
                                      read_netlist_reading, read_netlist_with_notes)
from crosscheck.model.netlist_writer import format_element, write_netlist
from crosscheck.model.network import Element, Network, Port, make_element
from crosscheck.model.validation import validate
from crosscheck.model.params import evaluate

DATA = Path(__file__).parent / "data" / "netlists"


def line_of(text: str, needle: str) -> int:
    """1-based number of the first line containing ``needle``."""
    for number, line in enumerate(text.splitlines(), start=1):
        if needle in line:
            return number
    raise AssertionError(f"{needle!r} not in the text")


# ----------------------------------------------------------------------------- a realistic netlist

# Worked by hand from sensor_bridge.cir: Rbridge = 4.7k, Rtrim = 4.7k/10 = 470, Gain = 2*(1 + 4700/470) = 22.
EXPECTED_BRIDGE = [
    ("vexc", "V", ("exc", "0"), 0.0, 1.0, None),
    ("vsense", "V", ("exc", "top"), 0.0, 0.0, None),
    ("r.xbridge.r1", "R", ("top", "outp"), 4700.0, 0.0, None),
    ("r.xbridge.r2", "R", ("outp", "0"), 5170.0, 0.0, None),
    ("r.xbridge.r3", "R", ("top", "outn"), 4700.0, 0.0, None),
    ("r.xbridge.r4", "R", ("outn", "0"), 4700.0, 0.0, None),
    ("r_load", "R", ("outp", "outn"), 2.2e6, 0.0, None),
    ("cfilt", "C", ("outp", "outn"), 10e-9, 0.0, None),
    ("r.xamp.xbuf.rin", "R", ("outp", "xamp.mid"), 1e6, 0.0, None),
    ("c.xamp.xbuf.cin", "C", ("outp", "xamp.mid"), 2.2e-12, 0.0, None),
    ("e.xamp.eamp", "E", ("adc", "0", "xamp.mid", "outn"), 22.0, 0.0, None),
    ("r.xamp.rout", "R", ("adc", "0"), 10e3, 0.0, None),
    ("fmirror", "F", ("mon", "0"), 0.5, 0.0, "vsense"),
    ("rmon", "R", ("mon", "0"), 1e3, 0.0, None),
    ("ladc", "L", ("adc", "adc2"), 4.7e-6, 0.0, None),
    ("cadc", "C", ("adc2", "0"), 100e-12, 0.0, None),
    ("radc", "R", ("adc2", "0"), 9400.0, 0.0, None),
]


@pytest.fixture
def bridge_text() -> str:
    return (DATA / "sensor_bridge.cir").read_text(encoding="utf-8")


def test_realistic_netlist_reads_to_the_hand_worked_elements(bridge_text: str) -> None:
    """Title, comments, continuation, mixed case, Meg/uF units, .param arithmetic and nested subcircuits."""
    net, _ = read_netlist_with_notes(bridge_text, "sensor_bridge.cir")
    assert net.title == "Sensor Bridge Front End -- AC model at the ADC input"
    got = [(e.name, e.kind, e.nodes, e.value, e.ac_mag, e.control) for e in net.elements]
    assert [g[:3] for g in got] == [x[:3] for x in EXPECTED_BRIDGE]
    for g, x in zip(got, EXPECTED_BRIDGE):
        assert g[3] == pytest.approx(x[3], rel=1e-15), g[0]  # tolerance: rel 1e-15 (one float rounding)
        assert g[4:] == x[4:], g[0]


def test_realistic_netlist_notes_name_the_ignored_cards(bridge_text: str) -> None:
    """.options, .ac and .print are accepted, and each one is reported with its line."""
    _, notes = read_netlist_with_notes(bridge_text, "sensor_bridge.cir")
    for card in (".Options", ".ac", ".print"):
        expected = f"sensor_bridge.cir:{line_of(bridge_text, card + ' ')}: {card} card ignored"
        assert any(n.startswith(expected) for n in notes), (card, notes)
    assert len(notes) == 3


def test_elements_carry_the_line_where_their_card_starts(bridge_text: str) -> None:
    """`where` names the file and the card's first line, even for a card continued with +."""
    net = read_netlist(bridge_text, "sensor_bridge.cir")
    assert net.element("radc").where == Location("sensor_bridge.cir", line_of(bridge_text, "Radc adc2 0"))
    assert net.element("r.xbridge.r2").where == Location("sensor_bridge.cir", line_of(bridge_text, "R2 p ref"))


def test_realistic_netlist_round_trips(bridge_text: str, tmp_path: Path) -> None:
    """write -> read gives an identical Network, and the written netlist needs no notes."""
    net = read_netlist(bridge_text)
    path = tmp_path / "written.cir"
    path.write_text(write_netlist(net), encoding="utf-8")
    again, notes = read_netlist_file_with_notes(path)
    assert again == net
    assert notes == []
    assert write_netlist(again) == write_netlist(net)


@pytest.mark.spice
def test_ngspice_reads_the_original_as_we_do(bridge_text: str) -> None:
    """ngspice reading the original file (its own .param, units and subcircuit flattening) and ngspice reading
    our written netlist give the same vectors, under the same flattened names: the reader means what SPICE means."""
    from crosscheck.spice.engine import Engine
    from crosscheck.spice.deck import Deck

    sweep = ".ac lin 3 10 100k"
    original = bridge_text.replace(".ac dec 20 10 100k", sweep).replace(".print ac v(adc)\n", "")
    ours = write_netlist(read_netlist(bridge_text)).replace(".end\n", f"{sweep}\n.end\n")
    engine = Engine()

    def vectors(text: str) -> dict[str, np.ndarray]:
        plots, _ = engine.run(Deck(text, (), {}, (), (), {}))
        (plot,) = plots.values()
        return plot

    theirs, mine = vectors(original), vectors(ours)
    assert sorted(mine) == sorted(theirs) and "xamp.mid" in mine and "e.xamp.eamp#branch" in mine
    for name, values in theirs.items():
        # tolerance: rel 1e-12; the same engine solves the same equations, so only rounding may differ.
        np.testing.assert_allclose(mine[name], values, rtol=1e-12, atol=0, err_msg=name)


def test_read_netlist_file_names_the_file_in_locations() -> None:
    """Reading from disk puts the path into every element's location."""
    net = read_netlist_file(DATA / "sensor_bridge.cir")
    assert net.element("vexc").where.file == str(DATA / "sensor_bridge.cir")


# ----------------------------------------------------------------------------- lexical rules


def test_title_is_always_the_first_line_and_an_element_like_title_gets_a_warning() -> None:
    """SPICE reads line 1 as the title even when it looks like a card; we say so in a warning."""
    net, reading = read_netlist_reading("R9 a 0 1k\nV1 a 0 AC 1\nR1 a 0 1k\n")
    assert net.title == "R9 a 0 1k"
    assert [e.name for e in net.elements] == ["v1", "r1"]
    assert reading.notes == ()
    (warning,) = reading.warnings
    assert warning.code == "title-is-element" and str(warning.location) == "<string>:1" and "title" in warning.message


def test_comments_continuations_case_and_line_endings() -> None:
    """*, ; and $ comments, + continuation after a comment line, CRLF endings, a BOM and mixed case."""
    text = ("\ufeffTitle\r\n* full-line comment\r\n  * indented comment\r\nV1 IN 0 ; inline\r\n* between\r\n"
            "+ AC 2 $ dollar comment\r\nR1 In GND 1K\r\n\r\nr2 in 0 2k;no space\r\n.END\r\n")
    net = read_netlist(text)
    assert net.title == "Title"
    assert [(e.name, e.nodes) for e in net.elements] == [("v1", ("in", "0")), ("r1", ("in", "0")),
                                                         ("r2", ("in", "0"))]
    assert net.element("v1").ac_mag == 2.0
    assert net.element("r1").value == 1000.0


def test_dollar_inside_a_word_is_not_a_comment() -> None:
    """Only a '$' standing alone starts a comment (ngspice's rule), so a$b stays a node name."""
    with pytest.raises(NetlistError, match="not a valid name"):
        read_netlist("t\nR1 a$b 0 1k\n")


def test_end_stops_reading_and_later_text_is_noted() -> None:
    """Anything after .end is ignored, even an invalid card, and the note says so."""
    net, notes = read_netlist_with_notes("t\nR1 a 0 1k\nI1 0 a AC 1\n.end\nQ1 c b e model\n")
    assert len(net.elements) == 2
    assert "<string>:4: text after .end ignored" in notes


def test_fields_may_be_separated_by_commas_and_equals() -> None:
    """ngspice separates fields by blanks, commas and '=' (R1 a b r=1k)."""
    net = read_netlist("t\nR1 a,0 r=1k\nL1 a b l = 1m\nC1 b 0 c=1p\nR2 b 0 resistance=2k\n")
    assert [e.value for e in net.elements] == [1000.0, 1e-3, 1e-12, 2000.0]


# ----------------------------------------------------------------------------- sources

# from memory: Ngspice User's Manual, "Independent Sources for Voltage or Current": AC magnitude defaults to 1,
# phase to 0 degrees; DC and transient parts do not enter AC analysis. The rows were also run through
# ngspice 39 (v(n) across 1 ohm at 1 kHz) and gave these magnitudes and phases.
SOURCE_FORMS = [
    ("AC", 1.0, 0.0), ("AC 2", 2.0, 0.0), ("DC 5 AC 2 90", 2.0, 90.0), ("5", 0.0, 0.0), ("", 0.0, 0.0),
    ("3 AC 2", 2.0, 0.0), ("AC 2 45 SIN(0 1 1k)", 2.0, 45.0), ("SIN(0 1 1k) AC 2", 2.0, 0.0),
    ("AC=3", 3.0, 0.0), ("dc=2 ac=3", 3.0, 0.0), ("AC 2 ; comment", 2.0, 0.0), ("ac 2 -30", 2.0, -30.0),
    ("AC 2 45 dc 3", 2.0, 45.0), ("AC 2 45 PULSE (0 1 0 1n 1n 1u 2u)", 2.0, 45.0), ("dc -1.5 ac 1m", 1e-3, 0.0),
    ("AC {2*amp} {ph}", 3.0, -60.0), ("DC {amp} AC 1", 1.0, 0.0),
]


@pytest.mark.parametrize(("form", "mag", "phase"), SOURCE_FORMS)
@pytest.mark.parametrize("kind", ["V", "I"])
def test_independent_source_forms(kind: str, form: str, mag: float, phase: float) -> None:
    """The AC magnitude and phase (degrees) of each source form; DC values are read and ignored."""
    text = f"t\n.param amp=1.5 ph=-60\n{kind}1 a 0 {form}\nR1 a 0 1k\n"
    e = read_netlist(text).element(f"{kind.lower()}1")
    assert (e.kind, e.value, e.ac_mag, e.ac_phase_deg) == (kind, 0.0, mag, phase)  # tolerance: exact


def test_transient_function_is_noted() -> None:
    """A parenthesised transient function is ignored with a note naming the source and the line."""
    _, notes = read_netlist_with_notes("t\nV1 a 0 AC 1 PWL(0 0 1u 1)\nR1 a 0 1k\n", "s.cir")
    assert notes == ["s.cir:2: v1: transient function PWL(...) ignored: it has no effect on AC analysis"]


def test_controlled_sources_and_coupling() -> None:
    """E, G (node pairs), F, H (a controlling V) and K (two inductors) read into the model's fields."""
    text = ("t\nV1 a 0 AC 1\nVs a b 0\nR1 b 0 1k\nE1 c 0 a b 2.5\nG1 0 d a 0 1m\nF1 0 e Vs 3\nH1 f 0 VS 50\n"
            "Rc c 0 1k\nRd d 0 1k\nRe e 0 1k\nRf f 0 1k\nL1 a 0 1m\nL2 g 0 4m\nRg g 0 1\nK12 L1 l2 0.99\n")
    net = read_netlist(text)
    assert net.element("e1") == make_element("e1", None, ("c", "0", "a", "b"), 2.5)
    assert net.element("g1") == make_element("g1", None, ("0", "d", "a", "0"), 1e-3)
    assert net.element("f1") == make_element("f1", None, ("0", "e"), 3.0, control="vs")
    assert net.element("h1") == make_element("h1", None, ("f", "0"), 50.0, control="vs")
    assert net.element("k12") == make_element("k12", "K", (), 0.99, coupled=("l1", "l2"))


# ----------------------------------------------------------------------------- .param and {expr}


@pytest.mark.parametrize(("expr", "expected"), [
    ("1k", 1000.0), ("2*r0 + 1k", 1100.0), ("-r0", -50.0), ("+r0", 50.0), ("(1+2)*3", 9.0), ("2**10", 1024.0),
    ("2^3", 8.0), ("1/4", 0.25), ("r0/2.5meg", 2e-5), ("--2", 2.0), ("R0*2", 100.0), ("3 - -1", 4.0),
])
def test_expression_arithmetic(expr: str, expected: float) -> None:
    """Plain arithmetic with engineering numbers and earlier parameters (case-insensitive names)."""
    assert evaluate(expr, {"r0": 50.0}) == pytest.approx(expected, rel=1e-15)  # tolerance: rel 1e-15


@pytest.mark.parametrize("expr", [
    "__import__('os').system('touch pwned')", "().__class__", "r0.real", "lambda: 1", "[1]", "sqrtt(2)",
    "open('x')", "r0 if 1 else 2", "1 <", "x", "1/0", "10**400", "(-8)**0.5", "1e400", "", "2 3", "4k7",
    "r0 = 1", "1; 2", "(" * 300 + "1" + ")" * 300, "1" + "+1" * 6000,
])
def test_expression_refuses_everything_else(expr: str, tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """Anything but arithmetic is refused with ValueSyntaxError, and nothing is executed."""
    monkeypatch.chdir(tmp_path)
    with pytest.raises(ValueSyntaxError):
        evaluate(expr, {"r0": 50.0})
    assert list(tmp_path.iterdir()) == []


def test_param_cards_evaluate_in_order_and_values_use_them() -> None:
    """.param assignments see earlier ones; {expr} element values see all top-level parameters."""
    text = "t\nR1 a 0 {r2val/2}\n.param base=1k\n.param r2val = {base*4} k2=0.5\nR2 a 0 {r2val}\nL1 a 0 1m\n" \
           "L2 a 0 {base*1u}\nK1 L1 L2 {k2}\n"
    net = read_netlist(text)
    assert [e.value for e in net.elements] == [2000.0, 4000.0, 1e-3, 1e-3, 0.5]  # tolerance: exact


# ----------------------------------------------------------------------------- subcircuits


def test_flattening_follows_ngspice_names() -> None:
    """R2 in X2 in X1 is r.x1.x2.r2; internal nodes get the instance path; F and K references follow."""
    text = """t
.subckt inner p q
R2 p n3 1k
Vs n3 q 0
F1 p q vs 2
L1 p 0 1m
L2 q 0 1m
K1 L1 L2 0.5
.ends
.subckt outer a b
X2 a b inner
R9 b 0 1k
.ends
V1 in 0 AC 1
X1 in out outer
Rl out 0 1k
"""
    net = read_netlist(text)
    assert [(e.name, e.nodes) for e in net.elements] == [
        ("v1", ("in", "0")),
        ("r.x1.x2.r2", ("in", "x1.x2.n3")), ("v.x1.x2.vs", ("x1.x2.n3", "out")), ("f.x1.x2.f1", ("in", "out")),
        ("l.x1.x2.l1", ("in", "0")), ("l.x1.x2.l2", ("out", "0")), ("k.x1.x2.k1", ()),
        ("r.x1.r9", ("out", "0")), ("rl", ("out", "0")),
    ]
    assert net.element("f.x1.x2.f1").control == "v.x1.x2.vs"
    assert net.element("k.x1.x2.k1").coupled == ("l.x1.x2.l1", "l.x1.x2.l2")


def test_two_instances_get_separate_internal_nodes() -> None:
    """Each instance has its own internal nodes; ground inside a subcircuit stays global ground."""
    text = "t\n.subckt rc a\nR1 a m 1k\nC1 m gnd 1n\n.ends\nV1 in 0 AC 1\nXa in rc\nXb in rc\n"
    net = read_netlist(text)
    assert [(e.name, e.nodes) for e in net.elements][1:] == [
        ("r.xa.r1", ("in", "xa.m")), ("c.xa.c1", ("xa.m", "0")),
        ("r.xb.r1", ("in", "xb.m")), ("c.xb.c1", ("xb.m", "0")),
    ]


def test_nesting_up_to_the_limit_is_accepted() -> None:
    """MAX_SUBCKT_DEPTH levels of nested instances read; the innermost element has the full path."""
    depth = MAX_SUBCKT_DEPTH
    cards = [f".subckt s{i} a\nX{i + 1} a s{i + 1}\n.ends" for i in range(1, depth)]
    cards.append(f".subckt s{depth} a\nR1 a 0 1k\n.ends")
    net = read_netlist("t\n" + "\n".join(cards) + "\nX1 in s1\nV1 in 0 AC 1\n")
    assert net.elements[0].name == "r." + ".".join(f"x{i}" for i in range(1, depth + 1)) + ".r1"


# ----------------------------------------------------------------------------- keyword options


def test_allow_negative_and_port_are_passed_to_validation() -> None:
    """Negative R reads when allowed; a floating secondary reads when the port lies in it."""
    assert read_netlist("t\nV1 a 0 AC 1\nR1 a 0 -1k\n", allow_negative=True).element("r1").value == -1000.0
    text = "t\nV1 a 0 AC 1\nL1 a 0 1m\nL2 s1 s2 1m\nK1 L1 L2 0.9\nR2 s1 s2 1k\n"
    with pytest.raises(NetworkError, match="floating"):
        read_netlist(text)
    assert len(read_netlist(text, port=Port("s1", "s2")).elements) == 5


# ----------------------------------------------------------------------------- writer


def test_format_element_forms() -> None:
    """One card per kind; sources always DC value AC mag phase; numbers are repr(float)."""
    assert format_element(make_element("r.x1.r2", None, ("a", "x1.n3"), 4700)) == "r.x1.r2 a x1.n3 4700.0"
    assert format_element(make_element("v1", None, ("a", "0"), ac_mag=1, ac_phase_deg=-30)) == \
        "v1 a 0 DC 0.0 AC 1.0 -30.0"
    assert format_element(make_element("g1", None, ("a", "0", "b", "c"), 1e-3)) == "g1 a 0 b c 0.001"
    assert format_element(make_element("h1", None, ("a", "0"), 50, control="vs")) == "h1 a 0 vs 50.0"
    assert format_element(make_element("k1", "K", (), 0.1, coupled=("l1", "l2"))) == "k1 l1 l2 0.1"


@pytest.mark.parametrize("element", [
    Element("r1", "R", ("a\n.control", "0"), 1.0),
    Element("r1", "R", ("a b", "0"), 1.0),
    Element("r1", "R", ("A", "0"), 1.0),
    Element("v1", "V", ("a;rm", "0")),
    Element("f1", "F", ("a", "0"), 1.0, control="v1 0"),
    Element("k1", "K", (), 0.5, coupled=("l1", "l2\n.include x")),
    Element("x1", "R", ("a", "0"), 1.0),
])
def test_writer_refuses_names_that_could_inject_cards(element: Element) -> None:
    """The writer is the only source of ngspice input: a name that is not a plain token is refused."""
    with pytest.raises(NetworkError):
        format_element(element)


def test_writer_refuses_a_multi_line_title() -> None:
    """A title with a line break would become a second card in ngspice's input."""
    with pytest.raises(NetworkError, match="title"):
        write_netlist(Network("ok\n.control", (make_element("r1", None, ("a", "0"), 1.0),)))


_node = st.one_of(st.from_regex(r"\A[a-z][a-z0-9_.:#+\-\[\]<>!/]{0,6}\Z"), st.from_regex(r"\A[1-9][0-9]{0,3}\Z"))
_positive = st.floats(min_value=1e-15, max_value=1e15)
_gain = st.floats(min_value=-1e6, max_value=1e6, allow_nan=False)


@st.composite
def networks(draw: st.DrawFn) -> Network:
    """Random valid networks: a path of R/V/E/H/short branches from ground (voltage branches on a path
    never close a loop), plus R, L, C, I, G, F branches anywhere and K between inductor pairs."""
    nodes = draw(st.lists(_node.filter(lambda n: n != "gnd"), min_size=1, max_size=6, unique=True))
    every = ["0", *nodes]
    serial = itertools.count(1)

    def name(kind: str) -> str:
        i = next(serial)
        return f"{kind}.x{i}.{kind}{i}" if draw(st.booleans()) else f"{kind}{i}"

    def source(kind: str, a: str, b: str) -> Element:
        return make_element(name(kind), None, (a, b), ac_mag=draw(st.floats(0, 1e6)),
                            ac_phase_deg=draw(st.floats(-360, 360)))

    vnames: list[str] = []
    elements: list[Element] = []
    for i, node in enumerate(nodes):
        a, b = node, every[i]
        kind = "v" if i == 0 else draw(st.sampled_from("rrvehs"))
        if kind == "v":
            elements.append(source("v", a, b))
            vnames.append(elements[-1].name)
        elif kind in "rs":
            elements.append(make_element(name("r"), None, (a, b), 0.0 if kind == "s" else draw(_positive)))
        elif kind == "e":
            elements.append(make_element(name("e"), None, (a, b, draw(st.sampled_from(every)),
                                                           draw(st.sampled_from(every))), draw(_gain)))
        else:
            elements.append(make_element(name("h"), None, (a, b), draw(_gain), control=draw(st.sampled_from(vnames))))
    inductors: list[str] = []
    for kind in draw(st.lists(st.sampled_from("rlcigf"), max_size=8)):
        a, b = draw(st.lists(st.sampled_from(every), min_size=2, max_size=2, unique=True))  # every has >= 2 nodes
        if kind in "rlc":
            elements.append(make_element(name(kind), None, (a, b), draw(_positive)))
            if kind == "l":
                inductors.append(elements[-1].name)
        elif kind == "i":
            elements.append(source("i", a, b))
        elif kind == "g":
            elements.append(make_element(name("g"), None, (a, b, draw(st.sampled_from(every)),
                                                           draw(st.sampled_from(every))), draw(_gain)))
        else:
            elements.append(make_element(name("f"), None, (a, b), draw(_gain), control=draw(st.sampled_from(vnames))))
    pairs = list(itertools.combinations(inductors, 2))
    for pair in draw(st.lists(st.sampled_from(pairs), unique=True, max_size=3)) if pairs else []:
        elements.append(make_element(name("k"), "K", (), draw(st.floats(1e-6, 1.0)), coupled=pair))
    title = draw(st.text(st.characters(blacklist_categories=("Cc", "Cs", "Zl", "Zp")), max_size=30)).strip()
    return validate(Network(title, tuple(elements)))


@given(networks())
def test_any_valid_network_round_trips(net: Network) -> None:
    """read_netlist(write_netlist(net)) == net for random valid networks, with each card's line recorded."""
    again, reading = read_netlist_reading(write_netlist(net), "w.cir")
    assert again == net
    assert [e.where for e in again.elements] == [Location("w.cir", i) for i in range(2, len(net.elements) + 2)]
    assert reading.notes == ()  # warnings (a network with no AC source, say) are about the network, not the text
