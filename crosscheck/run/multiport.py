"""A multi-port case end to end: the own route's matrices here, ngspice's from the pool, then the judgement.

``run.check`` hands a case here when it has several ports (``Case.multiport``); the result is the usual
``CaseResult`` with ``own`` empty, ``port`` the first port and everything multi-port in ``multiport``.
"""

from __future__ import annotations

import time
from concurrent.futures import Future
from dataclasses import replace

import numpy as np

from crosscheck.errors import CrosscheckError, EngineUnavailableError
from crosscheck.judge.multiport import MultiportResult, judge_multiport
from crosscheck.judge.result import CaseResult, case_verdict
from crosscheck.model.budget import Budget
from crosscheck.model.network import Network
from crosscheck.model.port_spec import MultiportSpec
from crosscheck.own.multiport import reduce_ports
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
        with np.errstate(all="ignore"):
            limits = None if budget is None else budget.for_elements(len(network.elements))
            own = reduce_ports(network, spec.ports, head.freqs_hz, budget=limits)
    except CrosscheckError as exc:
        return replace(head, error=f"own solver: {exc}", verdict=Verdict.ERROR)
    except (ArithmeticError, ValueError, np.linalg.LinAlgError) as exc:
        message = f"own solver: the arithmetic failed ({type(exc).__name__}: {str(exc)[:200]})"
        return replace(head, error=message, verdict=Verdict.ERROR)
    elapsed_own = time.perf_counter() - started
    spice: MultiportSpiceResult | None = None
    note, error = "", None
    if future is not None:
        try:
            spice = future.result()
        except EngineUnavailableError as exc:
            note = str(exc)
        except CrosscheckError as exc:
            note = str(exc)
            error = f"ngspice: {exc}"
    elif engine in ("spice", "both"):
        note = "ngspice was not run"
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
