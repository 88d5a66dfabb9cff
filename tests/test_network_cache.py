"""What a Network computes once and keeps (nodes, node indices, connected parts, the checks that
need no port) agrees with a fresh computation, never goes stale, and leaves validation's messages
exactly as they were: the same words, the same element, the same line.
"""

from __future__ import annotations

import copy
import math
import pickle
from dataclasses import replace

import numpy as np
import pytest

from crosscheck.fuzz.large import build
from crosscheck.errors import NetworkError, PortError
from crosscheck.model.netlist import read_netlist
from crosscheck.model.network import GROUND, Element, Network, Port, check_port, floating_reference, make_element
from crosscheck.model.validation import _check_each_element, _elements_look_clean, validate
from crosscheck.own.assembly import Stamps
from crosscheck.own.solver import MnaSystem


class OneByOne(Stamps):
    """The correct stamps, written one element at a time instead of by the numpy pass."""

    bulk = False

#: Every kind, a control-only pair (E, G), a coupled pair (K) and a current-controlled pair (F, H).
EVERY_KIND = """every kind
V1 in 0 AC 1
R1 in a 1k
L1 a b 1m
C1 b 0 1u
R0 b c 0
L2 c 0 2m
K1 L1 L2 0.5
E1 d 0 a b 2
Rd d 0 1k
G1 e 0 c 0 1m
Re e 0 2k
Vs e f 0
Rf f 0 1k
F1 g 0 Vs 3
Rg g 0 1k
H1 h 0 Vs 100
Rh h 0 1k
I1 0 h AC 1m
"""


def _walked_nodes(network: Network) -> tuple[str, ...]:
    """The node list as the model defines it, walked afresh: non-ground nodes in order of first appearance."""
    seen: dict[str, None] = {}
    for e in network.elements:
        for n in e.nodes:
            if n != GROUND:
                seen.setdefault(n, None)
    return tuple(seen)


def _networks() -> list[Network]:
    return [read_netlist(EVERY_KIND)] + [build(family, 60)[0] for family in ("ladder", "tree", "grid", "random")]


def _message(text: str, port: Port | None = None) -> tuple[str, str]:
    with pytest.raises(NetworkError) as caught:
        read_netlist(text, port=port)
    return str(caught.value), str(caught.value.location)


# --------------------------------------------------------------------------- the cached values


@pytest.mark.parametrize("network", _networks(), ids=lambda n: n.title)
def test_cached_nodes_and_indices_match_a_fresh_walk(network: Network) -> None:
    """``nodes`` equals a fresh walk over the elements; ``node_index`` gives each node its position."""
    assert network.nodes == _walked_nodes(network)
    assert list(network.node_index) == list(network.nodes)
    assert network.node_index == {n: i for i, n in enumerate(network.nodes)}
    assert network.nodes is network.nodes  # computed once


def test_has_node_reads_ground_aliases_case_and_unknown_names() -> None:
    """Ground under either name is always there, names compare case-insensitively, others are absent."""
    network = read_netlist(EVERY_KIND)
    assert network.has_node("0") and network.has_node("GND") and network.has_node("In")
    assert not network.has_node("nowhere")
    with pytest.raises(KeyError):
        network.node_index["nowhere"]  # a plain mapping: looking up a missing node adds nothing
    assert "nowhere" not in network.node_index


def test_replace_and_with_elements_build_fresh_caches() -> None:
    """A network made from another by ``replace`` or ``with_elements`` sees its own elements, not a stale cache."""
    network = read_netlist("t\nV1 a 0 AC 1\nR1 a b 1k\nR2 b 0 1k\n")  # validated, so its checks are cached
    assert network.nodes == ("a", "b") and floating_reference(network, Port("a", "b")) is None
    longer = network.with_elements(network.elements + (make_element("r3", "R", ("b", "c"), 1.0),
                                                       make_element("r4", "R", ("c", "0"), 1.0)))
    assert longer.nodes == ("a", "b", "c") and longer.node_index["c"] == 2
    alone = replace(network, elements=network.elements[1:2])  # R1 alone: a and b have no ground
    assert alone.nodes == ("a", "b") and alone.node_index == {"a": 0, "b": 1}
    assert floating_reference(alone, Port("a", "b")) == "b"
    with pytest.raises(NetworkError, match="not to ground"):
        validate(alone)
    assert network.nodes == ("a", "b") and validate(network) is network


