"""Run cases through both routes and the judgement; one bad case never stops the others.

A case is (network text, port, frequencies, tolerance). The own solver runs in this process (it
takes milliseconds); ngspice runs in the isolated worker pool, all frequencies of a case in as few
analyses as correctness allows.
"""

from __future__ import annotations

import time
from collections.abc import Callable, Iterable, Sequence
from concurrent.futures import Future
from dataclasses import replace
from pathlib import Path
from typing import TYPE_CHECKING

from crosscheck.errors import CrosscheckError, EngineUnavailableError, NetworkError
from crosscheck.judge.case import judged
from crosscheck.judge.result import CaseResult, error_result
from crosscheck.model.budget import Budget
from crosscheck.model.cases import Case, accepted_warnings
from crosscheck.model.frequencies import frequency_list
from crosscheck.model.netlist import read_netlist_reading
from crosscheck.model.network import Network, Port, check_excitation
from crosscheck.model.reading import Reading
from crosscheck.model.tolerance import SOLVER_VS_SPICE, Tolerance
from crosscheck.own.equivalent import thevenin
from crosscheck.run.routes import ARITHMETIC_FAILURES, arithmetic_error, quiet_numpy, spice_answer
from crosscheck.spice.results import SpiceResult
from crosscheck.vocabulary import Verdict

if TYPE_CHECKING:  # start-up time: an own-route run loads neither the ngspice pool nor the baseline
    from crosscheck.judge.baseline import Baseline
    from crosscheck.spice.workers import SpicePool

ENGINES = ("own", "spice", "both")


def load_network(case: Case) -> tuple[Network, Port]:
    """Parse and validate the case's netlist; errors carry file and line (``load_network_reading`` without
    the reading)."""
    network, port, _reading = load_network_reading(case)
    return network, port


def load_network_reading(case: Case) -> tuple[Network, Port, Reading]:
    """The case's netlist read and validated, with what reading it said (notes and warnings).

    ``read_netlist_reading`` validates the network with the port (elements, loops, connectivity, the
    port's nodes), so nothing is checked twice here. The network carries the case's excitation, and the
    warnings are those that concern it (``no-dc-source`` under DC, ``no-ac-source`` under AC).
    """
    ports = [p.port for p in case.multiport.ports] if case.multiport is not None else [Port(*case.port)]
    first: NetworkError | None = None
    for port in ports:  # several ports: validated with the first that a ground-less part may hold
        try:
            network, reading = read_netlist_reading(
                case.netlist_text,
                file=case.netlist_file,
                allow_negative=case.allow_negative,
                port=port,
                excitation=case.excitation,
                limits=case.read_limits,
            )
            return network, port, reading
        except NetworkError as exc:
            first = first or exc
    assert first is not None
    raise first


def run_cases(
    cases: Sequence[Case | tuple[str, CrosscheckError]],
    engine: str = "both",
    pool: SpicePool | None = None,
    on_done: Callable[[CaseResult], None] | None = None,
    baseline: Baseline | None = None,
    budget: Budget | None = None,
) -> list[CaseResult]:
    """Own solver now, ngspice in the pool in parallel; results in the order given.

    An item may be ``(name, error)`` for a case file that could not be read: it becomes an
    ``error`` result and the rest go on. With a ``baseline`` each case's own equivalents are also
    held against the stored ones, and moving beyond tolerance is ``drift``. ``budget`` bounds the own
    route's time and memory per case (None: no limit; the pool holds ngspice to its own limits).
    """
    if engine not in ENGINES:
        raise ValueError(f"engine must be one of {ENGINES} (got {engine!r})")
    if engine in ("spice", "both") and pool is None:
        raise ValueError("a SpicePool is needed to run the spice engine")
    staged: list[tuple[CaseResult, Network | None, Future | None]] = []
    for item in cases:
        if isinstance(item, tuple):
            name, exc = item
            staged.append((error_result(name, str(exc)), None, None))
            continue
        try:
            staged.append(_stage(item, engine, pool))
        except EngineUnavailableError:
            raise
        except CrosscheckError as exc:
            staged.append((error_result(item.name, str(exc), item), None, None))
        except Exception as exc:  # a bug met on this input: this case's error, never the run's end
            message = unexpected(item.name, "reading the netlist", exc)
            staged.append((error_result(item.name, message, item), None, None))

    out: list[CaseResult] = []
    for head, parsed, future in staged:
        try:
            result = head if parsed is None else _finish(head, parsed, future, engine, baseline, budget, pool)
        except Exception as exc:  # a bug met on this input: this case's error, never the run's end
            result = error_result(head.name, unexpected(head.name, "checking the case", exc), head.case)
        if on_done is not None:
            on_done(result)
        out.append(result)
    return out


