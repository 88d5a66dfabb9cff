"""The one result type: everything known about a case after both routes ran and it was judged.

A ``CaseResult`` is immutable and flows unchanged from judging to every report, the pytest plugin
and the fuzzer; a later judgement (a baseline held against it) makes a new one with ``replace``.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property
from typing import TYPE_CHECKING, Any

from crosscheck.judge.hazards import Hazard, assess_case
from crosscheck.judge.records import DriftCheck, ExpectationCheck, LimitCheck, PointCheck, ReadingCheck
from crosscheck.model.cases import Case
from crosscheck.model.reading import ReadWarning
from crosscheck.model.tolerance import SOLVER_VS_SPICE, Tolerance
from crosscheck.own.equivalent import Equivalent
from crosscheck.spice.results import SpiceResult
from crosscheck.vocabulary import Verdict, worst

if TYPE_CHECKING:  # start-up time: a one-port case loads neither the matrices' nor the spread's judgement
    from crosscheck.judge.multiport import MultiportResult
    from crosscheck.judge.spread import SpreadResult


@dataclass(frozen=True)
class CaseResult:
    """One case: its identity, both routes' answers (or why not), every judgement and the verdict."""

    name: str
    title: str
    port: tuple[str, str]
    freqs_hz: tuple[float, ...]
    tolerance: Tolerance
    sources: str = "peak"
    own: tuple[Equivalent, ...] | None = None
    spice: SpiceResult | None = None
    spice_note: str = ""
    points: tuple[PointCheck, ...] = ()
    error: str | None = None
    verdict: Verdict = Verdict.PASS
    elapsed_own_s: float = 0.0
    elapsed_spice_s: float = 0.0
    case: Case | None = None
    expectations: tuple[ExpectationCheck, ...] = ()
    limits: tuple[LimitCheck, ...] = ()
    drift: tuple[DriftCheck, ...] = ()
    baseline_note: str = ""  # e.g. the case is not in the baseline: a note, never a verdict
    #: The hazard judgement made where the network is at hand (``judge.hazards.assess_network``); None: made on
    #: first use of ``hazard``, reading the case's netlist again.
    assessed_hazard: Hazard | None = None
    #: What reading the netlist said besides the network (``model.reading.Reading``): notes (something read
    #: that has no effect on an AC answer, each naming file and line) and warnings (traps, in line order).
    read_notes: tuple[str, ...] = ()
    warnings: tuple[ReadWarning, ...] = ()
    #: ngspice's reading of the user's own lines against the own route (``judge.reading``); None when the
    #: network was not read from text (the fuzzer's) or ngspice was not run.
    reading: ReadingCheck | None = None
    #: A case with several ports (``judge.multiport``): both routes' matrices and their judgements; ``own`` is
    #: then empty and ``port`` the first port. None: the usual one-port case.
    multiport: MultiportResult | None = None
    #: Component spread (``judge.spread``): the own route's sensitivities, worst case and Monte Carlo, ngspice's
    #: confirmations and the limits over the spread; None when the case states no ``[[vary]]``/``--vary``.
    spread: SpreadResult | None = None

    @cached_property
    def hazard(self) -> Hazard | None:
        """Its sources and prospective current against the hazard limits (``judge.hazards``);
        None when the own route gave nothing. ``assessed_hazard`` when judging set it, else assessed on first
        use and kept: every report reads it."""
        if self.assessed_hazard is not None:
            return self.assessed_hazard
        return assess_case(self.case, self.own, self.sources)

    @property
    def excitation(self) -> str:
        """What drove the network: "ac" (the sources' AC values) or "dc" (their DC values, at 0 Hz); "ac"
        without a case (the fuzzer's networks)."""
        return self.case.excitation if self.case is not None else "ac"

    @property
    def stated_caution(self) -> str:
        """The case file's own ``caution`` text (untrusted user text), or ""."""
        return self.case.caution if self.case is not None else ""

    @property
    def accepted_codes(self) -> tuple[str, ...]:
        """The warning codes the case file acknowledges (``accept_warnings``)."""
        return self.case.accept_warnings if self.case is not None else ()

    @property
    def open_warnings(self) -> tuple[ReadWarning, ...]:
        """The warnings nobody acknowledged: every report shows them, and ``--strict`` makes them errors."""
        return tuple(w for w in self.warnings if w.code not in self.accepted_codes)

    @property
    def accepted_warnings(self) -> tuple[ReadWarning, ...]:
        """The warnings the case file acknowledges: silent in reports (JSON keeps them, marked accepted)."""
        return tuple(w for w in self.warnings if w.code in self.accepted_codes)

    @property
    def explanation(self) -> str:
        """The first explanation among the judgements that carry the case's verdict."""
        if self.error:
            return self.error
        parts: list[Any] = [  # every judgement: each has a verdict and an explanation
            *([self.reading] if self.reading is not None else []),
            *self.points,
            *self.expectations,
            *self.limits,
            *self.drift,
            *(self.multiport.judgements if self.multiport is not None else ()),
            *(self.spread.limits if self.spread is not None else ()),
            *(self.spread.checks if self.spread is not None else ()),
        ]
        notes = [p.explanation for p in parts if p.verdict == self.verdict and p.explanation]
        return notes[0] if notes else ""


def case_verdict(result: CaseResult) -> Verdict:
    """The worst of solver-vs-SPICE, hand-calculated expectations, design limits and baseline drift;
    ``error`` whenever an engine crashed on the case."""
    if result.error:
        return Verdict.ERROR
    return worst(
        [
            *(p.verdict for p in result.points),
            *(e.verdict for e in result.expectations),
            *(lim.verdict for lim in result.limits),
            *(d.verdict for d in result.drift),
            *([result.reading.verdict] if result.reading is not None else []),
            *(result.multiport.verdicts if result.multiport is not None else []),
            *(result.spread.verdicts if result.spread is not None else []),
        ]
    )


def error_result(name: str, message: str, case: Case | None = None) -> CaseResult:
    """A case that could not be run: its input is invalid, or its worker was lost."""
    if case is None:
        return CaseResult(name, name, ("?", "?"), (), SOLVER_VS_SPICE, error=message, verdict=Verdict.ERROR)
    return CaseResult(
        case.name,
        case.title,
        case.port,
        case.freqs_hz,
        case.tolerance,
        case.sources,
        error=message,
        verdict=Verdict.ERROR,
        case=case,
    )
