"""Outside checks of the spread analysis: values known without crosscheck, each with its source beside it."""

from __future__ import annotations

import math

import pytest

from crosscheck.model.netlist import read_netlist
from crosscheck.model.network import Port
from crosscheck.model.vary import SpreadSpec, Vary, parse_vary_option, resolve
from crosscheck.own.equivalent import thevenin
from crosscheck.own.spread import own_spread


def _point(netlist: str, port: Port, freq: float, varies: list[Vary] | list[str], samples: int = 0):
    network = read_netlist(netlist)
    stated = [parse_vary_option(v) if isinstance(v, str) else v for v in varies]
    parts = resolve(network, stated)
    return own_spread(network, port, [freq], parts, SpreadSpec(tuple(stated), samples=samples, seed=5)).points[0]


def test_divider_worst_case_closed_form():
    """common practice: the worst case of a divider Vout = Vin·R2/(R1 + R2).

    Vout rises with R2 and falls with R1 (dVout/dR2 = Vin·R1/(R1+R2)² > 0, dVout/dR1 = −Vin·R2/(R1+R2)² < 0), so
        Vmax = Vin·R2(1+t2) / (R1(1−t1) + R2(1+t2)),   Vmin = Vin·R2(1−t2) / (R1(1+t1) + R2(1−t2)).
    Its source resistance R1·R2/(R1+R2) rises with both, so it is largest with both high, smallest with both low.
    """
    vin, r1, r2, t1, t2 = 12.0, 6.8e3, 3.3e3, 0.01, 0.05
    point = _point(f"div\nV1 in 0 DC {vin} AC {vin}\nR1 in out 6.8k\nR2 out 0 3.3k\n", Port("out", "0"), 0.0,
                   ["R1=1%", "R2=5%"])  # fmt: skip
    v = point.vth.worst_case["abs"]  # type: ignore[union-attr]
    assert v.maximum == pytest.approx(vin * r2 * (1 + t2) / (r1 * (1 - t1) + r2 * (1 + t2)), rel=1e-13)
    assert v.minimum == pytest.approx(vin * r2 * (1 - t2) / (r1 * (1 + t1) + r2 * (1 - t2)), rel=1e-13)
    assert v.max_corner == {
        "r1": pytest.approx(r1 * (1 - t1), rel=1e-15),
        "r2": pytest.approx(r2 * (1 + t2), rel=1e-15),
    }
    assert v.max_method == "first-order corner"

    def parallel(a: float, b: float) -> float:
        return a * b / (a + b)

    z = point.zth.worst_case["re"]  # type: ignore[union-attr]
    assert z.maximum == pytest.approx(parallel(r1 * (1 + t1), r2 * (1 + t2)), rel=1e-13)
    assert z.minimum == pytest.approx(parallel(r1 * (1 - t1), r2 * (1 - t2)), rel=1e-13)


def test_parallel_pair_worst_case_closed_form():
    """common practice: R = R1·R2/(R1 + R2) rises with each resistor (∂R/∂R1 = R2²/(R1+R2)² > 0), so with
    tolerances t the extremes are the all-low and all-high corners; fed by an ideal current source I,
    V_th = I·R. Equal tolerances scale R by exactly (1 ± t)."""
    r1, r2, t, amps = 220.0, 330.0, 0.02, 1e-3
    nominal = r1 * r2 / (r1 + r2)
    point = _point("pair\nI1 0 p DC 1m AC 1m\nR1 p 0 220\nR2 p 0 330\n", Port("p", "0"), 0.0, ["R*=2%"])
    z = point.zth.worst_case["abs"]  # type: ignore[union-attr]
    assert z.maximum == pytest.approx(nominal * (1 + t), rel=1e-13)
    assert z.minimum == pytest.approx(nominal * (1 - t), rel=1e-13)
    v = point.vth.worst_case["abs"]  # type: ignore[union-attr]
    assert v.maximum == pytest.approx(amps * nominal * (1 + t), rel=1e-13)
    # each resistor's share of the normalised sensitivity: S_R1 = R2/(R1+R2), S_R2 = R1/(R1+R2)
    s = point.zth.sensitivities  # type: ignore[union-attr]
    assert s["r1"][0] == pytest.approx(r2 / (r1 + r2), rel=1e-10)
    assert s["r2"][0] == pytest.approx(r1 / (r1 + r2), rel=1e-10)


