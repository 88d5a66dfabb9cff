"""Hand-calculated expectations against the own solver: the tolerance model, the records, the CLI."""

from __future__ import annotations

import cmath
import json
import math
from dataclasses import replace

import pytest

from crosscheck.model.cases import Expectation, load_case
from crosscheck.run.check import case_from_netlist, run_cases
from crosscheck.cli import EXIT_FAIL, EXIT_OK, EXIT_USAGE, main
from crosscheck.own.equivalent import thevenin
from crosscheck.judge.expectations import check_expectations
from crosscheck.judge.stated import deviation, quantity_value
from crosscheck.model.expect_option import ExpectOptionError, expectations_from_options
from crosscheck.model.netlist import read_netlist
from crosscheck.model.network import Port
from crosscheck.model.tolerance import HAND_CALCULATION, Tolerance

#: ω = 1 rad/s, so that impedances in ohms are element values (L = X, C = 1/|X|).
F_UNIT = 1.0 / (2.0 * math.pi)

# W2 (published: Alexander & Sadiku, Fundamentals of Electric Circuits, Practice Problem 10.9):
# 75∠20° V in series with 6 Ω and j2 Ω; −j4 Ω across; 10 Ω in series to terminal a.
W2 = """W2 divider with series resistor
V1 s 0 AC 75 20
R6 s m 6
L2 m n 2
C4 n 0 0.25
R10 n a 10
.end
"""

# RC low-pass, exact at every frequency (published: D. H. Johnson, OpenStax CNX m0030):
# V_th = V/(1 + jωRC), Z_th = R/(1 + jωRC).
RC = "rc\nV1 in 0 AC 1\nR1 in out 1k\nC1 out 0 1u\n.end\n"


def _rc(f: float) -> tuple[complex, complex]:
    d = 1 + 1j * 2 * math.pi * f * 1e3 * 1e-6
    return 1 / d, 1e3 / d


def _case(text: str, port: tuple[str, str], freqs, expectations=(), sources: str = "peak", path: str = "net.cir"):
    case = case_from_netlist(path, text, port, freqs, sources=sources)
    return replace(case, expectations=tuple(expectations))


def _checks(case):
    [result] = run_cases([case], engine="own")
    return result, {(c.index, c.quantity): c for c in result.expectations}


def test_published_w2_hand_values_pass():
    """The printed answer of W2 (3–4 significant figures) passes at the hand-calculation tolerance (1 %, 0.5°)."""
    expect = Expectation(F_UNIT, {"vth": cmath.rect(47.43, math.radians(-51.57)), "zth": 12.4 - 3.2j},
                         HAND_CALCULATION, "published: Alexander & Sadiku, Practice Problem 10.9", 1)
    result, checks = _checks(_case(W2, ("a", "0"), [F_UNIT], [expect]))
    assert result.verdict == "pass"
    assert checks[(1, "vth")].verdict == "pass" and checks[(1, "zth")].verdict == "pass"
    assert abs(checks[(1, "vth")].phase_err_deg) < 0.01, "printed angle -51.57° (tolerance 0.01°)"
    assert checks[(1, "vth")].how.startswith("published")


@pytest.mark.parametrize("mag_factor, phase_off, verdict", [
    (1.008, 0.0, "pass"),     # 0.8 % inside 1 %
    (1.015, 0.0, "fail"),     # 1.5 % outside 1 %
    (1.0, 0.4, "pass"),       # 0.4° inside 0.5°
    (1.0, 0.7, "fail"),       # 0.7° outside 0.5°
    (0.992, -0.45, "pass"),   # both inside
])
def test_magnitude_and_phase_judged_separately(mag_factor, phase_off, verdict):
    """With phase_deg set, magnitude (rel) and phase (degrees) are each held to their own tolerance."""
    vth, _ = _rc(1e3)
    stated = vth * mag_factor * cmath.exp(1j * math.radians(phase_off))
    expect = Expectation(1e3, {"vth": stated}, HAND_CALCULATION, "", 1)
    _, checks = _checks(_case(RC, ("out", "0"), [1e3], [expect]))
    check = checks[(1, "vth")]
    assert check.verdict == verdict
    assert check.mag_err_pct == pytest.approx(100 * (mag_factor - 1), abs=1e-6)
    assert check.mag_err_db == pytest.approx(20 * math.log10(mag_factor), abs=1e-8)
    assert check.phase_err_deg == pytest.approx(phase_off, abs=1e-6)
    if verdict == "fail":
        assert "dB" in check.explanation and "%" in check.explanation and "°" in check.explanation


