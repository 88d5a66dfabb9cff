"""The reading check: ngspice runs the netlist's own accepted lines, and a misreading by our reader shows.

Expected values are measured in each test by running ngspice on the same text (``ngspice_direct.ngspice_ac``),
never stored from crosscheck. Until the reader fills ``Network.source_lines`` itself, the tests set them with
``dataclasses.replace`` to the netlist's element, subcircuit, parameter and model lines.
"""

from __future__ import annotations

import dataclasses
import math

import pytest

from crosscheck.judge.case import judged
from crosscheck.judge.reading import judge_reading
from crosscheck.judge.records import Cause
from crosscheck.judge.result import CaseResult
from crosscheck.model.netlist import read_netlist
from crosscheck.model.network import Network, Port
from crosscheck.model.tolerance import SOLVER_VS_SPICE
from crosscheck.own.equivalent import thevenin
from crosscheck.report.results_json import case_document
from crosscheck.spice.engine import solve
from crosscheck.spice.reading import (
    ReadingAnswer,
    build_reading_deck,
    check_reading,
    element_differences,
    unsafe_line,
)
from crosscheck.spice.workers import SpicePool
from crosscheck.vocabulary import Verdict
from ngspice_direct import _engine, ngspice_ac

FREQS = (50.0, 1e3, 20e3)

LADDER = """rc ladder
V1 in 0 AC 1 0
R1 in n1 1k
C1 n1 0 10n
R2 n1 n2 2.2k
C2 n2 0 4.7n
"""
SUBCIRCUIT = """filter block twice
V1 in 0 AC 2 30
R1 in a 1k
.subckt blk p q
R2 p q 2k
C1 q 0 1n
.ends
X1 a b blk
X2 b c blk
L1 c 0 1m
"""
DEPENDENT = """sources of all four kinds
V1 in 0 AC 1 0
R1 in s 100
VS s x 0
R2 x 0 1k
E1 e 0 in 0 3
R3 e out 470
G1 out 0 x 0 2m
F1 out 0 VS 0.5
H1 h 0 VS 200
R4 h out 1k
R5 out 0 10k
"""


def test_the_reader_gives_the_lines_this_file_expects() -> None:
    """The reader's ``source_lines`` are the lines these tests build by hand for the ladder and the subcircuit."""
    assert read_netlist(LADDER).source_lines == accepted_lines(LADDER)
    assert read_netlist(SUBCIRCUIT).source_lines == accepted_lines(SUBCIRCUIT)


def accepted_lines(text: str) -> tuple[str, ...]:
    """The lines a reader accepts from ``text``: all but the title, comments, analysis cards and .end."""
    skip = (".ac ", ".op", ".tran ", ".print ", ".options noopac")
    return tuple(
        line
        for line in text.splitlines()[1:]
        if line.strip()
        and not line.startswith("*")
        and not line.lower().startswith(skip)
        and line.strip().lower() != ".end"
    )


def with_lines(network: Network, text: str) -> Network:
    return dataclasses.replace(network, source_lines=accepted_lines(text))


def without_lines(network: Network) -> Network:
    """The network with no lines of text, as the fuzzer's networks are."""
    return dataclasses.replace(network, source_lines=())


def judged_case(network: Network, port: Port, freqs=FREQS) -> CaseResult:
    """The whole case in this process: the own route, ngspice's ``solve`` (both decks), then ``judged``."""
    own = tuple(thevenin(network, port, freqs))
    spice = solve(_engine(), network, port, freqs)
    result = CaseResult("case", network.title, (port.a, port.b), tuple(freqs), SOLVER_VS_SPICE, own=own, spice=spice)
    return judged(result, network)


def measured_vth(text: str, port: Port, f: float) -> complex:
    """ngspice's own V(a) − V(b) on ``text`` as written."""
    v = ngspice_ac(text, f, [port.a, port.b])
    return v[port.a] - v[port.b]


# --------------------------------------------------------------------------- (1) the check passes


@pytest.mark.spice
@pytest.mark.parametrize(
    ("text", "port"),
    [(LADDER, Port("n2", "0")), (SUBCIRCUIT, Port("a", "c")), (DEPENDENT, Port("out", "0"))],
    ids=["ladder", "subcircuit", "dependent"],
)
def test_reading_agrees_and_equals_ngspice_on_the_text(text: str, port: Port) -> None:
    network = with_lines(read_netlist(text), text)
    result = judged_case(network, port)
    assert result.reading is not None
    assert result.reading.verdict == Verdict.PASS, result.reading.explanation
    assert result.reading.compared == len(FREQS)
    assert result.verdict == Verdict.PASS
    reading = result.spice.reading  # type: ignore[union-attr]
    for f, v in zip(FREQS, reading.vth):
        expected = measured_vth(text, port, f)  # measured: ngspice on the same text in this test
        assert v is not None and abs(v - expected) <= 1e-9 * abs(expected)


