"""Judging one fuzz case: the outcome from both routes' answers, and what accounts for a failure.

A generated case is judged as every case is (``judge.case.judged``); the fuzzer adds its own reading:

* ``pass``: every quantity at every frequency within tolerance;
* ``fail``: a quantity outside tolerance. *Explained* when a cause accounts for it: the comparer found
  the size fits the matrix condition; or it is within ngspice's own attainable accuracy (``_explain``);
  or the point agrees when ngspice runs that frequency alone (``isolate``). Unexplained otherwise: a
  genuine disagreement;
* ``unavailable``: an engine gave no value (the own solver found the equations singular, or ngspice
  had no answer at a point). *Explained* only when the generator's caveat for the case says why;
* ``error``: an engine crashed, or refused the case outright.
"""

from __future__ import annotations

from collections.abc import Sequence
from concurrent.futures import Future
from dataclasses import dataclass, replace

import numpy as np

from crosscheck.errors import CrosscheckError, EngineUnavailableError, SingularNetworkError
from crosscheck.fuzz.faults import OwnRoute
from crosscheck.fuzz.generate import GeneratedCase
from crosscheck.judge.case import judged
from crosscheck.judge.compare import compare_point, spice_answer
from crosscheck.judge.records import ROUNDOFF_CAUSES, Cause, PointCheck, QuantityCheck
from crosscheck.judge.result import CaseResult
from crosscheck.model.network import Network, Port, floating_reference
from crosscheck.model.tolerance import Tolerance
from crosscheck.own.equivalent import Equivalent, thevenin
from crosscheck.own.solver import MnaSystem
from crosscheck.spice.engine import SpiceResult
from crosscheck.spice.workers import SpicePool
from crosscheck.vocabulary import Verdict

#: ngspice's element growth allowance: 1 / pivrel, pivrel's default being 1e-3 (see ``_explain``).
NGSPICE_GROWTH = 1e3
EPS = float(np.finfo(float).eps)


@dataclass(frozen=True)
class CaseOutcome:
    """How one fuzz case went: the case result, its status, and whether (and by what) it is accounted for."""

    index: int
    case: GeneratedCase
    status: str
    explained: bool
    reason: str
    result: CaseResult
    cause: Cause | None = None  # what accounts for a fail or unavailable, when something does

    @property
    def points(self) -> tuple[PointCheck, ...]:
        return self.result.points

    @property
    def own(self) -> tuple[Equivalent, ...] | None:
        return self.result.own

    @property
    def spice(self) -> SpiceResult | None:
        return self.result.spice

    @property
    def problem(self) -> bool:
        """A disagreement or breakage nothing accounts for."""
        return self.status == "error" or (self.status in ("fail", "unavailable") and not self.explained)


def solve_own(
    network: Network, port: Port, freqs: Sequence[float], route: OwnRoute = thevenin
) -> tuple[Sequence[Equivalent] | None, CrosscheckError | None]:
    """The own route's equivalents, or the error it raised (a case's error is data, not an exception)."""
    try:
        return route(network, port, freqs), None
    except CrosscheckError as exc:
        return None, exc


def spice_result(future: Future) -> tuple[SpiceResult | None, CrosscheckError | None]:
    """ngspice's answer for a submitted case, or the error it raised."""
    try:
        return future.result(), None
    except CrosscheckError as exc:
        return None, exc


def judge(
    index: int,
    case: GeneratedCase,
    own: Sequence[Equivalent] | None,
    own_error: CrosscheckError | None,
    spice: SpiceResult | None,
    spice_error: CrosscheckError | None,
    tol: Tolerance,
) -> CaseOutcome:
    """The outcome of one case from both engines' answers (or errors)."""
    if isinstance(spice_error, EngineUnavailableError):
        raise spice_error  # no ngspice at all: nothing to fuzz against
    head = CaseResult(
        f"fuzz case {case.seed}",
        case.network.title,
        (case.port.a, case.port.b),
        case.freqs_hz,
        tol,
        own=None if own is None else tuple(own),
        spice=spice,
    )
    if spice_error is not None:
        why = f"ngspice: {spice_error}"
        return CaseOutcome(index, case, "error", False, why, replace(head, error=why, verdict=Verdict.ERROR))
    if own_error is not None:
        why = f"own solver: {own_error}"
        errored = replace(head, error=why, verdict=Verdict.ERROR)
        if isinstance(own_error, SingularNetworkError):
            return CaseOutcome(
                index,
                case,
                "unavailable",
                bool(case.caveat),
                _with_caveat(why, case),
                errored,
                Cause.EXPECTED_FOR_CASE if case.caveat else None,
            )
        return CaseOutcome(index, case, "error", False, why, errored)
    result = judged(head, case.network)
    checks = [(p, c) for p in result.points for c in p.quantities]
    failing = [(p, c) for p, c in checks if c.verdict == Verdict.FAIL]
    if failing:
        return _failed(index, case, result, failing)
    missing = [(p, c) for p, c in checks if c.verdict == Verdict.UNAVAILABLE]
    if missing:
        p, c = missing[0]
        return CaseOutcome(
            index,
            case,
            "unavailable",
            bool(case.caveat),
            _with_caveat(f"at {p.freq_hz:g} Hz: {c.explanation}", case),
            result,
            Cause.EXPECTED_FOR_CASE if case.caveat else None,
        )
    return CaseOutcome(index, case, "pass", True, "", result)