def test_without_phase_tolerance_the_complex_relative_error_decides():
    """A 0.7° phase slip alone is a 1.22 % complex error: it passes a 1° phase tolerance, fails rel = 1 % alone."""
    vth, _ = _rc(1e3)
    stated = vth * cmath.exp(1j * math.radians(0.7))
    relaxed = Expectation(1e3, {"vth": stated}, Tolerance(rel=0.01, phase_deg=1.0), "", 1)
    complex_only = Expectation(1e3, {"vth": stated}, Tolerance(rel=0.01), "", 2)
    _, checks = _checks(_case(RC, ("out", "0"), [1e3], [relaxed, complex_only]))
    assert checks[(1, "vth")].verdict == "pass"
    assert checks[(2, "vth")].verdict == "fail"
    expected_rel = 2 * math.sin(math.radians(0.35))  # |e^{jφ} − 1| = 2 sin(φ/2)
    assert checks[(2, "vth")].rel_err == pytest.approx(expected_rel, rel=1e-9)


def test_absolute_floor_passes_a_tiny_difference():
    """|Δ| below tol.abs passes whatever the relative error (a near-zero quantity)."""
    d = deviation(1e-9 + 0j, 2e-9 + 0j, Tolerance(rel=0.01, abs=1e-6, phase_deg=0.5))
    assert d.within and d.score == 0.0
    assert not deviation(1e-9 + 0j, 2e-9 + 0j, Tolerance(rel=0.01, phase_deg=0.5)).within


def test_series_form_values():
    """W7's Z_th = 2.933 + j4.467 Ω at ω = 1 rad/s is 2.933 Ω + 4.467 H; a series C of it is refused with why.
    from memory: Alexander & Sadiku, Example 11.5 (printed 2.933 + j4.467; held to 1 % and 0.5°)."""
    w7 = "w7\nV1 s 0 AC 10\nR4 s m 4\nR8 m n 8\nC6 n 0 {1/6}\nL5 m a 5\n.end\n"
    expect = Expectation(F_UNIT, {"series_r": 2.933 + 0j, "series_l": 4.467 + 0j, "series_c": 0.2239 + 0j},
                         HAND_CALCULATION, "", 1)
    _, checks = _checks(_case(w7, ("a", "0"), [F_UNIT], [expect]))
    assert checks[(1, "series_r")].verdict == "pass"
    assert checks[(1, "series_l")].verdict == "pass"
    wrong_kind = checks[(1, "series_c")]
    assert wrong_kind.verdict == "fail"
    assert "inductive" in wrong_kind.explanation
    assert wrong_kind.obtained.real < 0, "as a capacitance an inductive Z_th is negative"


def test_series_inductance_at_dc_is_unavailable():
    """A series L has no meaning at DC: unavailable, with the reason."""
    expect = Expectation(0.0, {"series_l": 1e-3 + 0j}, HAND_CALCULATION, "", 1)
    result, checks = _checks(_case(RC, ("out", "0"), [0.0], [expect]))
    assert checks[(1, "series_l")].verdict == "unavailable"
    assert "DC" in checks[(1, "series_l")].explanation
    assert result.verdict == "unavailable"


def test_a_form_that_does_not_exist_fails():
    """An ideal voltage source at the port has Z_th = 0 and no Norton current: a stated I_N is wrong."""
    text = "ideal\nV1 a 0 AC 5\nR1 a b 10\nR2 b 0 10\n.end\n"
    expect = Expectation(50.0, {"in": 0.5 + 0j, "vth": 5 + 0j}, HAND_CALCULATION, "", 1)
    _, checks = _checks(_case(text, ("a", "0"), [50.0], [expect]))
    assert checks[(1, "vth")].verdict == "pass"
    assert checks[(1, "in")].verdict == "fail"
    assert "Norton" in checks[(1, "in")].explanation


def test_frequency_not_computed_is_unavailable():
    """An expectation at a frequency crosscheck did not compute cannot be judged."""
    network = read_netlist(RC)
    own = thevenin(network, Port("out", "0"), [1e3])
    case = _case(RC, ("out", "0"), [1e3], [Expectation(2e3, {"vth": 1 + 0j}, HAND_CALCULATION, "", 1)])
    [check] = check_expectations(case, own, network)
    assert check.verdict == "unavailable" and check.obtained is None


def test_quantity_value_matches_the_series_form():
    """Series R and L (or C) read from Z_th agree with Equivalent.series_form() where the kind matches."""
    network = read_netlist(RC)
    [eq] = thevenin(network, Port("out", "0"), [1e3])
    form = eq.series_form()
    assert form.reactive_kind == "C"
    assert quantity_value(eq, "series_r")[0].real == pytest.approx(form.resistance, rel=1e-15)
    assert quantity_value(eq, "series_c")[0].real == pytest.approx(form.reactive_value, rel=1e-15)


def test_case_file_expectation_fails_the_case(tmp_path):
    """[[expect]] in a case file: a wrong hand value makes the case fail, with the explanation as its reason."""
    (tmp_path / "rc.cir").write_text(RC)
    vth, zth = _rc(1e3)
    path = tmp_path / "rc.toml"
    path.write_text(f"""
netlist = "rc.cir"
port = ["out", "0"]
frequencies = ["1k"]
[[expect]]
at = "1k"
vth = "{abs(vth):.4g}@{math.degrees(cmath.phase(vth)):.3f}"
zth = "{zth.real * 1.05:.4g} {zth.imag * 1.05:+.4g}j"
how = "divider formula"
""")
    [result] = run_cases([load_case(path)], engine="own")
    by_q = {c.quantity: c for c in result.expectations}
    assert by_q["vth"].verdict == "pass"
    assert by_q["zth"].verdict == "fail"
    assert by_q["zth"].mag_err_pct == pytest.approx(5.0, abs=0.01)  # 4 significant figures printed
    assert result.verdict == "fail"
    assert result.explanation == by_q["zth"].explanation


