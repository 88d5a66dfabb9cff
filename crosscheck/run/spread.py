"""Run a case's component spread: the own route's sensitivities, worst case and Monte Carlo, ngspice's
confirmations in the pool, and their judgement, added to the case's result.

Runs after the nominal judgement, only for a case that states a spread (``[[vary]]`` or ``--vary``) and whose
own route answered; a spread that cannot be applied (a pattern that matches nothing) is the case's error.
"""

from __future__ import annotations

import time
from dataclasses import replace

import numpy as np

from crosscheck.errors import CrosscheckError, EngineUnavailableError
from crosscheck.judge.result import CaseResult, case_verdict
from crosscheck.judge.spread import SampleValues, SpreadResult, judge_spread
from crosscheck.model.network import Network, Port
from crosscheck.model.vary import SpreadSpec, resolve
from crosscheck.own.spread import draw, own_spread, values_at
from crosscheck.own.spread_matrix import VariedSystem
from crosscheck.own.spread_solve import port_values
from crosscheck.spice.spread import SpiceSpread, spice_spread
from crosscheck.spice.workers import SpicePool
from crosscheck.vocabulary import Verdict


def figure_frequency(spread: SpreadResult) -> int:
    """The point the report's figure shows: where a limit over the spread fails, else where |V_th| spreads
    most (relative), else the first."""
    freqs = [p.freq_hz for p in spread.points]
    failing = next((lim.spread.failing_hz for lim in spread.limits if lim.spread.failing_hz is not None), None)
    if failing is not None:
        return min(range(len(freqs)), key=lambda i: abs(freqs[i] - failing))

    def width(i: int) -> float:
        q = spread.points[i].vth
        e = q.worst_case.get("abs") if q is not None else None
        return (e.maximum - e.minimum) / abs(q.nominal) if e is not None and q is not None and q.nominal else 0.0

    return max(range(len(freqs)), key=width) if freqs else 0


def _histogram(network: Network, port: Port, spread: SpreadResult, spec: SpreadSpec) -> SampleValues | None:
    """Every sample at the figure's frequency (one frequency: 1/F of the Monte Carlo's cost), the same seeded
    draw as ``own.spread`` makes."""
    if not spec.samples or not spread.points:
        return None
    i = figure_frequency(spread)
    f = spread.points[i].freq_hz
    parts = spread.own.parts
    values = port_values(
        VariedSystem(network, port, parts), values_at(parts, draw(parts, spec.samples, spec.seed)), np.array([f])
    )
    return SampleValues(f, tuple(complex(z) for z in values[:, 0, 0]), tuple(complex(z) for z in values[:, 0, 1]))


def with_spread(
    result: CaseResult, network: Network, pool: SpicePool | None, engine: str, spec: SpreadSpec | None = None
) -> CaseResult:
    """``result`` with its spread judged (``spec``: the case's own when None); unchanged without a spread."""
    spec = spec if spec is not None else (result.case.spread if result.case is not None else None)
    if spec is None or result.own is None or result.error is not None or engine == "spice":
        return result  # ngspice alone (`reduce --engine spice`) reports its own equivalents only
    port = Port(*result.port)
    limits = result.case.limits if result.case is not None else ()
    started = time.perf_counter()
    try:
        parts = resolve(network, spec)
        own = own_spread(network, port, result.freqs_hz, parts, spec, limits)
    except CrosscheckError as exc:
        return replace(result, error=f"spread: {exc}", verdict=Verdict.ERROR)
    own_s = time.perf_counter() - started
    spice: SpiceSpread | None = None
    note = ""
    if engine == "own" or pool is None:
        note = "ngspice was not run (own route only): the spread is not confirmed"
    else:
        started = time.perf_counter()
        try:
            conditions = [eq.condition for eq in result.own]
            spice = spice_spread(
                pool, network, port, result.freqs_hz, own, conditions, spice_samples=spec.spice_samples
            )
        except EngineUnavailableError as exc:
            note = str(exc)
    spice_s = time.perf_counter() - started if spice is not None else 0.0
    spread = judge_spread(own, spice, result.tolerance, result.own, limits, result.limits, note)
    spread = replace(
        spread, elapsed_own_s=own_s, elapsed_spice_s=spice_s, histogram=_histogram(network, port, spread, spec)
    )
    new = replace(result, spread=spread)
    return replace(new, verdict=case_verdict(new))
