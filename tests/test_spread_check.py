"""ngspice's confirmations of a spread (``spice.spread``, ``judge.spread``): corners, samples, central differences.

The own answers here come from ``tests/spread_brute.py`` (every corner solved, own-route differences), so
these tests hold the confirmation machinery against a yardstick that does not depend on the adjoint code.
"""

from __future__ import annotations

import dataclasses

import pytest
from spread_brute import brute_spread

from crosscheck.judge.spread import judge_spread, limit_checks
from crosscheck.model.netlist import read_netlist
from crosscheck.model.network import Port
from crosscheck.model.tolerance import SOLVER_VS_SPICE
from crosscheck.model.vary import LimitSpread, OwnSpread, SpreadSpec, parse_vary_option
from crosscheck.own.equivalent import thevenin
from crosscheck.spice.spread import STEP_REL, difference_tolerance, spice_spread
from crosscheck.spice.workers import SpicePool
from crosscheck.vocabulary import Verdict

# An RC low-pass behind a source resistance, our own scenario: corner near 1.6 kHz, checked at 3 frequencies.
NETLIST = """rc filter for the spread tests
V1 in 0 AC 2
R1 in mid 1k
R2 mid out 470
C1 out 0 100n
R3 out 0 22k
.end
"""
FREQS = (100.0, 1.6e3, 20e3)
PORT = Port("out", "0")


@pytest.fixture(scope="module")
def confirmed():
    network = read_netlist(NETLIST)
    spec = SpreadSpec((parse_vary_option("R*=1%"), parse_vary_option("C1=5%")), samples=6, seed=3, spice_samples=4)
    own = brute_spread(network, PORT, FREQS, spec)
    conditions = [eq.condition for eq in thevenin(network, PORT, FREQS)]
    with SpicePool(workers=2) as pool:
        spice = spice_spread(pool, network, PORT, FREQS, own, conditions, spice_samples=4)
    return network, own, spice


@pytest.mark.spice
def test_every_confirmation_passes_on_a_right_spread(confirmed):
    """Corners, samples and central differences all agree with a correct own spread, and every kind is there."""
    network, own, spice = confirmed
    result = judge_spread(own, spice, SOLVER_VS_SPICE, thevenin(network, PORT, FREQS))
    kinds = {c.kind for c in result.checks}
    assert kinds == {"corner", "sample", "sensitivity"}
    failing = [c.explanation for c in result.checks if c.verdict != Verdict.PASS]
    assert failing == []
    # 4 parts x 3 frequencies x 3 quantities x 2 functions
    assert len([c for c in result.checks if c.kind == "sensitivity"]) == 4 * 3 * 3 * 2
    assert len([c for c in result.checks if c.kind == "sample"]) == 4 * 3 * 3


@pytest.mark.spice
def test_differences_are_far_tighter_than_a_one_percent_slip(confirmed):
    """The measured tolerance of every central difference is below 1e-4 % per % here (a smooth RC network)."""
    _, _, spice = confirmed
    assert spice.differences
    for d in spice.differences:
        assert d.step_rel == STEP_REL
        assert difference_tolerance(d.abs_pct, d.abs_trunc, d.rounding) < 1e-4
        assert difference_tolerance(d.phase_deg, d.phase_trunc, d.phase_rounding) < 1e-4


def _perturbed(own: OwnSpread, part: str, factor: float) -> OwnSpread:
    """``own`` with one part's sensitivity of |V_th| multiplied by ``factor`` at every frequency."""
    points = []
    for p in own.points:
        s_abs, s_phase = p.vth.sensitivities[part]
        sens = {**p.vth.sensitivities, part: (s_abs * factor, s_phase)}
        points.append(dataclasses.replace(p, vth=dataclasses.replace(p.vth, sensitivities=sens)))
    return dataclasses.replace(own, points=tuple(points))


@pytest.mark.spice
def test_a_wrong_sensitivity_is_caught_by_the_central_difference(confirmed):
    """|V_th|'s sensitivity to C1 off by 1 % fails at every frequency, even at 100 Hz where it is small (~-0.01)."""
    network, own, spice = confirmed
    wrong = _perturbed(own, "c1", 1.01)
    result = judge_spread(wrong, spice, SOLVER_VS_SPICE, thevenin(network, PORT, FREQS))
    failed = [c for c in result.checks if c.verdict == Verdict.FAIL]
    assert failed and all(c.kind == "sensitivity" and c.subject == "c1" and c.quantity == "vth" for c in failed)
    assert {c.freq_hz for c in failed} == set(FREQS)
    assert result.verdict == Verdict.FAIL
    assert "sensitivity of |vth| to c1" in failed[0].explanation


