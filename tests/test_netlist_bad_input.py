"""Malformed, unsupported, ill-posed and hostile netlists: each is refused with the file, the line and a reason.

Every case runs in an empty working directory and checks afterwards that nothing was written there:
the reader must never act on what a netlist asks for (.control scripts, .include, expressions).
"""

from __future__ import annotations

from pathlib import Path
from typing import NamedTuple

import pytest
from hypothesis import given
from hypothesis import strategies as st

import crosscheck.model.netlist as netlist_module
from crosscheck.errors import CrosscheckError, NetlistError, NetworkError
from crosscheck.model.netlist import MAX_ELEMENTS, MAX_LINE_CHARS, MAX_SUBCKT_DEPTH, read_netlist, read_netlist_file, read_netlist_text

OK = "V1 a 0 AC 1\nR1 a 0 1k\n"  # a valid body that bad cards are added to


class Bad(NamedTuple):
    text: str | bytes   # bytes are written to a file and read with read_netlist_file
    error: type[CrosscheckError]
    line: int
    reason: str         # a fragment of the message: which construct, or what is wrong


CASES = {
    # --- hostile or outside the subset
    "control_unclosed": Bad(f"t\n{OK}.control\nshell touch pwned\nwrite out.raw v(a)\n", NetlistError, 4,
                            "the .control block is not closed"),
    "control_end_inside": Bad(f"t\n{OK}.control\nrun\n.end\n", NetlistError, 4, "no .endc"),
    "stray_endc": Bad(f"t\n{OK}.endc\n", NetlistError, 4, "no .control before it"),
    "include_passwd": Bad(f"t\n{OK}.include /etc/passwd\n", NetlistError, 4, "never opens files"),
    "inc": Bad(f"t\n.inc models.cir\n{OK}", NetlistError, 2, ".inc is not supported"),
    "lib": Bad(f"t\n{OK}.lib 'models.lib' tt\n", NetlistError, 4, ".lib is not supported"),
    "model": Bad(f"t\n{OK}.model dmod D(is=1e-14)\n", NetlistError, 4, "type D is a diode"),
    "func": Bad(f"t\n.func twice(x) {{twice(x)}}\n{OK}R2 a 0 {{twice(1)}}\n", NetlistError, 2, "calls itself"),
    "global_in_subckt": Bad(f"t\n.global vdd\n.subckt s a\nR1 a vdd 1k\n.ends\nX1 a s\nVdd vdd 0 AC 1\n{OK}",
                            NetlistError, 2, "global nodes across subcircuits are not implemented"),
    # ngspice 39 refuses Rser=/Rpar= too (measured); the message names the part to write instead
    "inductor_rser": Bad(f"t\n{OK}L1 a 0 1m Rser=0.1\n", NetlistError, 4, "write it as its own R card in series"),
    "source_rser": Bad("t\nV1 a 0 AC 1 Rser=50\nR1 a 0 1k\n", NetlistError, 2, "Rser= is not an ngspice parameter"),
    "capacitor_rpar": Bad(f"t\n{OK}C1 a 0 1u Rpar=1meg\n", NetlistError, 4, "its own R card across the part"),
    "unknown_card": Bad(f"t\n{OK}.frobnicate 3\n", NetlistError, 4, "unknown card '.frobnicate'"),
    "diode": Bad(f"t\n{OK}D1 a 0 dmod\n", NetlistError, 4, "D1 is a diode"),
    "mosfet": Bad(f"t\n{OK}M1 d g 0 0 nmos w=1u l=1u\n", NetlistError, 4, "M1 is a MOSFET"),
    "bjt": Bad(f"t\n{OK}Q1 c b 0 npn\n", NetlistError, 4, "bipolar transistor"),
    "b_source": Bad(f"t\n{OK}B1 b 0 V=v(a)*2\n", NetlistError, 4, "behavioural source"),
    "unknown_letter": Bad(f"t\n{OK}1R a 0 1k\n", NetlistError, 4, "unknown element '1R'"),
    "poly": Bad(f"t\n{OK}E1 b 0 POLY(1) a 0 0 2\nRb b 0 1k\n", NetlistError, 4, "POLY"),
    "value_form": Bad(f"t\n{OK}G1 b 0 value={{v(a)*2}}\nRb b 0 1k\n", NetlistError, 4, "behavioural or polynomial"),
    "f_poly": Bad(f"t\n{OK}F1 b 0 POLY(1) V1 0 2\n", NetlistError, 4, "POLY"),
    "capacitor_model_after_value": Bad(f"t\n{OK}C1 a 0 1u cm\n.model cm c\n", NetlistError, 4, "after the value"),
    "resistor_model": Bad(f"t\n{OK}R2 a 0 1k rmod\n", NetlistError, 4, "no .model card named 'rmod'"),
    "inductor_turns": Bad(f"t\n{OK}L2 a 0 1m nt=3\n", NetlistError, 4, "nt= is not supported"),
    "port_without_z0": Bad("t\nV1 a 0 AC 1 portnum 1\nR1 a 0 1k\n", NetlistError, 2, "add z0"),
    "model_thickness": Bad(f"t\n{OK}C1 a 0 cm\n.model cm c thick=1n\n", NetlistError, 5, "thick= is not implemented"),
    "ac_twice": Bad("t\nV1 a 0 AC 1 AC 2\nR1 a 0 1k\n", NetlistError, 2, "AC is given twice"),
    "x_parameters": Bad(f"t\n.subckt amp a\nR1 a 0 1k\n.ends\n{OK}X1 a amp gain=2\n", NetlistError, 7,
                        "has no parameter 'gain'"),
    "subckt_parameters": Bad(f"t\n.subckt amp a params: g\nR1 a 0 1k\n.ends\n{OK}", NetlistError, 2,
                             "not name=value"),
    # --- malformed
    "bad_suffix_4k7": Bad("t\nV1 a 0 AC 1\nR1 a 0 4k7\n", NetlistError, 3, "write 4.7k"),
    "garbage_value": Bad("t\nV1 a 0 AC 1\nR1 a 0 lots\n", NetlistError, 3, "no .model card named 'lots'"),
    "value_on_continuation": Bad("t\nV1 a 0 AC 1\nR1 a 0\n* note\n+ 1..2\n", NetlistError, 5, "cannot read '1..2'"),
    "too_few_fields": Bad("t\nV1 a 0 AC 1\nR1 a\n", NetlistError, 3, "too few fields"),
    "no_resistance": Bad("t\nV1 a 0 AC 1\nR1 a 0\n", NetlistError, 3, "no resistance"),
    "too_few_fields_e": Bad(f"t\n{OK}E1 b 0 a 2\n", NetlistError, 4, "too few fields"),
    "too_many_fields_k": Bad(f"t\n{OK}L1 a 0 1m\nL2 a 0 1m\nL3 a 0 1m\nK1 L1 L2 L3 0.5\n", NetlistError, 7,
                             "third inductor 'L3'"),
    "continuation_first": Bad("t\n+ R1 a 0 1k\nV1 a 0 AC 1\n", NetlistError, 2, "continuation line"),
    "unbalanced_brace": Bad("t\nV1 a 0 AC 1\nR1 a 0 {1k*2\n", NetlistError, 3, "unbalanced"),
    "unknown_param": Bad("t\nV1 a 0 AC 1\nR1 a 0 {rload*2}\n", NetlistError, 3, "unknown parameter 'rload'"),
    "bare_param_name": Bad("t\n.param rload=1k\nV1 a 0 AC 1\nR1 a 0 rload\n", NetlistError, 4, "write {rload}"),
    "param_before_definition": Bad("t\n.param a={b*2} b={a}\n" + OK, NetlistError, 2, "circle"),
    "param_function_call": Bad("t\n.param a={sqrtt(2)}\n" + OK, NetlistError, 2, "unknown function 'sqrtt'"),
    "param_injection": Bad("t\n.param a={__import__('os').system('touch pwned')}\n" + OK, NetlistError, 2,
                           "unexpected"),
    "param_twice": Bad("t\n.param a=1\n.param A=2\n" + OK, NetlistError, 3, "defined twice"),
    "param_divide_by_zero": Bad("t\n.param z=0\n" + "V1 a 0 AC 1\nR1 a 0 {1/z}\n", NetlistError, 4, "divides by zero"),
    "empty_text": Bad("", NetlistError, 1, "empty"),
    "title_only": Bad("just a title\n* and a comment\n", NetlistError, 1, "no element cards"),
    "nul_in_text": Bad("t\nR1 a 0 1k\x00\n", NetlistError, 2, "control character"),
    "escape_sequence": Bad("t\nR1 a 0 1k\x1b[2J\n", NetlistError, 2, "control character"),
    "non_ascii_node": Bad("t\nV1 nœud 0 AC 1\nR1 nœud 0 1k\n", NetlistError, 2, "not a valid name"),
    # --- subcircuits
    "unterminated_subckt": Bad(f"t\n{OK}.subckt amp a b\nR1 a b 1k\n", NetlistError, 4, "never closed"),
    "end_inside_subckt": Bad(f"t\n{OK}.subckt amp a b\nR1 a b 1k\n.end\n", NetlistError, 4, "never closed"),
    "recursive_subckt": Bad(f"t\n.subckt s1 p\nX1 p s2\n.ends\n.subckt s2 p\nX2 p s1\n.ends\nX0 a s1\n{OK}",
                            NetlistError, 6, "s1 -> s2 -> s1"),
    "self_recursive_subckt": Bad(f"t\n.subckt s1 p\nR1 p 0 1k\nX1 p s1\n.ends\nX0 a s1\n{OK}",
                                 NetlistError, 4, "contains itself"),
    "unknown_subckt": Bad(f"t\n{OK}X1 a nosuch\n", NetlistError, 4, "unknown subcircuit 'nosuch'"),
    "wrong_x_node_count": Bad(f"t\n.subckt amp a b\nR1 a b 1k\n.ends\n{OK}X1 a b 0 amp\n", NetlistError, 7,
                              "connects 3 node(s)"),
    "stray_ends": Bad(f"t\n{OK}.ends\n", NetlistError, 4, "no .subckt"),
    "ends_name_mismatch": Bad(f"t\n.subckt amp a\nR1 a 0 1k\n.ends buf\n{OK}", NetlistError, 4, "make the names match"),
    "nested_definition": Bad(f"t\n.subckt a p\n.subckt b q\n.ends\n.ends\n{OK}", NetlistError, 3, "top level"),
    "subckt_defined_twice": Bad(f"t\n.subckt a p\n.ends\n.subckt A q\n.ends\n{OK}", NetlistError, 4, "defined twice"),
    "ground_terminal": Bad(f"t\n.subckt a p 0\n.ends\n{OK}", NetlistError, 2, "cannot be a terminal"),
    "param_inside_subckt": Bad(f"t\n.subckt a p\n.param r=1\n.param R=2\n.ends\n{OK}", NetlistError, 4, "defined twice"),
    "f_refers_outside_subckt": Bad(f"t\n.subckt a p\nF1 p 0 V1 2\n.ends\nX1 a a\n{OK}", NetlistError, 3,
                                   "not defined inside the subcircuit"),
    # --- read correctly but ill-posed (NetworkError from validation, located at the element's card)
    "duplicate_names": Bad("t\nV1 a 0 AC 1\nR1 a 0 1k\nr1 a 0 2k\n", NetworkError, 4, "duplicate element name"),
    "duplicate_after_flattening": Bad("t\n.subckt s p\nR1 p 0 1k\n.ends\nX1 a s\nr.x1.r1 a 0 1k\nV1 a 0 AC 1\n",
                                      NetworkError, 6, "duplicate element name"),
    "zero_inductance": Bad(f"t\n{OK}L1 a 0 0\n", NetworkError, 4, "inductance must be positive"),
    "negative_capacitance": Bad(f"t\n{OK}C1 a 0 -1p\n", NetworkError, 4, "capacitance must be positive"),
    "negative_resistance": Bad(f"t\n{OK}R2 a 0 -1k\n", NetworkError, 4, "negative resistance"),
    "infinite_value": Bad(f"t\n{OK}R2 a 0 1e400\n", NetworkError, 4, "finite"),
    "negative_ac_magnitude": Bad("t\nV1 a 0 AC -1\nR1 a 0 1k\n", NetworkError, 2, "must not be negative"),
    "floating_part": Bad(f"t\n{OK}R2 b c 1k\n", NetworkError, 4, "floating part"),
    "current_source_cut_set": Bad(f"t\n{OK}I1 a b AC 1\nR2 b c 1k\n", NetworkError, 4,
                                  "reached only through current sources"),
    "voltage_source_loop": Bad("t\nV1 a 0 AC 1\nV2 a 0 AC 2\nR1 a 0 1k\n", NetworkError, 3, "closes a loop"),
    "shorts_and_source_loop": Bad("t\nV1 a 0 AC 1\nR1 a b 0\nR2 b 0 0\nR3 a 0 1k\n", NetworkError, 4,
                                  "closes a loop"),
    "f_unknown_control": Bad(f"t\n{OK}F1 a 0 Vx 2\n", NetworkError, 4, "controlling source 'vx'"),
    "h_controlled_by_resistor": Bad(f"t\n{OK}H1 b 0 R1 50\nRb b 0 1k\n", NetworkError, 4, "is a R element"),
    "k_missing_inductor": Bad(f"t\n{OK}L1 a 0 1m\nK1 L1 L2 0.5\n", NetworkError, 5, "'l2', which is not an inductor"),
    "k_above_one": Bad(f"t\n{OK}L1 a 0 1m\nL2 a 0 1m\nK1 L1 L2 1.5\n", NetworkError, 6, "coupling coefficient"),
    # --- files
    "empty_file": Bad(b"", NetlistError, 1, "empty"),
    "binary_with_nul": Bad(b"\x7fELF\x02\x01\x01\x00\x00\x00\nR1 a 0 1k\n", NetlistError, 1, "NUL bytes"),
    "not_utf8_nor_1252": Bad(b"t\nV1 a 0 AC 1\nR1 a 0 4.7k\x81\n", NetlistError, 3, "neither UTF-8 nor Windows-1252"),
    "mostly_high_bytes": Bad(b"t\n" + bytes(range(0xa0, 0x100)) + b"\n", NetlistError, 2, "neither UTF-8"),
    "quote_unbalanced": Bad("t\nV1 a 0 AC 1\nR1 a 0 '2*3\n", NetlistError, 3, "unbalanced \"'\""),
}


