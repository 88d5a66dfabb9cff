"""Compare two engines' equivalents and give verdicts that say why.

Judging rule (DESIGN.md): a quantity q of a point passes when

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
from dataclasses import dataclass
from typing import Iterable, Sequence

import numpy as np

from crosscheck.own.equivalent import Equivalent
from crosscheck.model.tolerance import Tolerance

EPS = float(np.finfo(float).eps)
#: 1 / pivrel: ngspice's threshold pivoting may grow the error by this much beyond κ·ε·‖x‖.
ROUNDOFF_FACTOR = 1e3

#: Order of severity: a point or case takes the worst verdict of its parts. ``drift`` is a result that
#: moved from the stored baseline (see ``baseline``): worse than a missing quantity, milder than a failure.
VERDICTS = ("pass", "unavailable", "drift", "fail", "error")

COMPARED = ("vth", "zth", "in")
UNITS = {"vth": "V", "zth": "Ω", "in": "A", "yn": "S"}


def worst(verdicts: Iterable[str]) -> str:
    ranked = [VERDICTS.index(v) for v in verdicts]
    return VERDICTS[max(ranked)] if ranked else "pass"


@dataclass(frozen=True)
class EngineAnswer:
    """One engine's equivalent at one frequency; None where it has no value, with ``note`` saying why."""

    freq_hz: float
    vth: complex | None
    zth: complex | None
    in_: complex | None
    note: str = ""

    def get(self, quantity: str) -> complex | None:
        return {"vth": self.vth, "zth": self.zth, "in": self.in_}[quantity]


@dataclass(frozen=True)
class QuantityCheck:
    quantity: str
    own: complex | None
    ref: complex | None
    err: float          # judged error (see module docstring); nan when not compared
    rel_err: float      # plain |Δ| / |q_ref|, for display
    mag_err_pct: float
    phase_err_deg: float
    verdict: str
    explanation: str


@dataclass(frozen=True)
class PointCheck:
    freq_hz: float
    quantities: tuple[QuantityCheck, ...]
    verdict: str
    explanation: str
    condition: float


def own_answer(eq: Equivalent) -> EngineAnswer:
    return EngineAnswer(eq.freq_hz, eq.vth, eq.zth, eq.in_, eq.note)


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


def compare_quantity(quantity: str, own: complex | None, ref: complex | None, tol: Tolerance,
                     condition: float, scale: float, own_note: str = "", ref_note: str = "",
                     ref_name: str = "SPICE") -> QuantityCheck:
    """One quantity at one frequency: judged error, display errors, verdict and the reason."""
    if own is None and ref is None:
        why = own_note or ref_note or "no value from either engine"
        return QuantityCheck(quantity, None, None, math.nan, math.nan, math.nan, math.nan, "pass",
                             f"both engines agree that {quantity} does not exist here: {why}")
    if own is None or ref is None:
        who, why = ("crosscheck", own_note) if own is None else (ref_name, ref_note)
        if own is None and ref is not None and ref_note == "" and own_note:
            why = own_note
        return QuantityCheck(quantity, own, ref, math.nan, math.nan, math.nan, math.nan, "unavailable",
                             f"{who} gives no {quantity}: {why or 'no reason given'}")
    delta = abs(own - ref)
    roundoff = ROUNDOFF_FACTOR * condition * EPS * scale if math.isfinite(condition) else 0.0
    floor = max(tol.abs, roundoff) / tol.rel if tol.rel > 0 else 0.0
    denominator = max(abs(ref), floor)
    err = 0.0 if delta == 0 else (delta / denominator if denominator > 0 else math.inf)
    rel = 0.0 if delta == 0 else (delta / abs(ref) if ref != 0 else math.inf)
    mag = magnitude_error_pct(own, ref)
    phase = phase_difference_deg(own, ref)
    ok = err <= tol.rel and (tol.phase_deg is None or abs(phase) <= tol.phase_deg or abs(ref) <= tol.abs)
    if ok:
        note = "" if rel <= tol.rel else (
            f"agrees to the accuracy the arithmetic allows (|Δ| = {delta:.3g} {UNITS[quantity]} is within "
            f"1e3·κ·ε·‖x‖ = {roundoff:.3g} for condition κ = {condition:.3g}; 1e3 is the growth ngspice's "
            "threshold pivoting allows)")
        return QuantityCheck(quantity, own, ref, err, rel, mag, phase, "pass", note)
    return QuantityCheck(quantity, own, ref, err, rel, mag, phase, "fail",
                         _failure_reason(quantity, err, tol, condition, mag, phase))


def _failure_reason(quantity: str, err: float, tol: Tolerance, condition: float, mag: float,
                    phase: float) -> str:
    text = (f"{quantity} differs by {err:.3g} relative (tolerance {tol.rel:.3g}); magnitude {mag:+.3g} %, "
            f"phase {phase:+.3g}°")
    attainable = condition * EPS
    if attainable > tol.rel:
        text += (f". The network is ill-conditioned (κ = {condition:.3g}, so κ·ε = {attainable:.2g} exceeds the "
                 "tolerance): double precision cannot promise this agreement; loosen the tolerance or rescale "
                 "the network (very large and very small impedances side by side)")
    elif attainable * 1e3 > err:
        text += f". The size fits the matrix condition (κ = {condition:.3g}): likely roundoff, not a modelling error"
    else:
        text += (f". Far above what the condition allows (κ·ε = {attainable:.2g}): the engines model the network "
                 "differently; inspect the netlist for an element either engine reads another way")
    return text


def compare_point(own: Equivalent, ref: EngineAnswer | None, tol: Tolerance, ref_note: str = "",
                  ref_name: str = "SPICE") -> PointCheck:
    """All compared quantities at one frequency, and the point's verdict."""
    if ref is None:
        checks = tuple(
            QuantityCheck(q, own_answer(own).get(q), None, math.nan, math.nan, math.nan, math.nan, "unavailable",
                          f"{ref_name} gives no answer: {ref_note or 'not run'}")
            for q in COMPARED
        )
        return PointCheck(own.freq_hz, checks, "unavailable", f"{ref_name}: {ref_note or 'not run'}",
                          own.condition)
    checks = tuple(
        compare_quantity(q, own_answer(own).get(q), ref.get(q), tol, own.condition, _scale(own, q),
                         own.note, ref.note, ref_name)
        for q in COMPARED
    )
    verdict = worst(c.verdict for c in checks)
    explanation = "; ".join(c.explanation for c in checks if c.verdict == verdict and c.explanation)
    return PointCheck(own.freq_hz, checks, verdict, explanation, own.condition)


def compare_sweep(own: Sequence[Equivalent], ref: Sequence[EngineAnswer | None], tol: Tolerance,
                  ref_note: str = "") -> list[PointCheck]:
    return [compare_point(o, r, tol, ref_note) for o, r in zip(own, ref)]
