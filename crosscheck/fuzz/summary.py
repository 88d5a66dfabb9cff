"""The records of a fuzz run: its options, its tallies, and the shrunk failures it found."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from crosscheck.fuzz.faults import OwnRoute, faulty_route, faulty_stamps
from crosscheck.fuzz.generate import Knobs, case_seed
from crosscheck.fuzz.judging import CaseOutcome
from crosscheck.fuzz.shrink import ShrinkResult
from crosscheck.model.tolerance import SOLVER_VS_SPICE, Tolerance
from crosscheck.own.equivalent import thevenin
from crosscheck.vocabulary import COMPARED, Verdict

PERCENTILES = (50.0, 90.0, 99.0, 99.9)
#: The statuses a fuzz case can end in (no drift: a fuzz case has no baseline).
STATUSES = (Verdict.PASS, Verdict.FAIL, Verdict.UNAVAILABLE, Verdict.ERROR)


@dataclass(frozen=True)
class FuzzOptions:
    """One fuzz run. ``case_seeds`` (if given) replaces ``count`` and ``seed``: exactly those cases run."""

    count: int = 100
    seed: int = 0
    knobs: Knobs = Knobs()
    workers: int | None = None
    out: Path | None = None
    shrink: bool = True
    shrink_budget: int = 200
    stop_after_failures: int | None = None  # stop once this many unexplained failures are seen
    case_seeds: tuple[int, ...] = ()
    tolerance: Tolerance = SOLVER_VS_SPICE
    timeout_s: float = 60.0
    #: Deliberate bugs in the own route, by name (``fuzz.faults.FAULTS``): for measuring what the fuzzer
    #: catches. The fuzzer passes broken stamps to the own route; no engine reads a switch.
    faults: tuple[str, ...] = ()

    def __post_init__(self) -> None:
        if self.count < 0 or self.seed < 0:
            raise ValueError(f"count and seed must be >= 0 (got count {self.count}, seed {self.seed})")
        if any(s < 0 for s in self.case_seeds):
            raise ValueError(f"case seeds must be >= 0 (got {self.case_seeds})")
        if self.workers is not None and self.workers < 1:
            raise ValueError(f"workers must be at least 1 (got {self.workers})")
        if self.faults:
            faulty_stamps(*self.faults)  # refuses unknown names (UnknownFaultError, a ValueError)

    def own_route(self) -> OwnRoute:
        """The own route this run holds against ngspice: ``thevenin``, or one broken on purpose."""
        return faulty_route(*self.faults) if self.faults else thevenin

    def seeds(self) -> list[int]:
        return list(self.case_seeds) if self.case_seeds else [case_seed(self.seed, i) for i in range(self.count)]


@dataclass(frozen=True)
class Reproducer:
    """A shrunk failure and the files written for it."""

    seed: int
    shrunk: ShrinkResult
    outcome: CaseOutcome
    files: tuple[str, ...] = ()


@dataclass
class FuzzSummary:
    """A run's tallies: statuses, explained ones, the judged errors per quantity, and every problem case.

    Passing cases are counted, not kept; problems and explained cases keep both engines' numbers.
    """

    options: FuzzOptions
    faults: tuple[str, ...]
    counts: dict[str, int] = field(default_factory=lambda: dict.fromkeys(STATUSES, 0))
    explained: dict[str, int] = field(default_factory=lambda: {"fail": 0, "unavailable": 0})
    errors: dict[str, list[float]] = field(default_factory=lambda: {q: [] for q in COMPARED})
    rel_errors: dict[str, list[float]] = field(default_factory=lambda: {q: [] for q in COMPARED})
    worst: dict[str, tuple[float, int, float]] = field(default_factory=dict)  # q -> (err, seed, freq)
    problems: list[CaseOutcome] = field(default_factory=list)
    explained_cases: list[CaseOutcome] = field(default_factory=list)
    reproducers: list[Reproducer] = field(default_factory=list)
    cases_run: int = 0
    first_problem_at: int | None = None  # how many cases it took to meet the first problem
    stopped_early: bool = False
    elapsed_s: float = 0.0
    own_s: float = 0.0
    shrink_s: float = 0.0
    ngspice_version: str = ""
    workers: int = 0

    @property
    def rate(self) -> float:
        """Cases per second through both engines (shrinking not counted)."""
        return self.cases_run / self.elapsed_s if self.elapsed_s > 0 else 0.0

    def percentiles(self, quantity: str, relative: bool = False) -> dict[str, float]:
        data = np.asarray((self.rel_errors if relative else self.errors)[quantity], dtype=float)
        data = data[np.isfinite(data)]
        if not data.size:
            return {}
        out = {f"p{p:g}": float(np.percentile(data, p)) for p in PERCENTILES}
        out["max"] = float(data.max())
        return out

    def verdicts(self) -> list[str]:
        """One verdict per case for the exit code: explained failures and unavailabilities count as passes."""
        unexplained = [o.status for o in self.problems]
        return unexplained + ["pass"] * (self.cases_run - len(unexplained))