@pytest.mark.spice
def test_m_on_a_resistor_agrees_with_a_model_of_its_effective_value() -> None:
    """``R1 in a 1k m=2`` is two 1 kΩ in parallel (ngspice manual, instance multiplier; from memory): 500 Ω."""
    text = "m on a resistor\nV1 in 0 AC 1 0\nR1 in a 1k m=2\nR2 a 0 1k\nC1 a 0 100n\n"
    model = read_netlist(text.replace("1k m=2", "500"))  # the effective value, until the reader reads m=
    network = dataclasses.replace(model, source_lines=accepted_lines(text))
    result = judged_case(network, Port("a", "0"))
    assert result.reading is not None and result.reading.verdict == Verdict.PASS, result.reading
    for f, v in zip(FREQS, result.spice.reading.vth):  # type: ignore[union-attr]
        expected = measured_vth(text, Port("a", "0"), f)
        assert v is not None and abs(v - expected) <= 1e-9 * abs(expected)


@pytest.mark.spice
def test_ngspice_element_values_match_a_model_of_the_effective_values() -> None:
    """m, tc1 with .temp, dtemp, scale: ngspice's values as this module reads them equal the effective ones.

    R(T) = R·(1 + tc1·ΔT), ΔT = temp + dtemp − 27 °C (ngspice manual, resistors; from memory); m parallel
    copies divide R and L and multiply C (common practice).
    """
    text = (
        "effective values\nV1 in 0 AC 1 0\nR1 in a 1k m=2\nR2 a b 1k tc1=0.01\nR3 b 0 1k tc1=0.01 dtemp=5\n"
        "C1 a 0 1n m=3\nL1 b c 1m m=2\nR4 c 0 1k scale=2\n.temp 50\n"
    )
    model_text = (
        "effective values\nV1 in 0 AC 1 0\nR1 in a 500\nR2 a b 1230\nR3 b 0 1280\nC1 a 0 3n\nL1 b c 0.5m\nR4 c 0 2k\n"
    )
    network = dataclasses.replace(read_netlist(model_text), source_lines=accepted_lines(text))
    engine = _engine()
    found: list = []
    deck = build_reading_deck(network, Port("a", "0"), [1e3])
    engine.run(deck, lambda plots: found.append(element_differences(network, engine.instance_parameter, 27.0)))
    assert found == [([], len(network.elements))]
    broken = dataclasses.replace(
        network, elements=tuple(dataclasses.replace(e, value=1e-9) if e.name == "c1" else e for e in network.elements)
    )
    engine.run(deck, lambda plots: found.append(element_differences(broken, engine.instance_parameter, 27.0)))
    differences, compared = found[1]
    assert compared == len(network.elements)
    assert [d.name for d in differences] == ["c1"] and math.isclose(differences[0].ngspice.real, 3e-9, rel_tol=1e-12)


# --------------------------------------------------------------------------- (2) a misreading is caught


def _changed(network: Network, name: str, **values) -> Network:
    elements = tuple(dataclasses.replace(e, **values) if e.name == name else e for e in network.elements)
    return dataclasses.replace(network, elements=elements)  # source_lines kept: the text says otherwise


@pytest.mark.spice
@pytest.mark.parametrize(
    ("name", "values", "line", "quantity"),
    [
        ("r1", {"value": 2000.0}, 3, "resistance"),
        ("r.x2.r2", {"value": 3000.0}, 5, "resistance"),
        ("v1", {"ac_phase_deg": 0.0}, 2, "ac phasor"),
    ],
    ids=["top-level resistor", "resistor in a subcircuit", "source phase"],
)
def test_a_deliberate_misreading_fails_naming_the_element_and_its_line(name, values, line, quantity) -> None:
    network = with_lines(read_netlist(SUBCIRCUIT), SUBCIRCUIT)
    result = judged_case(_changed(network, name, **values), Port("a", "c"))
    assert all(p.verdict == Verdict.PASS for p in result.points), "both routes solve the same (misread) model"
    check = result.reading
    assert check is not None and check.verdict == Verdict.FAIL and check.cause == Cause.READING_DIFFERS
    assert check.elements == (name,) and check.line == str(line)
    assert check.explanation.startswith(f"ngspice reads this netlist differently from crosscheck at line {line}: ")
    assert f"{name} (line {line}): {quantity}" in check.explanation
    assert result.verdict == Verdict.FAIL and result.explanation == check.explanation
    doc = case_document(result)["reading"]
    assert doc["verdict"] == "fail" and doc["elements"] == [name] and doc["cause"] == "reading-differs"


