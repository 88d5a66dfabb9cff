"""Each usual hand-calculation slip, made for real on a small network, is named from the number it gives.

Every wrong hand value below is worked the way a person would work it, with the slip, by complex
arithmetic on the element values (never by crosscheck's solver), and only then handed to crosscheck.
The diagnosis must name that slip; a wrong value no slip explains must name none.
"""

from __future__ import annotations

import cmath
import math
from dataclasses import replace

import numpy as np
import pytest

from crosscheck.model.cases import Expectation
from crosscheck.run.check import case_from_netlist, run_cases
from crosscheck.own.equivalent import thevenin
from crosscheck.judge.stated import deviation
from crosscheck.model.netlist import read_netlist
from crosscheck.model.network import Port
from crosscheck.judge.slips import capacitors_conjugated, dependent_sources_zeroed, diagnose
from crosscheck.model.tolerance import HAND_CALCULATION

F = 1e3
R1, C1, L1, R2 = 100.0, 1e-6, 10e-3, 150.0

#: A reactive ladder with both kinds of reactance: s –R1– m, C1 from m to ground, m –L1– a, R2 from a to
#: ground; port a–0. The source phase is a parameter so a test can put V_th in the quadrant it needs.
LADDER = """reactive ladder
V1 s 0 AC {mag} {phase}
R1 s m 100
C1 m 0 1u
L1 m a 10m
R2 a 0 150
.end
"""


def _par(a: complex, b: complex) -> complex:
    return a * b / (a + b)


def ladder_by_hand(omega: float, source: complex, cap_sign: float = -1.0) -> tuple[complex, complex]:
    """V_th and Z_th of the ladder by series/parallel reduction; ``cap_sign = +1`` makes the capacitive slip."""
    zc = cap_sign * 1j / (omega * C1)
    zl = 1j * omega * L1
    zp = _par(zc, zl + R2)
    vm = source * zp / (R1 + zp)
    vth = vm * R2 / (zl + R2)
    zth = _par(R2, zl + _par(R1, zc))
    return vth, zth


def _source(mag: float, phase_deg: float) -> complex:
    return cmath.rect(mag, math.radians(phase_deg))


def _diagnosed(netlist: str, port: tuple[str, str], freq: float, stated: dict[str, complex],
               sources: str = "peak") -> dict:
    case = case_from_netlist("hand.cir", netlist, port, [freq], sources=sources)
    case = replace(case, expectations=(Expectation(freq, stated, HAND_CALCULATION, "worked by hand", 1),))
    [result] = run_cases([case], engine="own")
    assert result.error is None
    return {c.quantity: c for c in result.expectations}


def _polar_text(z: complex, angle_deg: float) -> complex:
    """What a person writes down: magnitude and angle to 4 significant figures, read back as a phasor."""
    return cmath.rect(float(f"{abs(z):.4g}"), math.radians(float(f"{angle_deg:.4g}")))


def _assert_named(check, name: str) -> None:
    assert check.verdict == "fail", f"the slipped value should fail: {check.explanation}"
    assert check.slip == name, f"named {check.slip!r}, expected {name!r}: {check.explanation}"
    assert name in check.explanation


def test_hand_reduction_agrees_with_the_solver_when_done_right():
    """The hand formulas are right when no slip is made (so the slips below are the only difference)."""
    vth, zth = ladder_by_hand(2 * math.pi * F, _source(10, 30))
    checks = _diagnosed(LADDER.format(mag=10, phase=30), ("a", "0"), F, {"vth": vth, "zth": zth})
    assert checks["vth"].rel_err < 1e-12 and checks["zth"].rel_err < 1e-12, "hand vs solver (tolerance 1e-12)"


def test_f_used_for_omega():
    """Reactances worked with ω = f (X_L = f·L, X_C = 1/(fC))."""
    vth, zth = ladder_by_hand(F, _source(10, 30))
    checks = _diagnosed(LADDER.format(mag=10, phase=30), ("a", "0"), F, {"vth": vth, "zth": zth})
    _assert_named(checks["vth"], "f used for ω")
    _assert_named(checks["zth"], "f used for ω")


def test_two_pi_applied_twice():
    """ω = 2π·(2πf): a frequency already in rad/s multiplied by 2π again."""
    _, zth = ladder_by_hand(2 * math.pi * 2 * math.pi * F, _source(10, 30))
    checks = _diagnosed(LADDER.format(mag=10, phase=30), ("a", "0"), F, {"zth": zth})
    _assert_named(checks["zth"], "2π applied twice")


