"""Compare two engines' equivalents and give verdicts that say why.

Judging rule: a quantity q of a point passes when

    |q − q_ref| <= max(tol.rel·|q_ref|, tol.abs, G·κ·ε·scale_q)

where κ is the own solver's 1-norm condition number, ε machine epsilon,
scale_q the largest entry (node voltages and branch currents) of the solution
vector the quantity was read from, and G = 1e3 the element growth ngspice's
threshold pivoting allows (its relative pivot threshold ``pivrel`` defaults
to 1e-3; ngspice manual, options chapter, from memory). The reported ``err``
is the same test as a relative error to hold against tol.rel:
|Δ| / max(|q_ref|, max(tol.abs, G·κ·ε·scale_q) / tol.rel).
Both engines are backward-stable direct solvers, so their answers are
accurate *normwise*, to about κ·ε·‖x‖ (Higham, "Accuracy and Stability of
Numerical Algorithms", 2nd ed., §7.1): a component far smaller than ‖x‖
carries no more absolute accuracy than that, and is not held to more.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from crosscheck.judge.records import Cause, PointCheck, QuantityCheck
from crosscheck.model.tolerance import Tolerance
from crosscheck.own.equivalent import Equivalent
from crosscheck.spice.results import SpicePoint
from crosscheck.vocabulary import COMPARED, Verdict, phasor_of, quantity_unit, relative_error, worst

EPS = float(np.finfo(float).eps)
#: 1 / pivrel: ngspice's threshold pivoting may grow the error by this much beyond κ·ε·‖x‖.
ROUNDOFF_FACTOR = 1e3


@dataclass(frozen=True)
class EngineAnswer:
    """One engine's equivalent at one frequency, as the comparer reads it; None where there is no value."""

    freq_hz: float
    vth: complex | None
    zth: complex | None
    in_: complex | None
    note: str = ""

    def get(self, quantity: str) -> complex | None:
        return phasor_of(self, quantity)


def spice_answer(point: SpicePoint) -> EngineAnswer:
    """ngspice's answer at one point, as the comparer reads it."""
    return EngineAnswer(point.requested_hz, point.vth, point.zth, point.isc, "; ".join(point.notes))


def phase_difference_deg(a: complex, b: complex) -> float:
    """Angle of a relative to b, wrapped to (−180, 180]."""
    if a == 0 or b == 0:
        return 0.0
    d = math.degrees(math.atan2((a / b).imag, (a / b).real))
    return 180.0 if d == -180.0 else d


def magnitude_error_pct(a: complex, b: complex) -> float:
    return math.nan if b == 0 else 100.0 * (abs(a) - abs(b)) / abs(b)


def _scale(eq: Equivalent, quantity: str) -> float:
    if quantity == "vth":
        return eq.vth_scale
    if quantity == "zth":
        return eq.zth_scale
    # I_N = V_th / Z_th: first-order propagation of both solutions' errors.
    if eq.zth and math.isfinite(eq.zth_scale):
        return (eq.vth_scale + abs(eq.in_ or 0) * eq.zth_scale) / abs(eq.zth)
    return abs(eq.in_) if eq.in_ is not None else 0.0


def compare_quantity(
    quantity: str,
    own: complex | None,
    ref: complex | None,
    tol: Tolerance,
    condition: float,
    scale: float,
    own_note: str = "",
    ref_note: str = "",
    ref_name: str = "SPICE",
) -> QuantityCheck:
    """One quantity at one frequency: judged error, display errors, verdict and the reason."""
    if own is None or ref is None:
        return _absent(quantity, own, ref, own_note, ref_note, ref_name)
    delta = abs(own - ref)
    roundoff = ROUNDOFF_FACTOR * condition * EPS * scale if math.isfinite(condition) else 0.0
    floor = max(tol.abs, roundoff) / tol.rel if tol.rel > 0 else 0.0
    err = relative_error(own, ref, floor)
    rel = relative_error(own, ref)
    mag = magnitude_error_pct(own, ref)
    phase = phase_difference_deg(own, ref)
    ok = err <= tol.rel and (tol.phase_deg is None or abs(phase) <= tol.phase_deg or abs(ref) <= tol.abs)
    if ok:
        if rel <= tol.rel:
            return QuantityCheck(quantity, own, ref, err, rel, mag, phase, Verdict.PASS, "", Cause.AGREES)
        note = _roundoff_note(quantity, delta, roundoff, condition)
        return QuantityCheck(quantity, own, ref, err, rel, mag, phase, Verdict.PASS, note, Cause.AGREES_TO_ROUNDOFF)
    cause, reason = _failure_reason(quantity, err, tol, condition, mag, phase)
    return QuantityCheck(quantity, own, ref, err, rel, mag, phase, Verdict.FAIL, reason, cause)


