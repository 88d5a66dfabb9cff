"""The reader's front: cards read and ignored with a note, .control blocks skipped, every problem in one
pass, files in other encodings, traps as warnings, and the lines the reader accepted.

Where an answer is involved, the value is measured by ngspice on the same text inside the test
(``tests/ngspice_direct.ngspice_ac``) and compared with crosscheck's own V_th at the port.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from crosscheck.errors import Location, NetlistError
from crosscheck.model.netlist import (
    MAX_PROBLEMS,
    read_netlist,
    read_netlist_file_reading,
    read_netlist_reading,
    read_netlist_with_notes,
)
from crosscheck.model.network import Network, Port
from crosscheck.model.reading import WARNING_CODES
from crosscheck.own.equivalent import thevenin

BASE = "ignored cards\nV1 in 0 AC 1\nR1 in out 1k\nR2 out 0 2k\nC1 out 0 100n\n"
FREQ = 1e3
# tolerance: rel 1e-9; ngspice and the own route solve the same small linear network, so only rounding differs.
REL = 1e-9


def own_vth(network: Network, node: str = "out") -> complex:
    """crosscheck's own open-circuit voltage at ``node`` against ground."""
    return thevenin(network, Port(node, "0"), [FREQ])[0].vth


def ngspice_vth(text: str, node: str = "out") -> complex:
    from ngspice_direct import ngspice_ac

    return ngspice_ac(text, FREQ, [node])[node]


# --------------------------------------------------------------------------- cards read and ignored

IGNORED = {
    ".tran": ".tran 1u 1m",
    ".dc": ".dc V1 0 1 0.5",
    ".pz": ".pz in 0 out 0 vol pz",
    ".sp": ".sp lin 10 1k 10k",
    ".noise": ".noise v(out) V1 dec 10 1 1k",
    ".disto": ".disto dec 10 1k 10k",
    ".four": ".four 1k v(out)",
    ".tf": ".tf v(out) V1",
    ".sens": ".sens v(out)",
    ".meas": ".meas ac vmax max v(out)",
    ".measure": ".MEASURE ac vmin min v(out)",
    ".print": ".print ac v(out)",
    ".plot": ".plot ac vm(out)",
    ".probe": ".probe v(out)",
    ".save": ".save all",
    ".width": ".width out=80",
    ".title": ".title another title",
    ".ic": ".ic v(out)=1",
    ".nodeset": ".nodeset v(out)=0.5",
    ".op": ".op",
    ".ac": ".ac dec 10 1 10k",
    ".options": ".options reltol=1e-4",
    ".option": ".Option abstol=1e-12",
    ".opt": ".OPT gmin=1e-12",
    ".opts": ".opts itl1=200",
}
#: ngspice runs the card's own analysis too; these cannot run beside ngspice_direct's one .ac as written
#: (tried): .ac, .noise and .disto add more frequency plots, and .sp stops without RF port sources.
NOT_RUN_BY_NGSPICE = {".ac", ".sp", ".disto", ".noise"}


@pytest.mark.parametrize("card", IGNORED, ids=list(IGNORED))
def test_ignored_card_gives_a_note_and_the_same_network(card: str) -> None:
    """Each analysis, output and options card is read, noted with file, line and its text, and changes nothing."""
    text = BASE + IGNORED[card] + "\n"
    net, reading = read_netlist_reading(text, "ign.cir")
    assert net == read_netlist(BASE)
    (note,) = reading.notes
    assert note.startswith(f"ign.cir:6: {IGNORED[card].split()[0]} card ignored ({IGNORED[card]!r})"), note
    assert reading.warnings == ()
    assert net.source_lines == tuple(BASE.splitlines()[1:])


@pytest.mark.spice
@pytest.mark.parametrize("card", sorted(set(IGNORED) - NOT_RUN_BY_NGSPICE))
def test_ignored_card_leaves_ngspice_s_answer(card: str) -> None:
    """ngspice given the card (with its own .ac added) measures the V(out) crosscheck computes without it."""
    text = BASE + IGNORED[card] + "\n"
    measured = ngspice_vth(text)  # measured: ngspice on this text, in this test
    assert own_vth(read_netlist(text)) == pytest.approx(measured, rel=REL)


def test_options_note_names_the_keys_that_are_applied() -> None:
    """temp= and tnom= change an answer in ngspice: applied, and the note says so; the rest is ignored."""
    net, reading = read_netlist_reading(BASE + ".options temp=50 reltol=1e-3\n", "o.cir")
    (note,) = reading.notes
    assert "except temp=, which crosscheck applies" in note and note.startswith("o.cir:6:")
    assert ".options temp=50 reltol=1e-3" in net.source_lines  # the reading check sees the temperature