def test_capacitive_reactance_sign():
    """Z_C written as +j/(ωC)."""
    vth, zth = ladder_by_hand(2 * math.pi * F, _source(10, 30), cap_sign=+1.0)
    checks = _diagnosed(LADDER.format(mag=10, phase=30), ("a", "0"), F, {"vth": vth, "zth": zth})
    _assert_named(checks["vth"], "capacitive reactance sign")
    _assert_named(checks["zth"], "capacitive reactance sign")


def test_degrees_read_as_radians():
    """The angle from atan2 (radians) written down with a degree sign."""
    vth, _ = ladder_by_hand(2 * math.pi * F, _source(10, 150))
    stated = _polar_text(vth, math.atan2(vth.imag, vth.real))  # radians, written as if degrees
    checks = _diagnosed(LADDER.format(mag=10, phase=150), ("a", "0"), F, {"vth": stated})
    _assert_named(checks["vth"], "degrees read as radians")


def test_degrees_read_as_radians_on_an_unwrapped_angle():
    """The angle carried unwrapped (e.g. 200° rather than −160°), then written in radians as degrees."""
    vth, _ = ladder_by_hand(2 * math.pi * F, _source(10, 230))
    unwrapped = math.atan2(vth.imag, vth.real) % (2 * math.pi)  # 0..2π, as a hand working might carry it
    assert unwrapped > math.pi, "the test needs an angle past 180°"
    checks = _diagnosed(LADDER.format(mag=10, phase=230), ("a", "0"), F, {"vth": _polar_text(vth, unwrapped)})
    _assert_named(checks["vth"], "degrees read as radians")
    assert "unwrapped" in checks["vth"].explanation


def test_atan_for_atan2():
    """atan(im/re) on a V_th with a negative real part: 180° off."""
    vth, _ = ladder_by_hand(2 * math.pi * F, _source(10, 150))
    assert vth.real < 0, "the test needs a negative real part"
    stated = _polar_text(vth, math.degrees(math.atan(vth.imag / vth.real)))
    checks = _diagnosed(LADDER.format(mag=10, phase=150), ("a", "0"), F, {"vth": stated})
    _assert_named(checks["vth"], "angle off by 180° (atan for atan2)")
    assert "port polarity reversed" in checks["vth"].explanation, "the equal-valued alternative is mentioned"


def test_port_polarity_reversed():
    """V_th read as V(b) − V(a) (here 0 − V(a)); Z_th taken the same way is unchanged and passes."""
    vth, zth = ladder_by_hand(2 * math.pi * F, _source(10, 30))
    assert vth.real > 0, "with a positive real part the atan slip cannot explain it"
    checks = _diagnosed(LADDER.format(mag=10, phase=30), ("a", "0"), F, {"vth": 0 - vth, "zth": zth})
    _assert_named(checks["vth"], "port polarity reversed")
    assert checks["zth"].verdict == "pass"


def test_conjugate_taken():
    """Y_N = 1/Z_th worked as Z_th/|Z_th|² (the conjugate of the right admittance)."""
    _, zth = ladder_by_hand(2 * math.pi * F, _source(10, 30))
    checks = _diagnosed(LADDER.format(mag=10, phase=30), ("a", "0"), F, {"yn": zth / abs(zth) ** 2})
    _assert_named(checks["yn"], "conjugate taken")


@pytest.mark.parametrize("sources, factor", [("rms", math.sqrt(2)), ("peak", 1 / math.sqrt(2))])
def test_rms_vs_peak(sources, factor):
    """The source taken as peak where the case says RMS (×√2), or turned to RMS where the case says peak (÷√2)."""
    vth, _ = ladder_by_hand(2 * math.pi * F, _source(10 * factor, 30))
    checks = _diagnosed(LADDER.format(mag=10, phase=30), ("a", "0"), F, {"vth": vth}, sources=sources)
    _assert_named(checks["vth"], "RMS vs peak")
    assert sources.upper() in checks["vth"].explanation.upper()


def test_sources_not_zeroed():
    """Z_th read as V(a)/1 A with a 1 A test current but the source still on: nodal analysis by hand."""
    w = 2 * math.pi * F
    vs = _source(10, 30)
    yc, yl = 1j * w * C1, 1 / (1j * w * L1)
    # Nodes m and a: KCL with the source on and 1 A driven into a.
    y = np.array([[1 / R1 + yc + yl, -yl], [-yl, yl + 1 / R2]])
    vm, va = np.linalg.solve(y, np.array([vs / R1, 1.0]))
    checks = _diagnosed(LADDER.format(mag=10, phase=30), ("a", "0"), F, {"zth": complex(va) / 1.0})
    _assert_named(checks["zth"], "sources not zeroed")