def test_pickle_and_copy_carry_the_fields_only() -> None:
    """Pickles and copies hold the fields alone, compare equal, and rebuild the same caches where they land."""
    network = validate(read_netlist(EVERY_KIND))
    _ = network.nodes, network.element_arrays, floating_reference(network, Port("a", "b"))
    state = network.__getstate__()
    assert set(state) == {"title", "elements", "allow_negative", "source_lines", "excitation"}
    assert state["source_lines"] == network.source_lines and network.source_lines  # the reader sets them
    for twin in (pickle.loads(pickle.dumps(network)), copy.copy(network), copy.deepcopy(network)):
        assert twin == network and hash(twin) == hash(network)
        assert "_topology" not in vars(twin) or twin is network
        assert twin.nodes == network.nodes and twin.node_index == network.node_index
        assert twin.allow_negative == network.allow_negative
        assert twin.source_lines == network.source_lines
        assert validate(twin) is twin


def test_equality_and_hash_ignore_what_is_cached() -> None:
    """A network whose caches are filled equals (and hashes like) one whose caches are empty."""
    filled = validate(read_netlist(EVERY_KIND), Port("d", "0"))
    empty = Network(filled.title, filled.elements, filled.allow_negative)
    assert "_topology" in vars(filled) and "_topology" not in vars(empty)
    assert filled == empty and hash(filled) == hash(empty)


def test_solver_shares_the_network_index_and_leaves_it_unchanged() -> None:
    """MnaSystem reads the network's node index; ties and branches never add to it."""
    network = read_netlist(EVERY_KIND)
    before = dict(network.node_index)
    system = MnaSystem(network, ["h"])
    assert system.node_index is network.node_index and network.node_index == before
    assert system.size == len(before) + len(system.branch_index)
    branch_names = [e.name for e in network.elements if e.kind in "VEHL" or e.is_short] + ["tie:h"]
    assert list(system.branch_index) == branch_names
    assert list(system.branch_index.values()) == list(range(len(before), system.size))


def test_array_stamps_match_the_element_by_element_loop() -> None:
    """The numpy stamps give the matrix the per-element loop gives (the loop runs for any stamps with
    ``bulk`` False, as every fault's are).

    The correct stamps taken one element at a time must give the array path's matrix to rounding in
    the order duplicates are summed (1e-15).
    """
    for network in _networks():
        ties = [network.nodes[-1]]
        fast = MnaSystem(network, ties)
        slow = MnaSystem(network, ties, stamps=OneByOne())
        assert fast.size == slow.size and fast.branch_index == slow.branch_index
        assert np.array_equal(fast._pattern.indptr, slow._pattern.indptr)
        assert np.array_equal(fast._pattern.indices, slow._pattern.indices)
        np.testing.assert_allclose(fast._a0, slow._a0, rtol=1e-15, atol=0.0)
        np.testing.assert_allclose(fast._a1, slow._a1, rtol=1e-15, atol=0.0)
        expected = np.zeros(fast.size, dtype=complex)
        for e in network.elements:
            if e.kind == "V":
                expected[fast.branch_index[e.name]] += e.phasor
            elif e.kind == "I":
                p, m = (fast.node_index.get(n) for n in e.terminals)
                if p is not None:
                    expected[p] -= e.phasor
                if m is not None:
                    expected[m] += e.phasor
        assert np.array_equal(fast.source_vector(), expected)


# --------------------------------------------------------------------------- messages are unchanged

_LOOP_ADVICE = ("closes a loop of voltage sources and ideal shorts (R = 0); "
                "the loop's voltages over-determine the network: remove one or add series resistance")