def test_options_parse_to_expectations():
    """--expect QTY=VALUE applies at the only frequency; QTY@F=VALUE names one of several."""
    [single] = expectations_from_options(["vth=57.34∠-55°", "zth=4.7 - j6.7"], [100.0], HAND_CALCULATION)
    assert single.at_hz == 100.0
    assert abs(single.values["zth"] - (4.7 - 6.7j)) < 1e-12
    several = expectations_from_options(["vth@1k=1@0", "series_r@50=3.3k"], [50.0, 1e3], HAND_CALCULATION)
    assert {e.at_hz for e in several} == {50.0, 1e3}
    assert next(e for e in several if e.at_hz == 50.0).values["series_r"] == 3300 + 0j


@pytest.mark.parametrize("texts, freqs, words", [
    (["vth=1"], [50.0, 60.0], "@FREQ"),
    (["vth"], [50.0], "no value"),
    (["power=1"], [50.0], "unknown quantity"),
    (["vth=abc"], [50.0], "cannot read"),
    (["vth=1", "vth=2"], [50.0], "already stated"),
])
def test_bad_options_are_refused(texts, freqs, words):
    """A malformed --expect is refused with the accepted form."""
    with pytest.raises(ExpectOptionError, match=words):
        expectations_from_options(texts, freqs, HAND_CALCULATION)


# --------------------------------------------------------------------------- command line


W6 = """W6 exam-style network with a VCCS
V1 s 0 AC 100
R20 s a 20
C10 a 0 {1/10}
G1 0 a s a 0.02
.end
"""


@pytest.fixture
def w6(tmp_path):
    path = tmp_path / "w6.cir"
    path.write_text(W6)
    return path


def test_cli_expect_pass(w6, capsys):
    """published (byjus.com, GATE-style): V_th = 57.34∠−55° V, Z_th = 4.7 − j6.7 Ω pass; exit code 0."""
    code = main(["reduce", str(w6), "--port", "a", "0", "--freq", repr(F_UNIT), "--engine", "own",
                 "--expect", "vth=57.34∠-55°", "--expect", "zth=4.7 - j6.7"])
    out = capsys.readouterr().out
    assert code == EXIT_OK
    assert "hand calculations" in out and "fail" not in out


def test_cli_expect_fail_names_the_slip(w6, capsys):
    """W6's wrong answer with the dependent source zeroed (computed by this project) fails with exit code 1 and
    the slip named."""
    code = main(["reduce", str(w6), "--port", "a", "0", "--freq", repr(F_UNIT), "--engine", "own",
                 "--expect", "vth=44.72∠-63.43°", "--expect", "zth=4-8j"])
    out = " ".join(capsys.readouterr().out.split())
    assert code == EXIT_FAIL
    assert "dependent sources zeroed" in out
    assert "-22 %" in out and "dB" in out


def test_cli_expect_json(w6, capsys):
    """JSON carries an "expectations" list with the verdict and the slip of each stated value."""
    code = main(["reduce", str(w6), "--port", "a", "0", "--freq", repr(F_UNIT), "--engine", "own",
                 "--format", "json", "--expect", "vth=57.34@-55", "--expect", "zth=4-8j"])
    doc = json.loads(capsys.readouterr().out)
    assert code == EXIT_FAIL
    by_q = {e["quantity"]: e for e in doc["expectations"]}
    assert by_q["vth"]["verdict"] == "pass" and by_q["vth"]["slip"] is None
    assert by_q["zth"]["verdict"] == "fail" and by_q["zth"]["slip"] == "dependent sources zeroed"
    assert by_q["zth"]["obtained"]["re"] == pytest.approx(4.698, abs=5e-4)  # published 4.7 (recomputed 4.698)
    assert doc["verdict"] == "fail"


def test_cli_expect_at_one_of_several_frequencies(w6, capsys):
    """With several --freq an --expect must name its frequency; a tolerance can be loosened."""
    code = main(["reduce", str(w6), "--port", "a", "0", "--freq", "1", repr(F_UNIT), "--engine", "own",
                 "--expect", f"vth@{F_UNIT!r}=57@-55", "--expect-rel", "0.02", "--expect-phase", "1"])
    capsys.readouterr()
    assert code == EXIT_OK
    assert main(["reduce", str(w6), "--port", "a", "0", "--freq", "1", "2", "--engine", "own",
                 "--expect", "vth=57@-55"]) == EXIT_USAGE
    assert "@FREQ" in capsys.readouterr().err