def test_options_scale_is_refused() -> None:
    """scale= would scale lengths and widths in ngspice, which crosscheck does not implement: refused, not ignored."""
    with pytest.raises(NetlistError, match=r"o.cir:6: .options scale=.*remove scale="):
        read_netlist_reading(BASE + ".options scale=1u\n", "o.cir")


def test_global_without_subcircuits_is_noted() -> None:
    """.global naming ground, or nodes no subcircuit uses, has no effect: noted, network unchanged."""
    for card, words in ((".global 0 gnd", "ground is always global"), (".global vdd", "no subcircuit uses vdd")):
        net, reading = read_netlist_reading(BASE + card + "\n", "g.cir")
        assert net == read_netlist(BASE)
        assert len(reading.notes) == 1 and reading.notes[0].startswith("g.cir:6:") and words in reading.notes[0]


def test_global_node_used_inside_a_subcircuit_is_refused() -> None:
    """crosscheck would keep the node local to each instance where ngspice joins them: refused with the reason."""
    text = "t\n.global vdd\n.subckt half a\nR1 a vdd 1k\n.ends\nX1 in half\nV1 in 0 AC 1\nVdd vdd 0 AC 0\n"
    with pytest.raises(NetlistError, match="global nodes across subcircuits are not implemented") as info:
        read_netlist(text, "g.cir")
    assert info.value.location == Location("g.cir", 2)


# --------------------------------------------------------------------------- .control blocks

CONTROL = ".control\nset units=degrees\nshell touch pwned\nrun\nwrite out.raw v(out)\n.endc\n"
ALTERING = ".control\nalter R2 4k\nlet @r1[resistance] = 5k\noption temp=80\nrun\n.endc\n"