def test_sources_zeroed_the_wrong_way():
    """The voltage source opened instead of shorted: R1 hangs loose, Z_th = R2 ∥ (Z_L + Z_C)."""
    w = 2 * math.pi * F
    zth = _par(R2, 1j * w * L1 + 1 / (1j * w * C1))
    checks = _diagnosed(LADDER.format(mag=10, phase=30), ("a", "0"), F, {"zth": zth})
    _assert_named(checks["zth"], "sources zeroed the wrong way")


W6 = """W6 exam-style network with a VCCS
V1 s 0 AC 100
R20 s a 20
C10 a 0 {1/10}
G1 0 a s a 0.02
.end
"""


def test_dependent_sources_zeroed_w6_slip():
    """Zeroing the VCCS of the published W6 problem (byjus.com, GATE-style) gives 4 − j8 Ω and 44.72∠−63.43° V:
    the slip's answer, computed by this project (not read in the source) and stated to 4 significant figures."""
    stated = {"vth": cmath.rect(44.72, math.radians(-63.43)), "zth": 4 - 8j}
    checks = _diagnosed(W6, ("a", "0"), 1 / (2 * math.pi), stated)
    _assert_named(checks["vth"], "dependent sources zeroed")
    _assert_named(checks["zth"], "dependent sources zeroed")


def test_dependent_sources_zeroed_worked_by_hand():
    """The same slip worked here: with the VCCS removed, a is a divider of 20 Ω and −j10 Ω."""
    zc = -10j
    stated = {"vth": 100 * zc / (20 + zc), "zth": _par(20, zc)}
    checks = _diagnosed(W6, ("a", "0"), 1 / (2 * math.pi), stated)
    _assert_named(checks["vth"], "dependent sources zeroed")
    _assert_named(checks["zth"], "dependent sources zeroed")


def test_a_wrong_value_no_slip_explains_names_none():
    """5 % off in magnitude and 3° in phase is no usual slip: none is named."""
    vth, zth = ladder_by_hand(2 * math.pi * F, _source(10, 30))
    off = 1.05 * cmath.exp(1j * math.radians(3))
    checks = _diagnosed(LADDER.format(mag=10, phase=30), ("a", "0"), F, {"vth": vth * off, "zth": zth * off})
    for q in ("vth", "zth"):
        assert checks[q].verdict == "fail" and checks[q].slip is None
        assert "None of the usual slips" in checks[q].explanation


def test_a_slip_that_changes_nothing_is_never_named():
    """Without capacitors the capacitive-sign slip gives the right value, so it cannot explain a wrong one."""
    text = "rl\nV1 s 0 AC 1\nR1 s a 10\nL1 a 0 1m\n.end\n"
    network = read_netlist(text)
    port = Port("a", "0")
    [eq] = thevenin(network, port, [F])
    assert capacitors_conjugated(network, F) is None
    assert dependent_sources_zeroed(network) is None
    assert diagnose(network, port, "vth", eq.vth * 1.03, eq, HAND_CALCULATION) is None
    # A conjugated V_th here can only be "conjugate taken": there is no capacitor to have flipped.
    slip = diagnose(network, port, "vth", eq.vth.conjugate(), eq, HAND_CALCULATION)
    assert slip is not None and slip.name == "conjugate taken" and slip.also == ()


def test_diagnosis_matches_within_the_expectation_tolerance_only():
    """A slipped value rounded beyond the tolerance (here 3 % off the slip's own value) is not attributed."""
    vth, _ = ladder_by_hand(F, _source(10, 30))  # f used for ω
    network = read_netlist(LADDER.format(mag=10, phase=30))
    port = Port("a", "0")
    [eq] = thevenin(network, port, [F])
    exact = diagnose(network, port, "vth", vth, eq, HAND_CALCULATION)
    assert exact is not None and exact.name == "f used for ω"
    assert deviation(vth, exact.value, HAND_CALCULATION).rel_err < 1e-12, "slip value vs hand (tolerance 1e-12)"
    assert diagnose(network, port, "vth", vth * 1.03, eq, HAND_CALCULATION) is None


