"""Outside checks of the multi-port route: closed forms an engineer knows, each with its source beside it.

Each network is written here as a netlist and reduced by the own multi-port route (``own.multiport``); the
matrices are held against formulas evaluated in plain numpy, independently of the solver. Sources:

* resistive T and Pi networks: their open-circuit impedance matrices (common practice);
* a voltage amplifier's two-port model: its Z matrix, derived by this project (recomputed by this project).
  A published worked example of a two-port's open-circuit parameters, with its circuit stated in text and
  its numbers printed, was looked for and not found (the examples found show the circuit only in a figure),
  so nothing here is called published;
* a balanced three-phase line: the sequence impedances Z1 = Z2 = Zs - Zm, Z0 = Zs + 2 Zm from the
  Fortescue transform of Z (common practice);
* matched T and Pi attenuators of A dB in z0: S11 = S22 = 0, S21 = S12 = 10^(-A/20) (common practice;
  the arm formulas too).

Tolerances: the networks are small and well conditioned, so the route's answers agree with the closed forms
to rounding; 1e-9 relative (of the matrix's largest entry) leaves room for the solver's refinement stopping
early and still fails on any wrong stamp, sign or port order.
"""

from __future__ import annotations

import cmath
import math

import numpy as np
import pytest

from crosscheck.model.netlist import read_netlist
from crosscheck.model.network import Port
from crosscheck.own.multiport import reduce_ports
from crosscheck.report.touchstone import s_from_z

RTOL = 1e-9


def _z(netlist: str, ports: list[tuple[str, str]], f_hz: float) -> np.ndarray:
    network = read_netlist(netlist, file="outside-check")
    (point,) = reduce_ports(network, [Port(a, b) for a, b in ports], [f_hz])
    assert point.z is not None, f"no Thevenin form: {point.notes}"
    return point.z


def _close(got: np.ndarray, expected: np.ndarray, what: str) -> None:
    err = np.max(np.abs(got - expected)) / np.max(np.abs(expected))
    assert err <= RTOL, f"{what}: relative error {err:.2e} > {RTOL}\n got {got}\n expected {expected}"


def test_resistive_t_network() -> None:
    """T of R1 (port 1 arm), R2 (port 2 arm), R3 (common leg): Z = [[R1+R3, R3], [R3, R2+R3]] (common practice)."""
    r1, r2, r3 = 33.0, 68.0, 150.0
    net = f"T\nR1 p1 m {r1}\nR2 m p2 {r2}\nR3 m 0 {r3}\n.end\n"
    expected = np.array([[r1 + r3, r3], [r3, r2 + r3]])
    _close(_z(net, [("p1", "0"), ("p2", "0")], 1e3), expected, "T network")


def test_resistive_pi_network() -> None:
    """Pi of Ra (port 1 to ground), Rb (port 2 to ground), Rc (between the ports), S = Ra + Rb + Rc:
    Z11 = Ra (Rb + Rc)/S, Z22 = Rb (Ra + Rc)/S, Z12 = Z21 = Ra Rb/S (common practice)."""
    ra, rb, rc = 220.0, 470.0, 100.0
    s = ra + rb + rc
    net = f"Pi\nRa p1 0 {ra}\nRb p2 0 {rb}\nRc p1 p2 {rc}\n.end\n"
    expected = np.array([[ra * (rb + rc) / s, ra * rb / s], [ra * rb / s, rb * (ra + rc) / s]])
    _close(_z(net, [("p1", "0"), ("p2", "0")], 1e3), expected, "Pi network")


def test_voltage_amplifier_two_port_is_not_reciprocal() -> None:
    """Input Rin, output E = A V1 behind Ro: Z = [[Rin, 0], [A Rin, Ro]] (derived by this project: with port 2
    open V2 = A V1 = A Rin I1; with port 1 open V1 = 0, so Z12 = 0); the route reports Z != Z^T."""
    rin, a, ro = 10e3, 25.0, 600.0
    net = f"amp\nRin p1 0 {rin}\nEa e 0 p1 0 {a}\nRo e p2 {ro}\n.end\n"
    network = read_netlist(net, file="outside-check")
    (point,) = reduce_ports(network, [Port("p1", "0"), Port("p2", "0")], [1e3])
    assert point.z is not None
    _close(point.z, np.array([[rin, 0.0], [a * rin, ro]]), "amplifier two-port")
    assert point.reciprocity is not None and point.reciprocity > 0.5, "a non-reciprocal Z must be reported so"


def _fortescue(z: np.ndarray) -> np.ndarray:
    """A^-1 Z A with A = [[1, 1, 1], [1, a^2, a], [1, a, a^2]], a = e^(j 120 deg): diag(Z0, Z1, Z2) for a
    balanced Z (Fortescue's symmetrical components; common practice)."""
    a = cmath.exp(2j * math.pi / 3)
    big_a = np.array([[1, 1, 1], [1, a * a, a], [1, a, a * a]])
    return np.linalg.solve(big_a, z @ big_a)


def test_balanced_three_phase_line_sequence_impedances() -> None:
    """Three coupled phase conductors (R, L, mutual k) returning through a common earth resistance Rg:
    Zs = R + Rg + jwL, Zm = Rg + jwkL; Z1 = Z2 = Zs - Zm, Z0 = Zs + 2 Zm (common practice)."""
    r, l_h, k, rg, f = 0.08, 0.9e-3, 0.35, 0.5, 50.0
    net = (
        "line\n"
        f"Ra a xa {r}\nLa xa n {l_h}\nRb b xb {r}\nLb xb n {l_h}\nRc c xc {r}\nLc xc n {l_h}\n"
        f"Kab La Lb {k}\nKbc Lb Lc {k}\nKca Lc La {k}\nRg n 0 {rg}\n.end\n"
    )
    z = _z(net, [("a", "0"), ("b", "0"), ("c", "0")], f)
    w = 2 * math.pi * f
    zs, zm = r + rg + 1j * w * l_h, rg + 1j * w * k * l_h
    _close(z, np.full((3, 3), zm) + np.eye(3) * (zs - zm), "phase impedance matrix")
    _close(_fortescue(z), np.diag([zs + 2 * zm, zs - zm, zs - zm]), "sequence impedances (Z0, Z1, Z2)")