# --------------------------------------------------------------------------- (3) ngspice refuses a line


@pytest.mark.spice
def test_ngspice_refusing_a_line_is_a_finding_not_a_crash() -> None:
    network = with_lines(read_netlist(LADDER), LADDER)
    lines = tuple(line + " foo=3" if line.startswith("R2") else line for line in network.source_lines)
    result = judged_case(dataclasses.replace(network, source_lines=lines), Port("n2", "0"))
    check = result.reading
    assert check is not None and check.verdict == Verdict.FAIL and check.cause == Cause.READING_REFUSED
    assert check.explanation.startswith("ngspice does not accept line <string>:5: 'R2 n1 n2 2.2k foo=3'")
    assert check.line == "<string>:5"
    assert all(p.verdict == Verdict.PASS for p in result.points), "the model's own deck still ran"


# --------------------------------------------------------------------------- (4) the defensive filter


@pytest.mark.parametrize(
    "line",
    [
        ".control",
        ".endc",
        ".include other.cir",
        ".inc other.cir",
        ".lib models.lib typ",
        "R1 a b `echo 1k`",
        "+ .control",
        ".tran 1u 1m",
        ".options reltol=1e-3",
        ".save all",
        "* a comment",
        "R1 a b 1k\x1b",
    ],
)
def test_the_line_filter_refuses_what_must_not_reach_ngspice(line: str) -> None:
    assert unsafe_line(line) is not None


@pytest.mark.parametrize(
    "line",
    [
        "R1 a b 1k",
        "+ 2k",
        ".param rbase=1k",
        ".subckt blk p q",
        ".ENDS blk",
        ".model rmod r rsh=100",
        ".temp 50",
        ".func half(x) {x/2}",
        ".options temp=50 tnom=25",
    ],
)
def test_the_line_filter_passes_the_reader_s_cards(line: str) -> None:
    assert unsafe_line(line) is None


class _NeverRun:
    """An engine that fails the test if anything is sent to it."""

    last_lines = ()

    def run(self, deck, while_loaded=None):
        raise AssertionError(f"a deck was sent: {deck.text!r}")

    def instance_parameter(self, name, parameter):
        raise AssertionError("an element value was asked for")


@pytest.mark.parametrize("bad", [".control", ".include /etc/passwd", "R9 a 0 `rm -rf /`"])
def test_a_refused_line_sends_nothing_and_is_an_error_finding(bad: str) -> None:
    network = with_lines(read_netlist(LADDER), LADDER)
    network = dataclasses.replace(network, source_lines=(*network.source_lines, bad))
    port = Port("n2", "0")
    answer = check_reading(_NeverRun(), network, port, [list(FREQS)], FREQS, dict.fromkeys(FREQS))
    assert answer is not None and answer.refused.startswith("the reading check refused accepted line 6")
    check = judge_reading(answer, thevenin(network, port, FREQS), SOLVER_VS_SPICE)
    assert check is not None and check.verdict == Verdict.ERROR and check.cause == Cause.READING_UNSAFE


def test_a_network_without_lines_gets_no_reading_and_no_judgement() -> None:
    network = without_lines(read_netlist(LADDER))
    assert check_reading(_NeverRun(), network, Port("n2", "0"), [list(FREQS)], FREQS, {}) is None
    assert judge_reading(None, [], SOLVER_VS_SPICE) is None


def test_a_reading_without_values_is_unavailable_not_a_pass() -> None:
    network = without_lines(read_netlist(LADDER))
    answer = ReadingAnswer(FREQS, (None,) * len(FREQS), notes=("no rows",))
    check = judge_reading(answer, thevenin(network, Port("n2", "0"), FREQS), SOLVER_VS_SPICE)
    assert check is not None and check.verdict == Verdict.UNAVAILABLE and check.explanation == "no rows"


# --------------------------------------------------------------------------- (5) the cost