def test_f_used_for_omega_in_a_series_form():
    """R ∥ C drawn as series R + C, worked throughout with ω = f (also when turning X into C)."""
    text = "rc\nV1 s 0 AC 1\nR1 s a 1k\nR2 a 0 1k\nC1 a 0 1u\n.end\n"
    w = F  # the slip
    z = _par(500.0, 1 / (1j * w * 1e-6))  # R1 ∥ R2 = 500 Ω, then ∥ C
    checks = _diagnosed(text, ("a", "0"), F, {"series_r": complex(z.real), "series_c": complex(-1 / (w * z.imag))})
    _assert_named(checks["series_r"], "f used for ω")
    _assert_named(checks["series_c"], "f used for ω")


# --------------------------------------------------------------------------- the Norton quantities
#: Each hand value of I_N = V_th/Z_th and Y_N = 1/Z_th below is worked from the slipped hand V_th and Z_th
#: (complex arithmetic on the element values, as above), so a slip that applies to the Norton form must be
#: named for it too: a stated RMS fault current or a Norton admittance carries the same slips.


def _norton_by_hand(omega: float, phase: float, factor: float = 1.0, cap_sign: float = -1.0) -> tuple[complex, complex]:
    vth, zth = ladder_by_hand(omega, _source(10 * factor, phase), cap_sign)
    return vth / zth, 1 / zth


def test_norton_slips_in_the_working_are_named_for_in_and_yn():
    """f for ω and the capacitor's sign, made in the working, are named on I_N and on Y_N alike."""
    w = 2 * math.pi * F
    netlist = LADDER.format(mag=10, phase=30)
    for omega, cap_sign, name in ((F, -1.0, "f used for ω"), (w, +1.0, "capacitive reactance sign")):
        i_n, y_n = _norton_by_hand(omega, 30, cap_sign=cap_sign)
        checks = _diagnosed(netlist, ("a", "0"), F, {"in": i_n, "yn": y_n})
        _assert_named(checks["in"], name)
        _assert_named(checks["yn"], name)


def test_two_pi_twice_and_sources_zeroed_the_wrong_way_on_yn():
    """Y_N worked as 1/Z_th from a Z_th with 2π applied twice, or with the source opened, names the slip."""
    w = 2 * math.pi * F
    netlist = LADDER.format(mag=10, phase=30)
    _, y_twice = _norton_by_hand(2 * math.pi * w, 30)
    _assert_named(_diagnosed(netlist, ("a", "0"), F, {"yn": y_twice})["yn"], "2π applied twice")
    y_wrong = 1 / _par(R2, 1j * w * L1 + 1 / (1j * w * C1))
    _assert_named(_diagnosed(netlist, ("a", "0"), F, {"yn": y_wrong})["yn"], "sources zeroed the wrong way")


@pytest.mark.parametrize("sources, factor", [("rms", math.sqrt(2)), ("peak", 1 / math.sqrt(2))])
def test_rms_vs_peak_on_the_norton_current(sources, factor):
    """A fault current stated as I_N with the source's RMS and peak confused is named RMS vs peak."""
    i_n, _ = _norton_by_hand(2 * math.pi * F, 30, factor=factor)
    checks = _diagnosed(LADDER.format(mag=10, phase=30), ("a", "0"), F, {"in": i_n}, sources=sources)
    _assert_named(checks["in"], "RMS vs peak")


def test_angle_slips_on_the_norton_current():
    """I_N's angle in radians written as degrees, atan for atan2, and the port reversed are each named."""
    w = 2 * math.pi * F
    i_n, _ = _norton_by_hand(w, 150)
    assert i_n.real < 0, "the atan slip needs a negative real part (I_N at 103.9° here)"
    netlist = LADDER.format(mag=10, phase=150)
    radians = _polar_text(i_n, math.atan2(i_n.imag, i_n.real))
    _assert_named(_diagnosed(netlist, ("a", "0"), F, {"in": radians})["in"], "degrees read as radians")
    atan = _polar_text(i_n, math.degrees(math.atan(i_n.imag / i_n.real)))
    _assert_named(_diagnosed(netlist, ("a", "0"), F, {"in": atan})["in"], "angle off by 180° (atan for atan2)")
    i_30, _ = _norton_by_hand(w, 30)
    assert i_30.real > 0, "with a positive real part only the port's polarity explains −I_N"
    reversed_port = _diagnosed(LADDER.format(mag=10, phase=30), ("a", "0"), F, {"in": -i_30})["in"]
    _assert_named(reversed_port, "port polarity reversed")
