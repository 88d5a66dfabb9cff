"""The comparison's judged error, verdicts and explanations."""

from __future__ import annotations

import math

import pytest

from crosscheck.judge.compare import EngineAnswer, compare_point, compare_quantity, magnitude_error_pct, phase_difference_deg
from crosscheck.vocabulary import worst
from crosscheck.own.equivalent import Equivalent
from crosscheck.model.tolerance import HAND_CALCULATION, SOLVER_VS_SPICE, Tolerance


def _eq(vth=1 + 1j, zth=50 + 5j, cond=10.0, v_scale=1.0, z_scale=50.0) -> Equivalent:
    return Equivalent(1e3, vth, zth, vth / zth, 1 / zth, cond, "", v_scale, z_scale)


def test_identical_answers_pass_with_zero_error():
    """Equal numbers give err 0 and pass."""
    own = _eq()
    point = compare_point(own, EngineAnswer(1e3, own.vth, own.zth, own.in_), SOLVER_VS_SPICE)
    assert point.verdict == "pass"
    assert all(q.err == 0.0 for q in point.quantities)


def test_wrong_stamp_size_error_fails_and_says_it_is_not_roundoff():
    """A 1e-3 relative difference on a well-conditioned point fails at 1e-6 and is called a modelling difference."""
    own = _eq()
    ref = EngineAnswer(1e3, own.vth * (1 + 1e-3), own.zth, own.in_)
    point = compare_point(own, ref, SOLVER_VS_SPICE)
    assert point.verdict == "fail"
    [vth] = [q for q in point.quantities if q.quantity == "vth"]
    assert vth.err == pytest.approx(1e-3 / (1 + 1e-3), rel=1e-9)
    assert "differently" in vth.explanation


def test_ill_conditioned_disagreement_is_explained_by_the_condition():
    """When κ·ε exceeds the tolerance, the failure text says the tolerance is tighter than the arithmetic allows."""
    own = _eq(cond=1e12)
    ref = EngineAnswer(1e3, own.vth * (1 + 1e-2), own.zth, own.in_)
    check = compare_quantity("vth", own.vth, ref.vth, SOLVER_VS_SPICE, 1e12, 1e-3)
    assert check.verdict == "fail"
    assert "ill-conditioned" in check.explanation


def test_tiny_component_is_judged_normwise():
    """A V_th of 1e-14 V beside 1 V node voltages is judged against κ·ε·scale, not its own size."""
    check = compare_quantity("vth", 1e-14 + 0j, 2e-14 + 0j, SOLVER_VS_SPICE, condition=100.0, scale=1.0)
    assert check.rel_err == pytest.approx(0.5, rel=1e-12)
    assert check.verdict == "pass"
    assert "accuracy the arithmetic allows" in check.explanation
    # The same difference on a component as large as the vector is a failure.
    big = compare_quantity("vth", 1.0 + 0j, 1.0 + 1e-3, SOLVER_VS_SPICE, condition=100.0, scale=1.0)
    assert big.verdict == "fail"


def test_missing_reference_quantity_is_unavailable_with_reason():
    own = _eq()
    ref = EngineAnswer(1e3, own.vth, own.zth, None, "no DC path for ngspice")
    point = compare_point(own, ref, SOLVER_VS_SPICE)
    assert point.verdict == "unavailable"
    assert "no DC path" in point.explanation


def test_both_engines_agree_a_form_does_not_exist():
    """Z_th = 0 at a voltage-source port: both give no I_N, and that agreement passes."""
    own = Equivalent(50.0, 5 + 0j, 0j, None, None, 3.0, "Z_th = 0", 5.0, 1.0)
    ref = EngineAnswer(50.0, 5 + 0j, 0j, None, "no Norton form")
    point = compare_point(own, ref, SOLVER_VS_SPICE)
    assert point.verdict == "pass"


def test_no_reference_at_all_is_unavailable():
    point = compare_point(_eq(), None, SOLVER_VS_SPICE, ref_note="ngspice is not installed")
    assert point.verdict == "unavailable"
    assert "not installed" in point.explanation


def test_hand_tolerance_checks_phase_separately():
    """1 % and 0.5° (common practice: three significant figures): a 1° slip fails on phase alone."""
    ref = 10 + 0j
    own = complex(10 * math.cos(math.radians(1)), 10 * math.sin(math.radians(1)))
    check = compare_quantity("vth", own, ref, HAND_CALCULATION, condition=1.0, scale=0.0)
    assert check.phase_err_deg == pytest.approx(1.0, abs=1e-12)
    assert check.verdict == "fail"


def test_phase_difference_wraps():
    a = complex(math.cos(math.radians(179)), math.sin(math.radians(179)))
    b = complex(math.cos(math.radians(-179)), math.sin(math.radians(-179)))
    assert phase_difference_deg(a, b) == pytest.approx(-2.0, abs=1e-9)
    assert magnitude_error_pct(2 + 0j, 1 + 0j) == pytest.approx(100.0, abs=1e-12)


def test_worst_orders_verdicts():
    assert worst(["pass", "unavailable"]) == "unavailable"
    assert worst(["unavailable", "fail"]) == "fail"
    assert worst(["fail", "error", "pass"]) == "error"
    assert worst([]) == "pass"


@pytest.mark.parametrize("bad", [dict(rel=-1.0), dict(rel=math.inf), dict(rel=1e-3, phase_deg=200.0)])
def test_tolerance_refuses_nonsense(bad):
    with pytest.raises(ValueError):
        Tolerance(**bad)