class _Counting:
    """The engine, counting the runs and the element values read."""

    def __init__(self, engine):
        self.engine, self.runs, self.values = engine, 0, 0
        self.version = engine.version

    @property
    def last_lines(self):
        return self.engine.last_lines

    def run(self, deck, while_loaded=None):
        self.runs += 1
        return self.engine.run(deck, while_loaded)

    def instance_parameter(self, name, parameter):
        self.values += 1
        return self.engine.instance_parameter(name, parameter)


@pytest.mark.spice
@pytest.mark.parametrize("freqs", [FREQS, (0.0, *FREQS)], ids=["ac", "with 0 Hz"])
def test_the_reading_check_costs_one_open_circuit_run_per_frequency_group(freqs) -> None:
    network = without_lines(read_netlist(LADDER))
    port = Port("n2", "0")
    without, with_ = _Counting(_engine()), _Counting(_engine())
    solve(without, network, port, freqs)  # type: ignore[arg-type]
    result = solve(with_, with_lines(network, LADDER), port, freqs)  # type: ignore[arg-type]
    groups = 2 if 0.0 in freqs else 1  # 0 Hz runs alone, as for the model's deck
    assert with_.runs - without.runs == groups
    assert with_.values == 0, "element values are read only when the reading differs"
    assert result.reading is not None and not result.reading.values_read
    assert result.decks == solve(_engine(), network, port, freqs).decks  # the model's decks are unchanged


# --------------------------------------------------------------------------- in the worker


@pytest.mark.spice
def test_the_reading_runs_in_the_isolated_worker() -> None:
    network = with_lines(read_netlist(SUBCIRCUIT), SUBCIRCUIT)
    port = Port("a", "c")
    with SpicePool(workers=1) as pool:
        result = pool.submit(network, port, FREQS).result()
        plain = pool.submit(without_lines(read_netlist(SUBCIRCUIT)), port, FREQS).result()
    assert plain.reading is None
    assert result.reading is not None and result.reading.deck.count("X1 a b blk") == 1
    for f, v in zip(FREQS, result.reading.vth):
        expected = measured_vth(SUBCIRCUIT, port, f)
        assert v is not None and abs(v - expected) <= 1e-9 * abs(expected)


@pytest.mark.spice
def test_lines_ngspice_cannot_recover_from_cost_the_reading_alone_and_retire_the_worker() -> None:
    """ngspice 39 stops for good on a .subckt without .ends ("cannot recover and awaits to be detached")."""
    network = with_lines(read_netlist(SUBCIRCUIT), SUBCIRCUIT)
    broken = dataclasses.replace(network, source_lines=tuple(x for x in network.source_lines if x != ".ends"))
    port = Port("a", "c")
    with SpicePool(workers=1) as pool:
        first = pool.submit(broken, port, FREQS).result()
        second = pool.submit(network, port, FREQS).result()
    assert all(p.vth is not None for p in first.points), "the model's decks ran before the reading"
    assert first.reading is not None and first.reading.failure.startswith(
        "ngspice does not accept line 3 of the lines crosscheck accepted: '.subckt blk p q'"
    )
    assert ".ends" in first.reading.failure or "subckt" in first.reading.failure.lower()
    assert second.reading is not None and second.reading.failure == "" and None not in second.reading.vth


def test_a_worker_whose_ngspice_says_it_cannot_recover_retires_after_the_case() -> None:
    """The case's own result still goes back; the worker is replaced before the next case."""
    from crosscheck.spice.sandbox import Settings, Task, _one_case

    network = without_lines(read_netlist(LADDER))
    task = Task(network, Port("n2", "0"), FREQS, "combined")
    settings = Settings(directory="unused", library=None, memory_bytes=None, cpu_s=None, cases_per_worker=100)
    for broken in (False, True):
        engine = type("FakeEngine", (), {"broken": broken})()
        outcome, retire = _one_case(lambda *args: "the result", engine, None, task, settings)
        assert outcome == ("ok", "the result") and retire is broken


def test_element_values_are_read_within_their_time_budget() -> None:
    network = read_netlist(DEPENDENT)
    asked: list[tuple[str, str]] = []

    def read(name: str, parameter: str) -> float | None:
        asked.append((name, parameter))
        return None  # nothing readable: no difference can be claimed

    assert element_differences(network, read, 27.0) == ([], len(network.elements))
    assert {name for name, _ in asked} == {e.name for e in network.elements}
    asked.clear()
    assert element_differences(network, read, 27.0, budget_s=-1.0) == ([], 0) and asked == []


