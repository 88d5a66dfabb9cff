"""A multi-port case end to end: the own route's matrices here, ngspice's from the pool, then the judgement.

``run.check`` hands a case here when it has several ports (``Case.multiport``); the result is the usual
``CaseResult`` with ``own`` empty, ``port`` the first port and everything multi-port in ``multiport``.
"""

from __future__ import annotations

import time
from concurrent.futures import Future
from dataclasses import replace

import numpy as np

from crosscheck.errors import CrosscheckError
from crosscheck.judge.multiport import MultiportResult, judge_multiport
from crosscheck.judge.result import CaseResult, case_verdict
from crosscheck.model.budget import Budget
from crosscheck.model.network import Network
from crosscheck.model.port_spec import MultiportSpec
from crosscheck.own.multiport import reduce_ports
from crosscheck.run.routes import ARITHMETIC_FAILURES, arithmetic_error, quiet_numpy, spice_answer
from crosscheck.spice.multiport import MultiportSpiceResult
from crosscheck.spice.results import SpiceResult
from crosscheck.vocabulary import Verdict


def finish_multiport(
    head: CaseResult,
    spec: MultiportSpec,
    network: Network,
    future: Future | None,
    engine: str,
    budget: Budget | None = None,
) -> CaseResult:
    """Both routes' matrices for one multi-port case, judged; an own-route failure is the case's error."""
    started = time.perf_counter()
    try:
        with quiet_numpy() as caught:
            limits = None if budget is None else budget.for_elements(len(network.elements))
            own = reduce_ports(network, spec.ports, head.freqs_hz, budget=limits)
    except CrosscheckError as exc:
        return replace(head, error=f"own solver: {exc}", verdict=Verdict.ERROR)
    except ARITHMETIC_FAILURES as exc:
        return replace(head, error=arithmetic_error(exc, caught), verdict=Verdict.ERROR)
    elapsed_own = time.perf_counter() - started
    spice: MultiportSpiceResult | None
    spice, note, error = spice_answer(future, engine)
    part = MultiportResult(
        port_names=tuple(p.name for p in spec.ports),
        port_nodes=tuple((p.port.a, p.port.b) for p in spec.ports),
        own=own,
        spice=spice.points if spice is not None else None,
        spice_note=note if spice is None else "; ".join(spice.notes),
        ngspice_version=spice.ngspice_version if spice is not None else "",
    )
    with np.errstate(all="ignore"):
        part = judge_multiport(part, spec, head.tolerance, compare=engine != "own")
    # ngspice's version, strategy, notes and decks where every report looks for them; its points are in ``multiport``.
    summary = None if spice is None else SpiceResult((), spice.ngspice_version, spice.strategy, spice.elapsed_s,
                                                     spice.notes, spice.decks)  # fmt: skip
    result = replace(
        head,
        own=(),
        spice=summary,
        multiport=part,
        spice_note=note,
        error=error,
        elapsed_own_s=elapsed_own,
        elapsed_spice_s=spice.elapsed_s if spice is not None else 0.0,
    )
    return replace(result, verdict=case_verdict(result))