def _absent(
    quantity: str, own: complex | None, ref: complex | None, own_note: str, ref_note: str, ref_name: str
) -> QuantityCheck:
    """A quantity one engine or both do not give: agreement when neither has it, else unavailable, with why.

    When only crosscheck lacks it and the reference gives no note, crosscheck's own note says why.
    """
    if own is None and ref is None:
        why = own_note or ref_note or "no value from either engine"
        return QuantityCheck(
            quantity,
            None,
            None,
            math.nan,
            math.nan,
            math.nan,
            math.nan,
            Verdict.PASS,
            f"both engines agree that {quantity} does not exist here: {why}",
            Cause.BOTH_ABSENT,
        )
    who, why = ("crosscheck", own_note) if own is None else (ref_name, ref_note)
    if own is None and ref is not None and ref_note == "" and own_note:
        why = own_note
    return QuantityCheck(
        quantity,
        own,
        ref,
        math.nan,
        math.nan,
        math.nan,
        math.nan,
        Verdict.UNAVAILABLE,
        f"{who} gives no {quantity}: {why or 'no reason given'}",
        Cause.OWN_ABSENT if own is None else Cause.REFERENCE_ABSENT,
    )


def _roundoff_note(quantity: str, delta: float, roundoff: float, condition: float) -> str:
    """Why a difference beyond tol.rel still passes: it is within what the matrix condition allows."""
    return (
        f"agrees to the accuracy the arithmetic allows (|Δ| = {delta:.3g} {quantity_unit(quantity)} is within "
        f"1e3·κ·ε·‖x‖ = {roundoff:.3g} for condition κ = {condition:.3g}; 1e3 is the growth ngspice's "
        "threshold pivoting allows)"
    )


def _failure_reason(
    quantity: str, err: float, tol: Tolerance, condition: float, mag: float, phase: float
) -> tuple[Cause, str]:
    text = (
        f"{quantity} differs by {err:.3g} relative (tolerance {tol.rel:.3g}); magnitude {mag:+.3g} %, "
        f"phase {phase:+.3g}°"
    )
    attainable = condition * EPS
    if attainable > tol.rel:
        return Cause.ILL_CONDITIONED, text + (
            f". The network is ill-conditioned (κ = {condition:.3g}, so κ·ε = {attainable:.2g} exceeds the "
            "tolerance): double precision cannot promise this agreement; loosen the tolerance or rescale "
            "the network (very large and very small impedances side by side)"
        )
    if attainable * 1e3 > err:
        return Cause.FITS_CONDITION, text + (
            f". The size fits the matrix condition (κ = {condition:.3g}): likely roundoff, not a modelling error"
        )
    return Cause.MODEL_DIFFERENCE, text + (
        f". Far above what the condition allows (κ·ε = {attainable:.2g}): the engines model the network "
        "differently; inspect the netlist for an element either engine reads another way"
    )


def compare_point(
    own: Equivalent, ref: EngineAnswer | None, tol: Tolerance, ref_note: str = "", ref_name: str = "SPICE"
) -> PointCheck:
    """All compared quantities at one frequency, and the point's verdict."""
    if ref is None:
        checks = tuple(
            QuantityCheck(
                q,
                phasor_of(own, q),
                None,
                math.nan,
                math.nan,
                math.nan,
                math.nan,
                Verdict.UNAVAILABLE,
                f"{ref_name} gives no answer: {ref_note or 'not run'}",
                Cause.REFERENCE_NOT_RUN,
            )
            for q in COMPARED
        )
        return PointCheck(
            own.freq_hz,
            checks,
            Verdict.UNAVAILABLE,
            f"{ref_name}: {ref_note or 'not run'}",
            own.condition,
            Cause.REFERENCE_NOT_RUN,
        )
    checks = tuple(
        compare_quantity(
            q, phasor_of(own, q), ref.get(q), tol, own.condition, _scale(own, q), own.note, ref.note, ref_name
        )
        for q in COMPARED
    )
    verdict = worst(c.verdict for c in checks)
    same = [c for c in checks if c.verdict == verdict]
    explanation = "; ".join(c.explanation for c in same if c.explanation)
    return PointCheck(own.freq_hz, checks, verdict, explanation, own.condition, same[0].cause)


def compare_sweep(
    own: Sequence[Equivalent], ref: Sequence[EngineAnswer | None], tol: Tolerance, ref_note: str = ""
) -> tuple[PointCheck, ...]:
    """Point by point; ``ref`` is None at points where the reference gave no answer."""
    return tuple(compare_point(o, r, tol, ref_note) for o, r in zip(own, ref))