@pytest.mark.parametrize("case", CASES.values(), ids=list(CASES))
def test_bad_netlist_is_refused_with_file_and_line(case: Bad, tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """The right error class, 'bad.cir:<line>:' and the reason in the message, no traceback, no file written."""
    monkeypatch.chdir(tmp_path)
    with pytest.raises(CrosscheckError) as info:
        if isinstance(case.text, bytes):
            (tmp_path / "bad.cir").write_bytes(case.text)
            read_netlist_file(tmp_path / "bad.cir")
        else:
            read_netlist(case.text, "bad.cir")
    exc = info.value
    message = str(exc)
    assert type(exc) is case.error, message
    assert isinstance(exc, ValueError)
    assert f"bad.cir:{case.line}: " in message, message
    assert case.reason in message, message
    assert "Traceback" not in message
    assert exc.location.line == case.line
    assert sorted(p.name for p in tmp_path.iterdir()) == (["bad.cir"] if isinstance(case.text, bytes) else [])


def test_case_table_is_large_enough() -> None:
    """The table covers at least 30 distinct malformed or ill-posed netlists."""
    assert len(CASES) >= 30


def test_read_netlist_text_applies_the_file_checks(tmp_path: Path) -> None:
    """read_netlist_text returns a good file's text and refuses a binary one like read_netlist_file does."""
    good, bad = tmp_path / "good.cir", tmp_path / "bad.cir"
    good.write_bytes("t\nR1 a 0 4.7µ\n".encode())
    bad.write_bytes(b"t\nR1 a 0 1k\n\x81\x8d\n")
    assert read_netlist_text(good) == "t\nR1 a 0 4.7µ\n"
    with pytest.raises(NetlistError, match="neither UTF-8 nor Windows-1252") as info:
        read_netlist_text(bad)
    assert f"{bad}:3:" in str(info.value)


def test_missing_file_is_a_netlist_error(tmp_path: Path) -> None:
    """A path that cannot be opened is reported with the path, not as a bare OSError."""
    with pytest.raises(NetlistError, match="cannot read the netlist") as info:
        read_netlist_file(tmp_path / "absent.cir")
    assert str(tmp_path / "absent.cir") in str(info.value)


# ----------------------------------------------------------------------------- limits for untrusted input


def test_line_longer_than_the_limit_is_refused() -> None:
    """A physical line over MAX_LINE_CHARS is refused, even a comment."""
    text = f"t\n{OK}* " + "x" * MAX_LINE_CHARS + "\n"
    with pytest.raises(NetlistError, match="longer than the limit") as info:
        read_netlist(text, "long.cir")
    assert "long.cir:4:" in str(info.value)


def test_more_element_cards_than_the_limit_are_refused() -> None:
    """Card number MAX_ELEMENTS + 1 is refused at its own line, before any element is built."""
    text = "t\n" + "".join(f"R{i} a 0 1\n" for i in range(MAX_ELEMENTS + 1))
    with pytest.raises(NetlistError, match=f"more than {MAX_ELEMENTS} element cards") as info:
        read_netlist(text, "big.cir")
    assert f"big.cir:{MAX_ELEMENTS + 2}:" in str(info.value)


def test_the_element_limit_is_a_boundary(monkeypatch: pytest.MonkeyPatch) -> None:
    """Exactly the limit reads; one more is refused (limit lowered to keep the test fast)."""
    monkeypatch.setattr(netlist_module, "MAX_ELEMENTS", 10)
    body = "t\nV1 a 0 AC 1\n" + "".join(f"R{i} a 0 1k\n" for i in range(9))
    assert len(read_netlist(body).elements) == 10
    with pytest.raises(NetlistError, match="more than 10"):
        read_netlist(body + "R9 a 0 1k\n")


def test_exponential_subcircuit_expansion_is_refused() -> None:
    """Doubling instances at each of 25 levels would make 2**25 elements; the reader stops at the limit."""
    cards = [f".subckt s{i} p\nXa p s{i + 1}\nXb p s{i + 1}\n.ends" for i in range(25)]
    cards.append(".subckt s25 p\nR1 p 0 1k\n.ends")
    with pytest.raises(NetlistError, match="after flattening"):
        read_netlist("t\n" + "\n".join(cards) + "\nX0 a s0\nV1 a 0 AC 1\n", "boom.cir")


def test_instances_without_elements_count_towards_the_limit() -> None:
    """Subcircuits that hold only instances cannot loop for ever: instances count too."""
    cards = [f".subckt s{i} p\n" + "".join(f"X{j} p s{i + 1}\n" for j in range(10)) + ".ends" for i in range(12)]
    cards.append(".subckt s12 p\n.ends")
    with pytest.raises(NetlistError, match="after flattening"):
        read_netlist("t\n" + "\n".join(cards) + f"\nX0 a s0\n{OK}")


def test_nesting_deeper_than_the_limit_is_refused() -> None:
    """One level more than MAX_SUBCKT_DEPTH is refused at the instance that goes too deep."""
    depth = MAX_SUBCKT_DEPTH + 1
    cards = [f".subckt s{i} a\nX{i + 1} a s{i + 1}\n.ends" for i in range(1, depth)]
    cards.append(f".subckt s{depth} a\nR1 a 0 1k\n.ends")
    text = "t\n" + "\n".join(cards) + f"\nX1 a s1\n{OK}"
    with pytest.raises(NetlistError, match=f"deeper than {MAX_SUBCKT_DEPTH}") as info:
        read_netlist(text, "deep.cir")
    assert f"deep.cir:{3 * (depth - 1)}:" in str(info.value)  # the X card inside s{depth-1}, 3 lines a subckt


# ----------------------------------------------------------------------------- any text at all

_PIECES = ["R1", "L1", "C1", "V1", "I1", "E1", "F1", "H1", "K1", "X1", "a", "0", "gnd", "1k", "4k7", "{1+2}", "{", "}",
           "(", ")", "=", ",", "AC", "DC", "SIN(0 1)", "POLY(1)", ".param", "x=1", ".subckt", "s", ".ends", ".end",
           ".ac", "+", "*", ";", "$", "\n", "\n", "\n", " ", "ic=0", "params:", "1e400", "V1", "L2", "0.5", "\r", "µ"]


@given(st.lists(st.one_of(st.sampled_from(_PIECES), st.text(max_size=3)), max_size=40))
def test_any_text_gives_a_network_or_a_crosscheck_error(pieces: list[str]) -> None:
    """Whatever the text, the reader returns a Network or raises a CrosscheckError naming the file and line."""
    try:
        net = read_netlist("title\n" + " ".join(pieces), "fuzz.cir")
    except CrosscheckError as exc:
        assert str(exc).startswith("fuzz.cir:"), str(exc)  # every refusal names the file and line
        return
    assert net.elements