@pytest.mark.spice
def test_a_port_node_ngspice_does_not_have_is_named() -> None:
    """A reader that renamed a node: ngspice's reading has no such node, and the check says so."""
    network = with_lines(read_netlist(LADDER), LADDER)
    renamed = tuple(line.replace("n2", "n9") for line in network.source_lines)
    result = judged_case(dataclasses.replace(network, source_lines=renamed), Port("n2", "0"))
    check = result.reading
    assert check is not None and check.verdict == Verdict.FAIL and check.cause == Cause.READING_DIFFERS
    assert check.explanation.endswith("the port node 'n2' is not a node of its reading")


@pytest.mark.spice
def test_a_reader_that_dropped_m_is_caught_with_ngspice_s_effective_value() -> None:
    """The text says ``R1 in a 1k m=2`` (500 Ω in ngspice); a model that kept 1 kΩ is named as the misreading."""
    text = "m dropped\nV1 in 0 AC 1 0\nR1 in a 1k m=2\nR2 a 0 1k\nC1 a 0 100n\n"
    network = dataclasses.replace(read_netlist(text.replace(" m=2", "")), source_lines=accepted_lines(text))
    check = judged_case(network, Port("a", "0")).reading
    assert check is not None and check.verdict == Verdict.FAIL and check.elements == ("r1",)
    assert "r1 (line 3): resistance 500 Ω in ngspice, 1 kΩ in crosscheck's model" in check.explanation


@pytest.mark.spice
def test_numbered_nodes_are_found_in_ngspices_reading() -> None:
    """ngspice names the vector of a node that starts with a digit v(3), not 3: the check must find both ends.

    A course-style netlist (numbered nodes, unit letters after the suffixes, as ngspice reads them)."""
    text = "numbered nodes\nvin 1 0 ac 1v\nr1 1 2 1kohm\nc1 2 0 0.1uf\nl1 2 3 10mh\nr2 3 4 50ohms\nr3 4 0 50\n"
    result = judged_case(read_netlist(text), Port("3", "4"))
    assert result.reading is not None
    assert result.reading.verdict == Verdict.PASS, result.reading.explanation
    assert result.reading.compared == len(FREQS)
    measured = ngspice_ac(text, FREQS[1], ["3", "4"])  # measured: ngspice on the same text, in this test
    own = next(e.vth for e in result.own if e.freq_hz == FREQS[1])
    assert own == pytest.approx(measured["3"] - measured["4"], rel=1e-9)


@pytest.mark.spice
def test_a_schematic_editors_node_name_is_found_in_ngspices_reading() -> None:
    """ngspice drops the final ')' of net-(c1-pad1) in its vector's name: the check must still find the node."""
    text = "export\nV1 /in GND DC 0 AC 1\nR1 /in Net-(C1-Pad1) 10k\nC1 Net-(C1-Pad1) GND 100n\nR2 Net-(C1-Pad1) 0 47k\n"
    result = judged_case(read_netlist(text), Port("Net-(C1-Pad1)", "0"))
    assert result.reading is not None and not result.reading.cause == Cause.READING_DIFFERS
    assert result.reading.verdict == Verdict.PASS, result.reading.explanation


def test_a_long_sweep_is_read_at_eight_spread_frequencies_and_0_hz_keeps_its_own() -> None:
    from crosscheck.spice.reading import MAX_READING_FREQS, reading_groups

    sweep = [float(f) for f in range(1, 41)]
    (picked, dc) = reading_groups([sweep, [0.0]])
    assert len(picked) == MAX_READING_FREQS == 8 and picked[0] == 1.0 and picked[-1] == 40.0
    assert picked == sorted(set(picked)) and dc == [0.0]
    assert reading_groups([[1.0, 2.0, 3.0]]) == [[1.0, 2.0, 3.0]]


@pytest.mark.spice
def test_a_misreading_is_still_caught_on_a_long_sweep() -> None:
    """40 frequencies, the reading made at 8 of them: a misread resistor still fails the case."""
    network = with_lines(read_netlist(SUBCIRCUIT), SUBCIRCUIT)
    sweep = tuple(10.0 ** (1 + i / 10) for i in range(40))
    result = judged_case(_changed(network, "r1", value=2000.0), Port("a", "c"), freqs=sweep)
    check = result.reading
    assert check is not None and check.verdict == Verdict.FAIL and check.cause == Cause.READING_DIFFERS
    assert check.compared == 8 and check.elements == ("r1",)