@pytest.mark.parametrize("freq_ratio", [0.3, 1.0, 3.0])
def test_rc_corner_frequency_sensitivity_is_minus_one(freq_ratio):
    """common practice: f_c = 1/(2πRC), so its normalised sensitivity to R and to C is −1.

    |H| of the low-pass depends on f/f_c only, so S(|H|, R) = S(|H|, f_c)·S(f_c, R) = −S(|H|, f)·S(f_c, R):
    S(f_c, R) = −S(|H|, R) / S(|H|, f), with S(|H|, f) taken here from the solver by a central difference
    in frequency (relative step 1e-6). At f = f_c the phase moves by −0.5 rad per unit log R:
    −0.5·180/π/100 = −0.2865 degrees per %.
    """
    r, c = 4.7e3, 33e-9
    fc = 1 / (2 * math.pi * r * c)
    netlist = "rc\nV1 in 0 AC 1\nR1 in out 4.7k\nC1 out 0 33n\n"
    f = freq_ratio * fc
    point = _point(netlist, Port("out", "0"), f, ["R1=1%", "C1=1%"])
    network = read_netlist(netlist)
    h = 1e-6
    up, down = (abs(thevenin(network, Port("out", "0"), [f * (1 + s * h)])[0].vth) for s in (1, -1))  # type: ignore[arg-type]
    slope_in_f = (math.log(up) - math.log(down)) / (math.log(1 + h) - math.log(1 - h))
    s = point.vth.sensitivities  # type: ignore[union-attr]
    assert -s["r1"][0] / slope_in_f == pytest.approx(-1.0, abs=1e-6)
    assert -s["c1"][0] / slope_in_f == pytest.approx(-1.0, abs=1e-6)
    if freq_ratio == 1.0:
        assert s["r1"][1] == pytest.approx(-0.5 * 180 / math.pi / 100, rel=1e-9)


def test_iec_60909_voltage_factor_gives_maximum_and_minimum_fault_current():
    """from memory: IEC 60909-0 takes the equivalent source c·U_n/√3 with the voltage factor c_max = 1.10 for
    the maximum and c_min = 1.00 for the minimum short-circuit current in medium- and high-voltage systems;
    I_k'' = c·U_n / (√3·|Z_k|). Only the voltage factor is checked here (the standard also changes impedances
    for the minimum current). Our own scenario: a 20 kV feeder with Z_k = 0.4 + j2.5 Ω, the source stated as
    1.05·U_n/√3 ± 0.05·U_n/√3, so that its two ends are c = 1.00 and c = 1.10 exactly."""
    un = 20e3
    phase = un / math.sqrt(3)
    zk = complex(0.4, 2.5)
    netlist = (
        f"feeder\nVS src 0 AC {1.05 * phase!r}\nRK src m 0.4\nLK m fault {2.5 / (2 * math.pi * 50)!r}\n"
        "RLOAD fault 0 1e9\n"
    )
    absolute = Vary(("vs",), None, 0.05 * phase, "uniform", None, "IEC 60909-0 voltage factor, c from 1.00 to 1.10")
    point = _point(netlist, Port("fault", "0"), 50.0, [absolute])
    i_n = point.in_.worst_case["abs"]  # type: ignore[union-attr]
    c_max, c_min = 1.10, 1.00
    # RLOAD (1 GΩ) in parallel with the fault changes I_N by nothing (it is a Norton current: the port shorted)
    assert i_n.maximum == pytest.approx(c_max * un / (math.sqrt(3) * abs(zk)), rel=1e-12)
    assert i_n.minimum == pytest.approx(c_min * un / (math.sqrt(3) * abs(zk)), rel=1e-12)
    assert i_n.max_corner["vs"] == pytest.approx(c_max * phase, rel=1e-15)