def _failed(
    index: int, case: GeneratedCase, result: CaseResult, failing: list[tuple[PointCheck, QuantityCheck]]
) -> CaseOutcome:
    """A failing case: the worst failure's reason, explained when every failure has a roundoff cause."""
    whys = [_explain(case, p, c) for p, c in failing]
    i = max(range(len(failing)), key=lambda j: failing[j][1].err)
    p, c = failing[i]
    reason = (
        f"at {p.freq_hz:g} Hz: {c.quantity} {whys[i]} (the comparer said: {c.explanation})"
        if whys[i]
        else f"at {p.freq_hz:g} Hz: {c.explanation}"
    )
    explained = all(c.cause in ROUNDOFF_CAUSES or why for (_, c), why in zip(failing, whys))
    cause = None
    if explained:
        cause = Cause.NGSPICE_ROUNDOFF if any(whys) else c.cause
    return CaseOutcome(index, case, "fail", explained, reason, result, cause)


def _explain(case: GeneratedCase, point: PointCheck, check: QuantityCheck) -> str:
    """Why a failure the comparer could not explain is still roundoff: ngspice's own attainable accuracy.

    The comparer allows 16·κ·ε times the largest *node voltage* of the solution. ngspice can miss by
    more: it factors with threshold pivoting (Sparse 1.3; ``.options pivrel``, default 1e-3 per the
    ngspice manual's options chapter, from memory), which lets elements grow by up to 1/pivrel per
    step, and the solution's size may sit in branch currents (a port pinned by a voltage source has
    all node voltages 0 while the 1 A test current flows through the source). Returns the reason when
    |Δ| <= NGSPICE_GROWTH·κ·ε·‖x‖∞ over the whole solution (node voltages and branch currents), else "".
    """
    if check.cause in ROUNDOFF_CAUSES or check.own is None or check.ref is None:
        return ""
    ties = [r] if (r := floating_reference(case.network, case.port)) is not None else []
    system = MnaSystem(case.network, ties)
    try:
        fac = system.factorize(point.freq_hz)
    except CrosscheckError:
        return ""
    x = fac.solve(np.stack([system.source_vector(), system.injection_vector(case.port.a, case.port.b)], axis=1))
    s_src, s_test = (float(np.max(np.abs(x[:, j]), initial=0.0)) for j in (0, 1))
    zth = complex(np.asarray(system.voltage(x[:, 1], case.port.a)) - np.asarray(system.voltage(x[:, 1], case.port.b)))
    if check.quantity == "in":  # I_N = V_th / Z_th: first-order propagation of both errors
        if zth == 0:
            return ""
        scale = (s_src + abs(check.own) * s_test) / abs(zth)
    else:
        scale = s_src if check.quantity == "vth" else s_test
    bound = NGSPICE_GROWTH * fac.condition * EPS * scale
    delta = abs(check.own - check.ref)
    if not delta <= bound:
        return ""
    return (
        f"within ngspice's roundoff: |Δ| = {delta:.3g} <= {NGSPICE_GROWTH:g}·κ·ε·‖x‖∞ = {bound:.3g} "
        f"(κ = {fac.condition:.3g}, ‖x‖∞ = {scale:.3g} over node voltages and branch currents; ngspice pivots "
        "with a relative threshold of 1e-3)"
    )


def isolate(outcome: CaseOutcome, pool: SpicePool, tol: Tolerance) -> CaseOutcome:
    """Rerun each failing frequency alone in ngspice: if every one then agrees, the failure was ngspice's.

    ngspice runs the ``.ac`` cards of one deck one after another and keeps the pivot order it chose
    for the analysis before (it reorders only when a pivot is exactly singular). Where the pivots'
    sizes change a lot with frequency (a tank near resonance), that order can cost ngspice accuracy
    far beyond the matrix condition. Seen with ngspice 39; the own solver factors each frequency afresh.
    """
    case = outcome.case
    own = {e.freq_hz: e for e in outcome.own or ()}
    notes = []
    for p in outcome.points:
        failing = [c for c in p.quantities if c.verdict == "fail"]
        if not failing or all(c.cause in ROUNDOFF_CAUSES for c in failing):
            continue
        alone, error = spice_result(pool.submit(case.network, case.port, [p.freq_hz]))
        if alone is None or error is not None or p.freq_hz not in own:
            return outcome
        again = compare_point(own[p.freq_hz], spice_answer(alone.points[0]), tol)
        if again.verdict != "pass":
            return outcome
        worst = max(failing, key=lambda c: c.err)
        notes.append(
            f"at {p.freq_hz:g} Hz {worst.quantity} differed by {worst.err:.3g} (judged) with the other "
            f"frequencies in ngspice's deck and agrees when ngspice runs this frequency alone"
        )
    if not notes:
        return outcome
    reason = (
        "; ".join(notes) + ": ngspice keeps the pivot order of the analysis it ran before, which lost it "
        "accuracy here (an ngspice limitation, not a modelling difference)"
    )
    return replace(outcome, explained=True, reason=reason, cause=Cause.NGSPICE_PIVOT_ORDER)


def _with_caveat(reason: str, case: GeneratedCase) -> str:
    return f"{reason} (expected for this case: {case.caveat})" if case.caveat else reason