def test_loop_message_names_the_element_that_closes_it() -> None:
    """The source-and-short loop is reported at the element, in netlist order, that closes it."""
    assert _message("t\nV1 a 0 AC 1\nR1 a b 0\nR2 b 0 0\nR3 a 0 1k\n") == (
        f"<string>:4: r2: {_LOOP_ADVICE}", "<string>:4")
    assert _message("t\nV1 a 0 AC 1\nE1 b 0 a 0 2\nR1 a b 0\nR2 b 0 1k\n", Port("a", "0")) == (
        f"<string>:4: r1: {_LOOP_ADVICE}", "<string>:4")


def test_parallel_voltage_sources_close_a_loop() -> None:
    """Two sources on one node pair are a loop of two branches: the second is named."""
    assert _message("t\nV1 a 0 AC 1\nV2 a 0 AC 2\nR1 a 0 1k\n") == (f"<string>:3: v2: {_LOOP_ADVICE}", "<string>:3")


def test_floating_part_lists_its_nodes_in_name_order_and_the_first_line() -> None:
    """At most eight nodes, sorted as strings, then an ellipsis; the line is the first element touching them."""
    chain = "t\nV1 a 0 AC 1\nR1 a 0 1k\n" + "".join(f"R{i + 2} n{i} n{i + 1} 1k\n" for i in range(10))
    assert _message(chain) == (
        "<string>:4: node(s) n0, n1, n10, n2, n3, n4, n5, n6 … are connected not to ground: a floating part "
        "of the network; connect it, remove it, or choose a port inside it", "<string>:4")
    accepted = read_netlist(chain, port=Port("n3", "n7"))  # the port inside it: referred to its b node
    assert floating_reference(accepted, Port("n3", "n7")) == "n7"
    assert floating_reference(accepted, Port("a", "0")) is None
    assert floating_reference(accepted, Port("a", "n9")) == "n9"


def test_of_two_floating_parts_the_one_with_the_first_name_is_reported() -> None:
    """Parts are taken in the order of their smallest node name, whatever the netlist order."""
    text = "t\nV1 a 0 AC 1\nR1 a 0 1k\nR2 q p 1k\nR3 b2 b1 1k\n"
    assert _message(text) == (
        "<string>:5: node(s) b1, b2 are connected not to ground: a floating part of the network; "
        "connect it, remove it, or choose a port inside it", "<string>:5")
    assert _message(text, Port("b1", "b2")) == (
        "<string>:4: node(s) p, q are connected neither to ground nor to the port: a floating part of the "
        "network; connect it, remove it, or choose a port inside it", "<string>:4")


def test_current_source_cut_set_message() -> None:
    """Nodes reached only through a current source have no voltage, even when the port sits among them."""
    text = "t\nV1 a 0 AC 1\nR1 a 0 1k\nR2 x y 1k\nI1 0 x AC 1\nR3 y x 2k\n"
    want = ("<string>:4: node(s) x, y are reached only through current sources: their voltage is undefined "
            "(a cut set of current sources); add a resistive path to ground or to the rest of the network",
            "<string>:4")
    assert _message(text) == want
    assert _message(text, Port("x", "y")) == want


def test_control_only_node_is_floating_and_named_at_its_controlled_source() -> None:
    """A node that only senses a voltage (E's control) is a floating part; the E element's line is named."""
    text = "t\nV1 a 0 AC 1\nR1 a 0 1k\nE1 out 0 c 0 2\nR3 out 0 1k\n"
    assert _message(text, Port("out", "0")) == (
        "<string>:4: node(s) c are connected neither to ground nor to the port: a floating part of the "
        "network; connect it, remove it, or choose a port inside it", "<string>:4")


def test_a_refused_network_is_refused_every_time() -> None:
    """Only success is remembered: validating an ill-posed network again raises the same error again."""
    network = Network("t", (make_element("v1", "V", ("a", "0"), ac_mag=1.0),
                            make_element("v2", "V", ("a", "0"), ac_mag=1.0)))
    messages = []
    for _ in range(2):
        with pytest.raises(NetworkError) as caught:
            validate(network)
        messages.append(str(caught.value))
    assert messages[0] == messages[1] and "v2: closes a loop" in messages[0]