def test_control_block_is_skipped_with_one_note(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """The block's lines are never run nor read: one note with its line range, no file written."""
    monkeypatch.chdir(tmp_path)
    net, reading = read_netlist_reading(BASE + CONTROL, "c.cir")
    assert net == read_netlist(BASE)
    (note,) = reading.notes
    assert note.startswith("c.cir:6: .control block (lines 6-11) skipped") and "interactive" not in note
    assert not any("pwned" in line or "control" in line for line in net.source_lines)
    assert list(tmp_path.iterdir()) == []


def test_control_block_that_changes_the_circuit_gets_the_stronger_note() -> None:
    """alter, let @..., option: the note names each with its line and says the answer can differ."""
    _, reading = read_netlist_reading(BASE + ALTERING, "c.cir")
    (note,) = reading.notes
    assert "alter (line 7), let @... (line 8), option (line 9)" in note
    assert "the answer can differ from an interactive run" in note


@pytest.mark.spice
def test_control_block_netlist_matches_ngspice_without_the_block() -> None:
    """ngspice_direct drops the block as crosscheck does; the measured V(out) is crosscheck's."""
    text = BASE + ALTERING
    assert own_vth(read_netlist(text)) == pytest.approx(ngspice_vth(text), rel=REL)  # measured: ngspice, this test


def test_end_inside_a_control_block_names_the_control_line() -> None:
    with pytest.raises(NetlistError, match="the .control block is not closed") as info:
        read_netlist(BASE + ".control\nrun\n.end\n", "c.cir")
    assert info.value.location == Location("c.cir", 6)


# --------------------------------------------------------------------------- every problem in one pass

SIX = (
    "six problems\nV1 in 0 AC 1\n.frobnicate 3\nR1 in out lots\nD1 out 0 dmod\n.include other.cir\n"
    "R2 out 0 4k7\nL1 out 0 1m\nL2 out 0 1m\nL3 out 0 1m\nK1 L1 L2 L3 0.5\n.tran 1n 1u\n"
)


def test_six_problems_are_reported_together_in_line_order() -> None:
    """Each problem on its own line with file:line, the card's text and the reason; location is the first."""
    with pytest.raises(NetlistError) as info:
        read_netlist(SIX, "six.cir")
    exc = info.value
    assert [where.line for where, _ in exc.problems] == [3, 4, 5, 6, 7, 11]
    assert exc.location == Location("six.cir", 3) and exc.more == 0
    lines = str(exc).splitlines()
    assert lines[0] == "six.cir:3: the netlist has 6 problems, in line order:"
    expected = [
        ("six.cir:3:", "'.frobnicate 3'", "unknown card"),
        ("six.cir:4:", "'R1 in out lots'", "no .model card named 'lots'"),
        ("six.cir:5:", "'D1 out 0 dmod'", "is a diode"),
        ("six.cir:6:", "'.include other.cir'", "never opens files"),
        ("six.cir:7:", "'R2 out 0 4k7'", "write 4.7k"),
        ("six.cir:11:", "'K1 L1 L2 L3 0.5'", "third inductor 'L3'"),
    ]
    for line, (where, card, why) in zip(lines[1:], expected, strict=True):
        assert line.strip().startswith(f"{where} {card}: ") and why in line, line


def test_problems_beyond_the_cap_are_counted() -> None:
    """MAX_PROBLEMS are listed, the rest counted; the first stays the error's location."""
    extra = 5
    text = "t\nV1 a 0 AC 1\n" + "".join(f"R{i} a 0 bad{i}\n" for i in range(MAX_PROBLEMS + extra))
    with pytest.raises(NetlistError) as info:
        read_netlist(text, "many.cir")
    assert len(info.value.problems) == MAX_PROBLEMS and info.value.more == extra
    assert f"and {extra} more after these {MAX_PROBLEMS}" in str(info.value)
    assert info.value.location == Location("many.cir", 3)


def test_a_single_problem_keeps_its_own_message() -> None:
    with pytest.raises(NetlistError) as info:
        read_netlist("t\nV1 a 0 AC 1\nR1 a 0 lots\n", "one.cir")
    assert str(info.value).startswith("one.cir:3: r1: no .model card named 'lots'")
    assert info.value.problems == ((Location("one.cir", 3), info.value.bare_message),)


def test_a_broken_subcircuit_header_does_not_blame_its_cards_or_instances() -> None:
    """The header's problem only: its cards and .ends still belong to it, its instances are not 'unknown'."""
    text = "t\n.subckt amp a 0\nR1 a 0 1k\n.ends amp\nX1 in amp\nV1 in 0 AC 1\nR9 in 0 bad\n"
    with pytest.raises(NetlistError) as info:
        read_netlist(text, "s.cir")
    assert [where.line for where, _ in info.value.problems] == [2, 7]


def test_quoted_value_is_an_expression_and_its_error_names_it() -> None:
    """'2*rb' and '2 * rb' are one field each (ngspice's quotes); a bad name inside is blamed on the value."""
    net = read_netlist("t\n.param rb=1k\nV1 a 0 AC 1\nR1 a 0 '2*rb'\nR2 a 0 '2 * rb'\n")
    assert (net.element("r1").value, net.element("r2").value) == (2000.0, 2000.0)  # tolerance: exact
    with pytest.raises(NetlistError, match="unknown parameter 'rc'") as info:
        read_netlist("t\n.param rb=1k\nV1 a 0 AC 1\nR1 a 0 '2 * rc'\n", "q.cir")
    assert info.value.location == Location("q.cir", 4) and "unexpected field" not in str(info.value)


@pytest.mark.spice
def test_quoted_value_matches_ngspice() -> None:
    text = "t\n.param rb=1k\nV1 in 0 AC 1\nR1 in out '2 * rb'\nR2 out 0 {rb}\n"
    assert own_vth(read_netlist(text)) == pytest.approx(ngspice_vth(text), rel=REL)  # measured: ngspice, this test


# --------------------------------------------------------------------------- encodings

UTF8 = "encodings\nV1 in 0 AC 1\nR1 in out 1k\nC1 out 0 4.7µ\n"


@pytest.mark.parametrize(
    ("codec", "words"),
    [("utf-16", "byte order mark"), ("utf-16-le", "UTF-16 LE without"), ("utf-16-be", "UTF-16 BE without")],
)
def test_utf16_files_are_read_with_a_note(tmp_path: Path, codec: str, words: str) -> None:
    path = tmp_path / "w.cir"
    path.write_bytes(UTF8.encode(codec))
    net, reading = read_netlist_file_reading(path)
    assert net == read_netlist(UTF8)
    assert reading.notes[0].startswith(f"{path}:1: the file is UTF-16") and words in reading.notes[0]


def test_windows_1252_file_is_read_with_a_note_naming_the_line_and_byte(tmp_path: Path) -> None:
    """µ saved as the single byte 0xb5 (Windows-1252, Latin-1) reads as µ, with a note."""
    path = tmp_path / "w.cir"
    path.write_bytes(UTF8.encode("cp1252"))
    net, reading = read_netlist_file_reading(path)
    assert net.element("c1").value == pytest.approx(4.7e-6, rel=1e-15)  # tolerance: one rounding
    assert reading.notes[0].startswith(f"{path}:4: the file is not UTF-8: byte 0xb5 on this line was read as 'µ'")


def test_binary_files_are_still_refused(tmp_path: Path) -> None:
    path = tmp_path / "b.cir"
    for data, words in (
        (b"\x7fELF\x02\x01\x01\x00\x00\x00\nR1 a 0 1k\n", "NUL bytes"),
        (bytes(range(128, 256)), "neither"),
    ):
        path.write_bytes(data)
        with pytest.raises(NetlistError, match=words):
            read_netlist_file_reading(path)


# --------------------------------------------------------------------------- traps


def codes(text: str) -> list[tuple[str, int | None]]:
    return [(w.code, w.location.line) for w in read_netlist_reading(text, "w.cir")[1].warnings]


@pytest.mark.parametrize(
    "source", ["V1 in 0 DC 5", "V1 in 0 SIN(0 1 1k)", "V1 in 0 AC 0", "V1 in 0 5 PULSE(0 1 0 1n 1n 1u 2u)"]
)
def test_no_ac_source_is_a_warning(source: str) -> None:
    assert codes(f"t\n{source}\nR1 in out 1k\nR2 out 0 1k\n") == [("no-ac-source", 2)]


def test_no_source_at_all_is_a_warning_and_an_ac_source_is_not() -> None:
    assert codes("t\nR1 in out 1k\nR2 out 0 1k\n") == [("no-ac-source", 2)]
    assert codes("t\nV1 in 0 DC 5\nI1 0 out AC 1m\nR1 in out 1k\nR2 out 0 1k\n") == []


@pytest.mark.spice
def test_no_ac_source_gives_zero_in_ngspice_too() -> None:
    """The trap is real: ngspice's AC analysis of a DC-only source gives V(out) = 0 as crosscheck does."""
    text = "t\nV1 in 0 DC 5 SIN(0 1 1k)\nR1 in out 1k\nR2 out 0 1k\n"
    assert ngspice_vth(text) == 0 and own_vth(read_netlist(text)) == 0  # measured: ngspice, this test


def test_title_that_looks_like_an_element_is_a_warning() -> None:
    assert codes("R1 in out 1k\nV1 in 0 AC 1\nR2 in 0 1k\n") == [("title-is-element", 1)]
    assert codes("Filter R1 in out\nV1 in 0 AC 1\nR2 in 0 1k\n") == []


def test_megahertz_written_as_mhz_is_milli() -> None:
    """1MHz anywhere in an R/L/C value, a .param or .func card or an X card's parameters."""
    text = "t\n.param f0=1MHz\nV1 in 0 AC 1\nR1 in out 1k\nC1 out 0 {1/(6.28*1k*2.5MHz)}\nL1 out 0 1m\n"
    assert codes(text) == [("suffix-milli", 2), ("suffix-milli", 5)]
    assert codes("t\n.param f0=1meg\nV1 in 0 AC 1 SIN(0 1 1MHz)\nR1 in 0 1k\n") == []


@pytest.mark.parametrize(
    ("value", "warned"),
    [("1F", True), ("10f", True), ("100uF", False), ("10fF", False), ("1", False), ("{1}", False), ("2.2nF", False)],
)
def test_capacitor_value_with_f_alone_is_femto(value: str, warned: bool) -> None:
    expected = [("suffix-femto", 3)] if warned else []
    assert codes(f"t\nV1 in 0 AC 1\nC1 in out {value}\nR1 out 0 1k\n") == expected


def test_resistor_written_with_m_among_kilohms_is_mixed_mega() -> None:
    assert codes("t\nV1 in 0 AC 1\nR1 in out 1M\nR2 out 0 10k\nR3 out 0 4.7k\n") == [("suffix-mega-mixed", 3)]
    assert codes("t\nV1 in 0 AC 1\nR1 in out 1Meg\nR2 out 0 10k\n") == []
    assert codes("t\nV1 in 0 AC 1\nR1 in out 10m\nR2 out 0 0.5\nR3 out 0 2\n") == []  # a shunt among ohms


@pytest.mark.spice
def test_the_suffix_traps_are_what_ngspice_reads() -> None:
    """ngspice reads 1M as milli and 1F as femto, as crosscheck does (which is why they are traps)."""
    text = "t\nV1 in 0 AC 1\nR1 in out 1M\nR2 out 0 10k\nC1 out 0 1F\n"
    assert {c for c, _ in codes(text)} == {"suffix-mega-mixed", "suffix-femto"}
    assert own_vth(read_netlist(text)) == pytest.approx(ngspice_vth(text), rel=REL)  # measured: ngspice, this test


def test_every_code_is_documented() -> None:
    texts = ["R1 a 0 1k\nR2 a 0 1k\n", "t\nV1 a 0 AC 1\nR1 a b 1M\nR2 b 0 10k\nC1 b 0 1F\nC2 b 0 {1/1MHz}\n"]
    found = {w.code for text in texts for w in read_netlist_reading(text)[1].warnings}
    found |= {w.code for w in read_netlist_reading(texts[0], excitation="dc")[1].warnings}  # no-dc-source
    assert found == set(WARNING_CODES)


def test_notes_variant_carries_the_warnings_as_text() -> None:
    _, notes = read_netlist_with_notes("R9 a 0 1k\nV1 a 0 AC 1\nR1 a 0 1k\n")
    assert notes == [
        "<string>:1: the first line 'R9 a 0 1k' is read as the title, as SPICE does; "
        "if it is an element, add a title line above it [title-is-element]"
    ]


# --------------------------------------------------------------------------- source_lines

LINES = """title: a bridge
* a comment
.param rb=1k
.subckt half top mid ; inline comment
R1 top mid {rb}
R2 mid 0
+ {2*rb} $ dollar comment
.ends half
V1 in 0 AC 1 ; source
.tran 1n 1u
X1 in out half
.control
run
.endc
C1 out 0 1n
.end
R9 after end
"""


def test_source_lines_are_the_accepted_cards_lines() -> None:
    net = read_netlist(LINES)
    assert net.source_lines == (
        ".param rb=1k",
        ".subckt half top mid",
        "R1 top mid {rb}",
        "R2 mid 0",
        "+ {2*rb}",
        ".ends half",
        "V1 in 0 AC 1",
        "X1 in out half",
        "C1 out 0 1n",
    )


@pytest.mark.spice
def test_source_lines_alone_give_ngspice_the_same_answer() -> None:
    """The accepted lines under a title are a netlist ngspice reads to the same V(out) as the whole text."""
    net = read_netlist(LINES)
    alone = "title\n" + "\n".join(net.source_lines) + "\n"
    # measured: ngspice on the whole text up to .end (ngspice_direct drops .end, so the text after it goes too)
    measured = ngspice_vth(LINES.split("\n.end\n")[0])
    assert ngspice_vth(alone) == pytest.approx(measured, rel=REL)
    assert own_vth(net) == pytest.approx(measured, rel=REL)


# --------------------------------------------------------------------------- a schematic editor's export

SCHEMATIC_EXPORT = (
    ".title KiCad schematic\n.option TEMP=27\nV1 /in GND DC 0 AC 1 sin(0 1 1k)\nR1 /in Net-(C1-Pad1) 10k\n"
    "C1 Net-(C1-Pad1) GND 100n\nR2 Net-(C1-Pad1) /out 4.7k\nC2 /out GND 22n\n.save @r1[i]\n.save V(/out)\n"
    ".ac dec 10 1 100k\n.end\n"
)


@pytest.mark.spice
@pytest.mark.parametrize("node", ["/out", "Net-(C1-Pad1)"])
def test_a_schematic_editors_export_runs_as_written(node: str) -> None:
    """Node names like /out and Net-(C1-Pad1), GND, .title, .option, .save and a transient source function:
    read as ngspice reads them, the value measured from ngspice on the same text in this test."""
    network, reading = read_netlist_reading(SCHEMATIC_EXPORT, "export.cir")
    assert "net-(c1-pad1)" in network.nodes and not reading.warnings
    from ngspice_direct import ngspice_ac

    measured = ngspice_ac(SCHEMATIC_EXPORT, FREQ, [node.lower()])[node.lower()]
    assert own_vth(network, node.lower()) == pytest.approx(measured, rel=REL)


def test_a_parenthesised_group_after_a_space_is_still_a_group() -> None:
    """Only a word ending in '-' joins the (...) right after it; SIN(...) and 'Net- (x)' keep their meaning."""
    with pytest.raises(NetlistError, match="export.cir:3"):
        read_netlist("t\nV1 a 0 AC 1\nR1 a Net- (C1) 1k\nR2 a 0 1k\n", "export.cir")
    network, reading = read_netlist_reading("t\nV1 a 0 AC 1 SIN(0 1 1k)\nR1 a 0 1k\n")
    assert any("SIN(...) ignored" in note for note in reading.notes) and len(network.elements) == 2
