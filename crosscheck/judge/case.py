"""Judge a case once both routes have answered: solver against SPICE, hand values, limits, baseline.

``run`` (cases from files and the command line) and ``fuzz`` (generated cases) both judge here, so
a case is judged the same way whichever door it came in by.
"""

from __future__ import annotations

from dataclasses import replace
from typing import TYPE_CHECKING

from crosscheck.judge.compare import EngineAnswer, compare_point, spice_answer
from crosscheck.judge.expectations import check_expectations
from crosscheck.judge.hazards import assess_network
from crosscheck.judge.limits import check_limits
from crosscheck.judge.reading import judge_reading
from crosscheck.judge.records import ExpectationCheck, LimitCheck, PointCheck
from crosscheck.judge.result import CaseResult, case_verdict
from crosscheck.model.network import Network
from crosscheck.vocabulary import Verdict

if TYPE_CHECKING:  # start-up time: the baseline's reader and writer load only when a baseline is held against a case
    from crosscheck.judge.baseline import Baseline


def judged(
    result: CaseResult, network: Network | None, *, compare: bool = True, baseline: Baseline | None = None
) -> CaseResult:
    """``result`` with every judgement made and its verdict; ``error`` when the own route gave nothing.

    ``compare``: hold the own route against the reference (off for an own-only run). ``network`` lets
    the slip finder re-solve variants of the case (None: it reads the case's netlist again).
    """
    if result.own is None:
        return replace(result, verdict=Verdict.ERROR)
    expectations: tuple[ExpectationCheck, ...] = ()
    limits: tuple[LimitCheck, ...] = ()
    if result.case is not None:
        expectations = tuple(check_expectations(result.case, result.own, network))
        limits = tuple(check_limits(result.case, result.own))
    points: tuple[PointCheck, ...] = ()
    reading = None
    if compare:
        refs: list[EngineAnswer | None] = (
            [spice_answer(p) for p in result.spice.points] if result.spice is not None else [None] * len(result.own)
        )
        points = tuple(compare_point(o, r, result.tolerance, result.spice_note) for o, r in zip(result.own, refs))
        if result.spice is not None:
            reading = judge_reading(result.spice.reading, result.own, result.tolerance)
    hazard = assess_network(network, result.own, result.sources) if network is not None else None
    new = replace(
        result, expectations=expectations, limits=limits, points=points, assessed_hazard=hazard, reading=reading
    )
    if baseline is not None:
        new = with_baseline(new, baseline)
    return replace(new, verdict=case_verdict(new))


def with_baseline(result: CaseResult, baseline: Baseline) -> CaseResult:
    """``result`` held against a stored baseline: drift checks added and the verdict made again."""
    if result.own is None or result.error is not None:
        return result
    from crosscheck.judge.baseline import compare_with_baseline  # start-up time: only with a baseline

    drift, note = compare_with_baseline(result, baseline)
    new = replace(result, drift=tuple(drift), baseline_note=note)
    return replace(new, verdict=case_verdict(new))