@pytest.mark.spice
def test_a_wrong_corner_value_is_caught(confirmed):
    """A worst-case maximum of |Z_th| moved by 1e-4 relative fails against ngspice at its corner."""
    network, own, spice = confirmed
    p = own.points[1]
    extreme = p.zth.worst_case["abs"]
    moved = dataclasses.replace(extreme, maximum=extreme.maximum * (1 + 1e-4))
    zth = dataclasses.replace(p.zth, worst_case={**p.zth.worst_case, "abs": moved})
    wrong = dataclasses.replace(own, points=(own.points[0], dataclasses.replace(p, zth=zth), own.points[2]))
    result = judge_spread(wrong, spice, SOLVER_VS_SPICE, thevenin(network, PORT, FREQS))
    failed = [c for c in result.checks if c.verdict == Verdict.FAIL]
    assert [(c.kind, c.quantity, c.function, c.subject) for c in failed] == [("corner", "zth", "abs", "max")]


def _limit_spread(holds: bool) -> LimitSpread:
    corner = {"r1": 1010.0, "c1": 95e-9}
    return LimitSpread(
        1, "abs(zth)", None, 500.0, 300.0, 505.0, 100.0, 100.0, corner, corner, "first-order corner",
        "corner search", holds, None if holds else corner, None if holds else 100.0, 0.02,
    )  # fmt: skip


def test_a_limit_that_holds_at_nominal_but_fails_at_a_corner_is_a_failure():
    """The limit's verdict over the spread is fail, naming the corner's part values and that nominal passes."""
    own = OwnSpread((), (), (_limit_spread(False),))
    from crosscheck.judge.records import Cause, LimitCheck

    nominal = LimitCheck(1, "abs(zth)", "abs", "zth", None, 500.0, None, 100.0, 480.0, 20.0, Verdict.PASS, "",
                         (), Cause.LIMIT_HOLDS)  # fmt: skip
    [check] = limit_checks(own, (), [nominal])
    assert check.verdict == Verdict.FAIL
    assert "fails at corner r1 = 1.01k, c1 = 95n" in check.explanation
    assert "holds at nominal values" in check.explanation
    [held] = limit_checks(OwnSpread((), (), (_limit_spread(True),)), (), [nominal])
    assert held.verdict == Verdict.PASS and "holds over spread" in held.explanation


@pytest.mark.spice
def test_a_quantity_zero_to_rounding_is_not_held_to_a_relative_sensitivity():
    """Generated network 14 has V_th = 3e-17 V at 0 Hz (zero to rounding): its sensitivities are left out with a
    note instead of failing on noise, and every other confirmation passes."""
    from crosscheck.fuzz.generate import generate_case
    from crosscheck.model.vary import resolve
    from crosscheck.own.spread import own_spread

    g = generate_case(14)
    spec = SpreadSpec((parse_vary_option("R*=1%"), parse_vary_option("L*=1%")), samples=0, spice_samples=0)
    own = own_spread(g.network, g.port, g.freqs_hz, resolve(g.network, spec), spec)
    equivalents = thevenin(g.network, g.port, g.freqs_hz)
    assert abs(equivalents[0].vth) < 1e-15  # the premise: zero to rounding at 0 Hz
    with SpicePool(workers=2) as pool:
        spice = spice_spread(pool, g.network, g.port, g.freqs_hz, own, [eq.condition for eq in equivalents])
    result = judge_spread(own, spice, SOLVER_VS_SPICE, equivalents)
    assert not [c for c in result.checks if c.freq_hz == 0.0 and c.quantity == "vth" and c.kind == "sensitivity"]
    assert any("zero to rounding" in n for n in result.notes)
    assert [c.explanation for c in result.checks if c.verdict != Verdict.PASS] == []


@pytest.mark.spice
def test_allowances_stay_tight_on_a_badly_scaled_network(capsys):
    """An unscaled matrix (the mixer's nanofarads beside kilohms: κ near 1e11) once gave a central difference an
    allowance of 31 % per % through the normwise bound; measured from ngspice's own error at nominal values, each
    allowance stays under 1e-4, so a 0.1 % slip in a sensitivity of order 1 still fails."""
    import json
    from pathlib import Path

    from crosscheck.cli import main

    netlist = Path(__file__).resolve().parent.parent / "corpus" / "audio" / "mixer_line_out.cir"
    argv = ["reduce", str(netlist), "--port", "far_end", "0", "--freq", "1k", "--vary", "R*=1%"]
    assert main([*argv, "--samples", "40", "--seed", "1", "--format", "json"]) == 0
    spread = json.loads(capsys.readouterr().out)["points"][0]["spread"]
    checks = [c for q in ("vth", "zth", "in") for c in spread[q]["spice_checks"] if c["kind"] == "sensitivity"]
    assert len(checks) >= 12
    assert max(c["allowed"] for c in checks) < 1e-4
