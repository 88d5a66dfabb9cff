"""Design limits over bands: pass with margin, fail with the worst point and how far out, unavailable with why."""

from __future__ import annotations

import cmath
import math
from dataclasses import replace

import pytest

from crosscheck.model.cases import Limit, load_case
from crosscheck.run.check import case_from_netlist, run_cases
from crosscheck.own.equivalent import thevenin
from crosscheck.judge.limits import check_limit, evaluate
from crosscheck.model.netlist import read_netlist
from crosscheck.model.network import Port

# RC low-pass: V_th = 1/(1 + jωRC), Z_th = R/(1 + jωRC), R = 1 kΩ, C = 1 µF
# (published: D. H. Johnson, OpenStax CNX m0030, exact at every frequency).
RC = "rc\nV1 in 0 AC 1\nR1 in out 1k\nC1 out 0 1u\n.end\n"
FREQS = [10.0, 100.0, 1e3, 1e4]


def _d(f: float) -> complex:
    return 1 + 1j * 2 * math.pi * f * 1e3 * 1e-6


def zth(f: float) -> complex:
    return 1e3 / _d(f)


def vth(f: float) -> complex:
    return 1 / _d(f)


@pytest.fixture(scope="module")
def own():
    return thevenin(read_netlist(RC), Port("out", "0"), FREQS)


def _limit(text: str, function: str, quantity: str, lo=None, hi=None, band=None) -> Limit:
    return Limit(function, quantity, lo, hi, band, text, 1)


def test_pass_reports_worst_point_and_margin(own):
    """|Z_th| <= 1.1 kΩ over 10 Hz–10 kHz: met, tightest at 10 Hz with 1100 − |Z_th(10 Hz)| left."""
    check = check_limit(_limit("abs(zth)", "abs", "zth", hi=1100.0, band=(10.0, 1e4)), own)
    assert check.verdict == "pass"
    assert check.worst_freq_hz == 10.0
    assert check.worst_value == pytest.approx(abs(zth(10.0)), rel=1e-12)
    assert check.margin == pytest.approx(1100.0 - abs(zth(10.0)), rel=1e-12)
    assert [f for f, _ in check.values] == FREQS


def test_fail_reports_how_far_outside(own):
    """|Z_th| <= 900 Ω fails at 10 Hz only (|Z_th(100 Hz)| = 846.7 Ω); 10 Hz is 98.0 Ω outside."""
    check = check_limit(_limit("abs(zth)", "abs", "zth", hi=900.0, band=(10.0, 1e4)), own)
    assert check.verdict == "fail"
    assert check.worst_freq_hz == 10.0
    assert check.margin == pytest.approx(900.0 - abs(zth(10.0)), rel=1e-12)
    assert check.margin < 0
    assert "1 of 4" in check.explanation


def test_band_restricts_the_points(own):
    """The same limit over 1 kHz–10 kHz only looks at those two points and passes."""
    check = check_limit(_limit("abs(zth)", "abs", "zth", hi=900.0, band=(1e3, 1e4)), own)
    assert check.verdict == "pass"
    assert [f for f, _ in check.values] == [1e3, 1e4]
    assert check.worst_freq_hz == 1e3


def test_phase_in_degrees_and_minimum_bound(own):
    """phase(vth) >= −80°: at 1 kHz it is −atan(2π) = −80.96°, 0.96° outside."""
    check = check_limit(_limit("phase(vth)", "phase", "vth", lo=-80.0, band=(10.0, 1e3)), own)
    expected = -math.degrees(math.atan(2 * math.pi))
    assert check.verdict == "fail"
    assert check.worst_freq_hz == 1e3
    assert check.worst_value == pytest.approx(expected, abs=1e-9)
    assert check.margin == pytest.approx(expected + 80.0, abs=1e-9)