def _t_attenuator(db: float, z0: float) -> str:
    """Matched T pad: series arms z0 (K-1)/(K+1), shunt 2 z0 K/(K^2-1), K = 10^(A/20) (common practice)."""
    k = 10 ** (db / 20)
    series, shunt = z0 * (k - 1) / (k + 1), 2 * z0 * k / (k * k - 1)
    return f"T pad\nR1 p1 m {series!r}\nR2 m p2 {series!r}\nR3 m 0 {shunt!r}\n.end\n"


def _pi_attenuator(db: float, z0: float) -> str:
    """Matched Pi pad: shunt arms z0 (K+1)/(K-1), series z0 (K^2-1)/(2K), K = 10^(A/20) (common practice)."""
    k = 10 ** (db / 20)
    shunt, series = z0 * (k + 1) / (k - 1), z0 * (k * k - 1) / (2 * k)
    return f"Pi pad\nRa p1 0 {shunt!r}\nRb p2 0 {shunt!r}\nRc p1 p2 {series!r}\n.end\n"


@pytest.mark.parametrize("pad", [_t_attenuator, _pi_attenuator], ids=["T", "Pi"])
@pytest.mark.parametrize(("db", "z0"), [(3.0, 50.0), (10.0, 50.0), (20.0, 75.0)])
def test_matched_attenuator_s_parameters(pad, db: float, z0: float) -> None:
    """S11 = S22 = 0 and S21 = S12 = 10^(-A/20) in the pad's own z0 (common practice), to 1e-9."""
    z = _z(pad(db, z0), [("p1", "0"), ("p2", "0")], 1e6)
    s = s_from_z(z, z0)
    through = 10 ** (-db / 20)
    np.testing.assert_allclose(s, [[0, through], [through, 0]], rtol=0, atol=RTOL)


# ---------------------------------------------------------------- the same closed forms through ngspice

#: ngspice's AC analysis is a direct complex solve of a linear network (its iteration tolerances govern
#: nonlinear convergence only), so its Z agrees with the closed forms near rounding; 1e-8 leaves room for the
#: values passing through its output vectors and still fails on a wrong port, sign or coupling.
RTOL_SPICE = 1e-8


def _spice_z(tmp_path, capsys, netlist: str, ports: list[tuple[str, str]], f_hz: float) -> np.ndarray:
    """ngspice's Z from ``crosscheck reduce --port ... --format json`` (the SPICE multi-port route)."""
    import json

    from crosscheck.cli import main

    path = tmp_path / "net.cir"
    path.write_text(netlist)
    argv = ["reduce", str(path), "--freq", str(f_hz), "--format", "json"]
    for a, b in ports:
        argv += ["--port", a, b]
    main(argv)
    (point,) = json.loads(capsys.readouterr().out)["points"]
    assert point["spice"] is not None, "ngspice gave no answer"
    return np.array([[e["re"] + 1j * e["im"] for e in row] for row in point["spice"]["z"]])


@pytest.mark.spice
def test_ngspice_agrees_with_the_closed_forms(tmp_path, capsys) -> None:
    """The T network, the three-phase line's sequence impedances and a 10 dB Pi pad, through ngspice's runs."""
    r1, r2, r3 = 33.0, 68.0, 150.0
    z = _spice_z(
        tmp_path, capsys, f"T\nR1 p1 m {r1}\nR2 m p2 {r2}\nR3 m 0 {r3}\n.end\n", [("p1", "0"), ("p2", "0")], 1e3
    )
    err = np.max(np.abs(z - [[r1 + r3, r3], [r3, r2 + r3]])) / (r2 + r3)
    assert err <= RTOL_SPICE, f"T network through ngspice: relative error {err:.2e}"

    r, l_h, k, rg, f = 0.08, 0.9e-3, 0.35, 0.5, 50.0
    net = (
        "line\n"
        f"Ra a xa {r}\nLa xa n {l_h}\nRb b xb {r}\nLb xb n {l_h}\nRc c xc {r}\nLc xc n {l_h}\n"
        f"Kab La Lb {k}\nKbc Lb Lc {k}\nKca Lc La {k}\nRg n 0 {rg}\n.end\n"
    )
    w = 2 * math.pi * f
    zs, zm = r + rg + 1j * w * l_h, rg + 1j * w * k * l_h
    sequence = _fortescue(_spice_z(tmp_path, capsys, net, [("a", "0"), ("b", "0"), ("c", "0")], f))
    expected = np.diag([zs + 2 * zm, zs - zm, zs - zm])
    err = np.max(np.abs(sequence - expected)) / abs(zs + 2 * zm)
    assert err <= RTOL_SPICE, f"sequence impedances through ngspice: relative error {err:.2e}\n{sequence}"

    s = s_from_z(_spice_z(tmp_path, capsys, _pi_attenuator(10.0, 50.0), [("p1", "0"), ("p2", "0")], 1e6), 50.0)
    through = 10 ** (-10.0 / 20)
    np.testing.assert_allclose(s, [[0, through], [through, 0]], rtol=0, atol=RTOL_SPICE)