def test_port_checks_run_on_every_call() -> None:
    """The port is checked at each validate, also after the network itself passed."""
    network = validate(read_netlist("t\nV1 a 0 AC 1\nR1 a 0 1k\n"))
    with pytest.raises(PortError, match="port node 'zz' is not in the network \\(nodes: 0, a\\)"):
        validate(network, Port("zz", "0"))
    with pytest.raises(PortError, match="both 'a'"):
        check_port(network, Port("A", "a"))


# --------------------------------------------------------------------------- the column test and the slow pass

_CLEAN = (make_element("v1", "V", ("a", "0"), ac_mag=1.0), make_element("r1", "R", ("a", "b"), 1e3),
          make_element("l1", "L", ("b", "0"), 1e-3), make_element("l2", "L", ("b", "c"), 1e-3),
          make_element("rc", "R", ("c", "0"), 1.0))

_BAD = {
    "unknown kind": Element("x1", "X", ("a", "0"), 1.0),
    "one-letter lower-case kind": Element("r9", "r", ("a", "0"), 1.0),
    "two-letter kind": Element("r9", "RR", ("a", "0"), 1.0),
    "duplicate name": make_element("r1", "R", ("a", "0"), 5.0),
    "too few nodes": Element("r9", "R", ("a",), 1.0),
    "too many nodes": Element("r9", "R", ("a", "0", "b"), 1.0),
    "K with nodes": Element("k9", "K", ("a", "0"), 0.5, coupled=("l1", "l2")),
    "E with two nodes": Element("e9", "E", ("a", "0"), 2.0),
    "nan value": make_element("r9", "R", ("a", "0"), math.nan),
    "infinite AC magnitude on a resistor": make_element("r9", "R", ("a", "0"), 1.0, ac_mag=math.inf),
    "nan AC phase": make_element("i9", "I", ("a", "0"), ac_mag=1.0, ac_phase_deg=math.nan),
    "zero capacitance": make_element("c9", "C", ("a", "0"), 0.0),
    "negative inductance": make_element("l9", "L", ("a", "0"), -1e-3),
    "negative resistance": make_element("r9", "R", ("a", "0"), -5.0),
    "coupling above one": make_element("k9", "K", (), 1.5, coupled=("l1", "l2")),
    "coupling of zero": make_element("k9", "K", (), 0.0, coupled=("l1", "l2")),
    "source on one node": make_element("v9", "V", ("b", "b"), ac_mag=1.0),
    "VCVS output on ground twice": make_element("e9", "E", ("0", "0", "a", "b"), 2.0),
    "negative AC magnitude": make_element("i9", "I", ("a", "0"), ac_mag=-1.0),
}


@pytest.mark.parametrize("where", [0, 3, 5])
@pytest.mark.parametrize("label", sorted(_BAD))
def test_column_test_never_passes_what_the_element_pass_refuses(label: str, where: int) -> None:
    """Wherever a bad element sits, validate raises what the element-by-element pass raises for it."""
    elements = list(_CLEAN)
    elements.insert(where, _BAD[label])
    network = Network("t", tuple(elements))
    with pytest.raises(NetworkError) as expected:
        _check_each_element(network)
    assert not _elements_look_clean_or_unreadable(network)
    with pytest.raises(NetworkError) as got:
        validate(network)
    assert str(got.value) == str(expected.value)


def _elements_look_clean_or_unreadable(network: Network) -> bool:
    try:
        return _elements_look_clean(network)
    except (TypeError, ValueError, IndexError):
        return False  # validate then takes the element-by-element pass too


def test_column_test_passes_a_clean_network_and_allowed_negative_resistance() -> None:
    """A clean network passes the column test, as does negative R when allowed."""
    assert _elements_look_clean(Network("t", _CLEAN))
    negative = _CLEAN + (make_element("r9", "R", ("a", "0"), -5.0),)
    assert _elements_look_clean(Network("t", negative, allow_negative=True))
    assert not _elements_look_clean(Network("t", negative))
