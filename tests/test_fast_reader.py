"""The reader's fast path (``model.fast_cards``) against the card path: the same reading of every netlist.

Each netlist is read twice, once as ``read_netlist_reading`` reads it and once with the fast path off
(``_Reader(file, fast=False)``, every line a card), and everything a reading gives is compared: the
elements with their lines, the source lines, the notes, the warnings, or the error with every problem.
The expected side is the card path itself, measured on the same text; no value is stored here.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from crosscheck.errors import CrosscheckError
from crosscheck.model.traps import for_excitation
from crosscheck.model import fast_cards, netlist
from crosscheck.model.values import parse_number

ROOT = Path(__file__).resolve().parent.parent
FILES = sorted([*ROOT.glob("corpus/**/*.cir"), *ROOT.glob("tests/data/**/*.cir")])


def _read(text: str, fast: bool) -> object:
    """Everything one reading gives, comparable: the network's fields, or the error's text and problems."""
    try:
        with fast_cards.no_cyclic_gc():
            network, reading = netlist._Reader("n.cir", fast).read(text, False, None)
    except CrosscheckError as exc:
        return ("error", type(exc).__name__, str(exc), getattr(exc, "problems", None))
    wheres = [e.where for e in network.elements]
    warnings = for_excitation(reading.warnings, "ac")  # as read_netlist_reading keeps them for an AC run
    return (network, network.title, wheres, network.source_lines, reading.notes, warnings)


def _both(text: str) -> tuple[object, object]:
    return _read(text, True), _read(text, False)


@pytest.mark.parametrize("path", FILES, ids=lambda p: p.name)
def test_every_corpus_and_test_netlist_reads_the_same_both_ways(path: Path) -> None:
    fast, careful = _both(netlist.read_netlist_text(path))
    assert fast == careful


TRICKY = {
    "continuation after a plain card": "t\nV1 a 0 AC 1\nR1 a b 1k\n* comment\n\n+ tc1=0.01\nR2 b 0 2k\n",
    "continuation right after": "t\nV1 a 0 AC 1\nR1 a b 1k\n+ m=2\nC1 b 0 1n\nR2 b 0 1k\n",
    "control block holding cards": (
        "t\nV1 a 0 AC 1\nR1 a b 1k\n.control\nreset a b 1\nr9 a 0 1\nalter r1 2k\n.endc\nR2 b 0 3k\n"
    ),
    "unclosed control block": "t\nV1 a 0 AC 1\nR1 a b 1k\n.control\nR2 b 0 3k\n",
    "subcircuit bodies": (
        "t\nV1 a 0 AC 1\n.subckt div in out\nR1 in out 1k\nR2 out 0 2k\n.ends div\nX1 a b div\n"
        "R3 b 0 5k\n.subckt bad\n.subckt nested\nR4 x 0 1\n.ends\nR5 y 0 1\n.ends\nR6 b 0 7k\n"
    ),
    "subcircuits read": (
        "t\nV1 a 0 AC 1\n.subckt div in out\nR1 in out 1k\nR2 out 0 2k\n.ends div\nX1 a b div\nR3 b 0 5k\n"
        "X2 b c div\nR4 c 0 1k\n"
    ),
    "text after .end": "t\nV1 a 0 AC 1\nR1 a 0 1k\n.end\nR2 a 0 2k\nnonsense\n",
    "title like a card": "R1 a 0 1k\nV1 a 0 AC 1\nR2 a 0 1k\n",
    "ground names and case": "t\nV1 A GND AC 1\nR1 A b 1K\nr2 B Gnd 2MEG\nC1 b 0 10uF\nL1 b 0 1mil\n",
    "suffixes": (
        "t\nV1 a 0 AC 1\nR1 a 0 1e3k\nR2 a 0 .5meg\nR3 a 0 1.e-3\nR4 a 0 1e\nR5 a 0 2.2kohm\n"
        "C1 a 0 3p\nC2 a 0 4f\nL1 a 0 5n\nL2 a 0 6u\nR6 a 0 7t\nR7 a 0 8g\nR8 a 0 9\nR9 a 0 +1E+2MHz\n"
    ),
    "milli among kilohms": "t\nV1 a 0 AC 1\nR1 a b 1k\nR2 b 0 2.2k\nR3 b 0 1M\nR4 b 0 1mohm\n",
    "milli in a careful card": "t\nV1 a 0 AC 1\nR1 a b 1k\nR2 b 0 2.2k\nR3 b 0 r=1M\n",
    "comments and blanks": "t\nV1 a 0 AC 1 ; drive\n\tR1\ta\tb\t1k \nR2 b 0 2k $ load\nC1 b 0 1n;x\n",
    "tabs and trailing blanks": "t\nV1 a 0 AC 1\n  R1 a b 1k  \r\nC1 b 0 1n\r\n",
    "problems among plain cards": (
        "t\nV1 a 0 AC 1\nR1 a b 1k\nR2 b 0 4k7\nR3 b 0 {nope}\nQ1 a b c\nR4 b 0 1k\nR5 b 0 (1)\n.bogus\n"
    ),
    "duplicate names": "t\nV1 a 0 AC 1\nR1 a 0 1k\nr1 a 0 2k\n",
    "no source": "t\nR1 a 0 1k\nR2 a 0 2k\n",
    "negative resistor": "t\nV1 a 0 AC 1\nR1 a 0 -1k\n",
    "zero-valued capacitor": "t\nV1 a 0 AC 1\nR1 a 0 1k\nC1 a 0 0\n",
    "control character": "t\nV1 a 0 AC 1\nR1 a 0 1k\x01\nR2 a 0 1k\n",
    "long line": "t\nV1 a 0 AC 1\nR1 a 0 " + "1" * 120 + "\nR2 a 0 1k\n",
    "parameters": ".param r=2k\nV1 a 0 AC 1\nR1 a 0 {r}\nR2 a 0 2k\n.temp 50\nR3 a 0 3k tc1=0.01\n",
    "global": "t\nV1 a 0 AC 1\n.global a\nR1 a 0 1k\n",
    "only plain cards after the title": "t\nR1 a 0 1k\nC1 a 0 1n\n",
    "continuation with no card": "t\n+ R1 a 0 1k\nR1 a 0 1k\nV1 a 0 AC 1\n",
}


@pytest.mark.parametrize("name", sorted(TRICKY))
def test_netlists_whose_plain_cards_depend_on_what_is_around_them(name: str) -> None:
    fast, careful = _both(TRICKY[name])
    assert fast == careful


def test_the_suffix_warnings_come_from_plain_cards_too() -> None:
    """The trap texts the fast path hands on (``trap_values``) still set off the suffix warnings."""
    warnings = _read(TRICKY["milli among kilohms"], True)[5]  # type: ignore[index]
    assert [(w.code, w.location.line) for w in warnings] == [("suffix-mega-mixed", 5), ("suffix-mega-mixed", 6)]
    femto = _read("t\nV1 a 0 AC 1\nR1 a 0 1k\nC1 a 0 10F\nR2 a 0 1MHz\n", True)[5]  # type: ignore[index]
    assert [w.code for w in femto] == ["suffix-femto", "suffix-milli"]


def test_the_fast_path_takes_the_plain_cards_and_leaves_the_rest() -> None:
    """A check that the comparisons above compare two different paths: the plain lines were taken here."""
    lines = TRICKY["continuation after a plain card"].split("\n")
    plain = fast_cards.PlainLines(lines)
    fast_cards.walk(lines, plain, lambda number: False, lambda: True)
    assert plain.cards("n.cir").numbers == [7]  # R2; R1 is followed by a + line, V1 is not plain


def test_a_plain_card_inside_a_subcircuit_is_read_per_instance() -> None:
    """Names as ngspice gives them inside instances (``model.subcircuits``' docstring, measured there)."""
    text = "t\nV1 a 0 AC 1\n.subckt s p\nR1 p 0 1k\n.ends\nX1 a s\nX2 a s\n"
    network = netlist.read_netlist(text)
    assert [e.name for e in network.elements] == ["v1", "r.x1.r1", "r.x2.r1"]


NUMERALS = st.from_regex(r"\A[+-]?(?:\d{1,6}\.?\d{0,6}|\.\d{1,6})(?:[eE][+-]?\d{1,3})?\Z")
SUFFIXES = st.sampled_from(
    [
        "",
        "k",
        "K",
        "meg",
        "Meg",
        "mil",
        "m",
        "M",
        "u",
        "n",
        "p",
        "f",
        "F",
        "t",
        "g",
        "e",
        "ohm",
        "Hz",
        "MHz",
        "uF",
        "x",
        "milli",
        "megohm",
        "v",
        "a",
    ]
)


@settings(max_examples=400, deadline=None)
@given(NUMERALS, SUFFIXES)
def test_bulk_numbers_are_bit_identical_to_parse_number(numeral: str, suffix: str) -> None:
    """``plain_values`` against ``values.parse_number`` (the card path's reader), compared as bit patterns."""
    text = numeral + suffix
    assert fast_cards.plain_values([text])[0].hex() == parse_number(text).hex()


def test_large_generated_netlist_reads_the_same_both_ways() -> None:
    from crosscheck.fuzz.large import build
    from crosscheck.model.netlist_writer import write_netlist

    text = write_netlist(build("grid", 400)[0])
    fast, careful = _both(text)
    assert fast == careful