def test_db_both_bounds(own):
    """−20 dB <= db(vth) <= 0 dB holds to 1 kHz (−16.1 dB) and fails at 10 kHz (−36.0 dB); the tightest
    point inside is 10 Hz, only 0.017 dB below the 0 dB bound."""
    inside = check_limit(_limit("db(vth)", "db", "vth", lo=-20.0, hi=0.0, band=(10.0, 1e3)), own)
    outside = check_limit(_limit("db(vth)", "db", "vth", lo=-20.0, hi=0.0, band=(10.0, 1e4)), own)
    assert inside.verdict == "pass"
    assert inside.worst_freq_hz == 10.0
    assert inside.margin == pytest.approx(-20 * math.log10(abs(vth(10.0))), abs=1e-12)
    assert dict(inside.values)[1e3] == pytest.approx(20 * math.log10(abs(vth(1e3))), abs=1e-12)
    assert outside.verdict == "fail" and outside.worst_freq_hz == 1e4
    assert outside.margin == pytest.approx(20 * math.log10(abs(vth(1e4))) + 20.0, abs=1e-12)


def test_real_and_imaginary_parts(own):
    """re(zth) and im(zth) in ohms: im(zth) >= −400 Ω fails where the RC is most reactive (100 Hz)."""
    check = check_limit(_limit("im(zth)", "im", "zth", lo=-400.0), own)
    assert check.verdict == "fail"
    assert check.worst_freq_hz == 100.0
    assert check.worst_value == pytest.approx(zth(100.0).imag, rel=1e-12)
    re_check = check_limit(_limit("re(zth)", "re", "zth", lo=0.0), own)
    assert re_check.verdict == "pass"
    assert re_check.worst_value == pytest.approx(zth(1e4).real, rel=1e-12)


def test_band_without_computed_frequency_is_unavailable(own):
    """A band the case never computes cannot be judged; the reason says to add frequencies."""
    check = check_limit(_limit("abs(zth)", "abs", "zth", hi=1.0, band=(2e4, 5e4)), own)
    assert check.verdict == "unavailable"
    assert check.worst_freq_hz is None and check.margin is None
    assert "no computed frequency" in check.explanation


def test_reversed_band_is_unavailable_with_reason(own):
    check = check_limit(_limit("abs(zth)", "abs", "zth", hi=1.0, band=(1e4, 10.0)), own)
    assert check.verdict == "unavailable"
    assert "low edge" in check.explanation


def test_quantity_that_does_not_exist_is_unavailable():
    """I_N of an ideal voltage source at the port does not exist: the limit cannot be judged."""
    own = thevenin(read_netlist("v\nV1 a 0 AC 1\nR1 a 0 1k\n.end\n"), Port("a", "0"), [50.0])
    check = check_limit(_limit("abs(in)", "abs", "in", hi=1.0), own)
    assert check.verdict == "unavailable"
    assert "Norton" in check.explanation


def test_evaluate_functions():
    z = cmath.rect(2.0, math.radians(-120.0))
    assert evaluate("abs", z) == pytest.approx(2.0, rel=1e-15)
    assert evaluate("phase", z) == pytest.approx(-120.0, abs=1e-12)
    assert evaluate("db", z) == pytest.approx(20 * math.log10(2.0), abs=1e-12)
    assert evaluate("re", z) == pytest.approx(-1.0, abs=1e-12)
    assert evaluate("phase", -1 + 0j) == 180.0


def test_case_file_limit_fails_the_case(tmp_path):
    """[[limit]] in a case file reaches the case verdict; a passing limit leaves it alone."""
    (tmp_path / "rc.cir").write_text(RC)
    path = tmp_path / "rc.toml"
    path.write_text("""
netlist = "rc.cir"
port = ["out", "0"]
sweep = { start = "10", stop = "10k", per_decade = 1 }
[[limit]]
quantity = "abs(zth)"
max = "1.1k"
[[limit]]
quantity = "abs(zth)"
max = "900"
band = ["10", "100"]
""")
    [result] = run_cases([load_case(path)], engine="own")
    assert [lim.verdict for lim in result.limits] == ["pass", "fail"]
    assert result.verdict == "fail"
    passing = replace(load_case(path), limits=load_case(path).limits[:1])
    [ok] = run_cases([passing], engine="own")
    assert ok.verdict == "pass"


def test_bare_netlist_case_has_no_limits():
    """A netlist named on the command line has no limits: nothing is judged, nothing invented."""
    case = case_from_netlist("rc.cir", RC, ("out", "0"), [1e3])
    [result] = run_cases([case], engine="own")
    assert result.limits == () and result.verdict == "pass"
