"""Run cases through both engines and the comparison; one bad case never stops the others.

A case is (network text, port, frequencies, tolerance). The own solver runs in
this process (it takes milliseconds); ngspice runs in the isolated worker pool,
all frequencies of a case in as few analyses as correctness allows.
"""

from __future__ import annotations

import time
from concurrent.futures import Future
from dataclasses import dataclass, field
from typing import Callable, Iterable, Sequence

from crosscheck.model.cases import Case
from crosscheck.judge.compare import EngineAnswer, PointCheck, compare_point, worst
from crosscheck.own.equivalent import Equivalent, thevenin
from crosscheck.errors import CrosscheckError, EngineUnavailableError
from crosscheck.model.netlist import read_netlist
from crosscheck.model.network import Network, Port
from crosscheck.judge.expectations import check_expectations
from crosscheck.judge.records import DriftCheck, ExpectationCheck, LimitCheck
from crosscheck.judge.limits import check_limits
from crosscheck.model.tolerance import SOLVER_VS_SPICE, Tolerance

ENGINES = ("own", "spice", "both")


@dataclass
class CaseResult:
    """Everything known about one case after it ran (or failed to)."""

    name: str
    title: str
    port: tuple[str, str]
    freqs_hz: tuple[float, ...]
    tolerance: Tolerance
    sources: str = "peak"
    own: list[Equivalent] | None = None
    spice: object | None = None  # reference.SpiceResult
    spice_note: str = ""
    points: list[PointCheck] = field(default_factory=list)
    error: str | None = None
    verdict: str = "pass"
    elapsed_own_s: float = 0.0
    elapsed_spice_s: float = 0.0
    case: Case | None = None
    expectations: list[ExpectationCheck] = field(default_factory=list)
    limits: list[LimitCheck] = field(default_factory=list)
    drift: list[DriftCheck] = field(default_factory=list)
    baseline_note: str = ""  # e.g. the case is not in the baseline: a note, never a verdict
    extra: dict = field(default_factory=dict)

    @property
    def explanation(self) -> str:
        if self.error:
            return self.error
        parts = [*self.points, *self.expectations, *self.limits, *self.drift]
        notes = [p.explanation for p in parts if p.verdict == self.verdict and p.explanation]
        return notes[0] if notes else ""


def spice_answers(result: object) -> list[EngineAnswer]:
    """ngspice's points as engine answers the comparer reads."""
    return [EngineAnswer(p.requested_hz, p.vth, p.zth, p.isc, "; ".join(p.notes)) for p in result.points]


def load_network(case: Case) -> tuple[Network, Port]:
    """Parse and validate the case's netlist; errors carry file and line.

    ``read_netlist`` validates the network with the port (elements, loops, connectivity, the port's
    nodes), so nothing is checked twice here.
    """
    port = Port(*case.port)
    network = read_netlist(case.netlist_text, file=case.netlist_file, allow_negative=case.allow_negative,
                           port=port)
    return network, port


def _error_result(case: Case, message: str) -> CaseResult:
    return CaseResult(case.name, case.title, case.port, case.freqs_hz, case.tolerance, case.sources,
                      error=message, verdict="error", case=case)


def run_cases(cases: Sequence[Case | tuple[str, CrosscheckError]], engine: str = "both", pool=None,
              on_done: Callable[[CaseResult], None] | None = None, baseline=None) -> list[CaseResult]:
    """Own solver now, ngspice in the pool in parallel; results in the order given.

    An item may be ``(name, error)`` for a case file that could not be read: it becomes an
    ``error`` result and the rest go on. With a ``baseline`` (``baseline.Baseline``) each case's own
    equivalents are also held against the stored ones, and moving beyond tolerance is ``drift``.
    """
    if engine not in ENGINES:
        raise ValueError(f"engine must be one of {ENGINES} (got {engine!r})")
    staged: list[tuple[CaseResult, Network | None, Port | None, Future | None]] = []
    for item in cases:
        if isinstance(item, tuple):
            name, exc = item
            result = CaseResult(name, name, ("?", "?"), (), SOLVER_VS_SPICE, error=str(exc), verdict="error")
            staged.append((result, None, None, None))
            continue
        try:
            network, port = load_network(item)
        except CrosscheckError as exc:
            staged.append((_error_result(item, str(exc)), None, None, None))
            continue
        result = CaseResult(item.name, item.title if item.title else network.title, (port.a, port.b),
                            item.freqs_hz, item.tolerance, item.sources, case=item)
        future = None
        if engine in ("spice", "both") and pool is not None:
            future = pool.submit(network, port, item.freqs_hz)
        staged.append((result, network, port, future))
    if engine in ("spice", "both") and pool is None:
        raise ValueError("a SpicePool is needed to run the spice engine")

    out: list[CaseResult] = []
    for result, network, port, future in staged:
        if network is not None:
            _finish(result, network, port, future, engine, baseline)
        if on_done is not None:
            on_done(result)
        out.append(result)
    return out


def _finish(result: CaseResult, network: Network, port: Port, future: Future | None, engine: str,
            baseline=None) -> None:
    started = time.perf_counter()
    try:
        result.own = thevenin(network, port, result.freqs_hz)
    except CrosscheckError as exc:
        result.error = f"own solver: {exc}"
    result.elapsed_own_s = time.perf_counter() - started
    answers: list[EngineAnswer | None] | None = None
    if future is not None:
        try:
            spice = future.result()
            result.spice = spice
            result.elapsed_spice_s = spice.elapsed_s
            answers = spice_answers(spice)
        except EngineUnavailableError as exc:
            result.spice_note = str(exc)
        except CrosscheckError as exc:
            result.spice_note = str(exc)
            result.error = result.error or f"ngspice: {exc}"
    elif engine in ("spice", "both"):
        result.spice_note = "ngspice was not run"
    if result.own is None:
        result.verdict = "error"
        return
    if result.case is not None:
        result.expectations = check_expectations(result.case, result.own, network)
        result.limits = check_limits(result.case, result.own)
    if baseline is not None:
        from crosscheck.judge.baseline import compare_with_baseline

        result.drift, result.baseline_note = compare_with_baseline(result, baseline)
    if engine != "own":
        refs = answers if answers is not None else [None] * len(result.own)
        result.points = [compare_point(o, r, result.tolerance, result.spice_note) for o, r in zip(result.own, refs)]
    result.verdict = case_verdict(result)


def case_verdict(result: CaseResult) -> str:
    """The worst of solver-vs-SPICE, hand-calculated expectations, design limits and baseline drift;
    ``error`` whenever an engine crashed on the case."""
    if result.error:
        return "error"
    return worst([*(p.verdict for p in result.points), *(e.verdict for e in result.expectations),
                  *(lim.verdict for lim in result.limits), *(d.verdict for d in result.drift)])


def case_from_netlist(path: str, text: str, port: tuple[str, str], freqs: Iterable[float],
                      tolerance: Tolerance = SOLVER_VS_SPICE, allow_negative: bool = False,
                      sources: str = "peak") -> Case:
    """A case for a bare netlist named on the command line with its port and frequencies."""
    from pathlib import Path

    return Case(path=Path(path), title="", netlist_text=text, netlist_file=path, port=port,
                freqs_hz=tuple(sorted(set(float(f) for f in freqs))), sources=sources, tolerance=tolerance,
                allow_negative=allow_negative)