def _stage(item: Case, engine: str, pool: SpicePool | None) -> tuple[CaseResult, Network, Future | None]:
    """The case's network read, its result's head, and its ngspice task submitted (when asked for)."""
    network, port, reading = load_network_reading(item)
    first = Port(*item.port)  # the validating port of a multi-port case may be another
    head = CaseResult(
        item.name,
        item.title if item.title else network.title,
        (first.a, first.b),
        item.freqs_hz,
        item.tolerance,
        item.sources,
        case=item,
        read_notes=reading.notes,
        warnings=reading.warnings,
    )
    ports = [p.port for p in item.multiport.ports] if item.multiport is not None else []  # several: run.multiport
    future = pool.submit(network, port, item.freqs_hz, ports=ports) if pool is not None and engine != "own" else None
    return head, network, future


def unexpected(name: str, stage: str, exc: Exception) -> str:
    """The message for an exception crosscheck did not expect: what it was, where, and to report it."""
    text = str(exc)
    text = text if len(text) <= 300 else text[:300] + "…"
    return (
        f"{name}: unexpected {type(exc).__name__} while {stage}: {text}. This is a crosscheck bug: "
        "please report it with this case; the other cases went on"
    )


def _finish(
    head: CaseResult,
    network: Network,
    future: Future | None,
    engine: str,
    baseline: Baseline | None,
    budget: Budget | None = None,
    pool: SpicePool | None = None,
) -> CaseResult:
    """Both routes' answers for one case, then its judgement (and its spread's, when it states one)."""
    if head.case is not None and head.case.multiport is not None:
        from crosscheck.run.multiport import finish_multiport  # start-up time: only for a multi-port case

        return finish_multiport(head, head.case.multiport, network, future, engine, budget)
    started = time.perf_counter()
    own, error = None, None
    try:
        with quiet_numpy() as caught:
            limits = None if budget is None else budget.for_elements(len(network.elements))  # the size rule
            own = tuple(thevenin(network, Port(*head.port), head.freqs_hz, budget=limits))
    except CrosscheckError as exc:
        error = f"own solver: {exc}"
    except ARITHMETIC_FAILURES as exc:
        error = arithmetic_error(exc, caught)
    elapsed_own = time.perf_counter() - started
    spice: SpiceResult | None
    spice, spice_note, spice_error = spice_answer(future, engine)
    error = error or spice_error
    result = replace(
        head,
        own=own,
        spice=spice,
        spice_note=spice_note,
        error=error,
        elapsed_own_s=elapsed_own,
        elapsed_spice_s=spice.elapsed_s if spice is not None else 0.0,
    )
    with quiet_numpy():
        result = judged(result, network, compare=engine != "own", baseline=baseline)
        if result.case is None or result.case.spread is None:
            return result
        from crosscheck.run.spread import with_spread  # start-up time: only for a case with a spread

        return with_spread(result, network, pool, engine)


def case_from_netlist(
    path: str,
    text: str,
    port: tuple[str, str],
    freqs: Iterable[float],
    tolerance: Tolerance = SOLVER_VS_SPICE,
    allow_negative: bool = False,
    sources: str = "peak",
    accept_warnings: Iterable[str] = (),
    excitation: str = "ac",
) -> Case:
    """A case for a bare netlist named on the command line with its port and frequencies; ``accept_warnings``
    are the warning codes acknowledged for it (``--accept-warning``), checked as a case file's are.
    ``excitation`` "dc": the sources' DC values, at 0 Hz only (no frequencies given means 0 Hz)."""
    freqs = list(freqs)
    freqs_hz = frequency_list(freqs if freqs or excitation != "dc" else [0.0], where=f"{path}: frequencies")
    check_excitation(excitation, freqs_hz, f"{path}: excitation")
    return Case(
        path=Path(path),
        title="",
        netlist_text=text,
        netlist_file=path,
        port=port,
        freqs_hz=freqs_hz,
        sources=sources,
        excitation=excitation,
        tolerance=tolerance,
        allow_negative=allow_negative,
        accept_warnings=accepted_warnings(list(accept_warnings), where=f"{path}: accepted warnings"),
    )


def held_strictly(result: CaseResult) -> CaseResult:
    """``result`` under ``--strict``: any warning its case does not acknowledge makes it an ``error``.

    The answers, judgements and warnings stay as they were; only ``error`` (which names each warning and
    both ways out: fix the netlist, or acknowledge the code) and the verdict change. A result without an
    unacknowledged warning comes back unchanged.
    """
    found = result.open_warnings
    if not found:
        return result
    codes = ", ".join(dict.fromkeys(f'"{w.code}"' for w in found))
    words = "; ".join(str(w) for w in found)
    message = (
        f"--strict: {len(found)} unacknowledged reading warning(s): {words}. Fix the netlist, or, when the "
        f"netlist is meant as written, acknowledge it: accept_warnings = [{codes}] in the case file "
        "(--accept-warning CODE for a netlist named on the command line)"
    )
    error = f"{result.error}; {message}" if result.error else message
    return replace(result, error=error, verdict=Verdict.ERROR)
