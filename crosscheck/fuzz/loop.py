"""Random networks through both engines and the comparison: does the own solver ever disagree with ngspice?

The own solver runs in this process; ngspice runs in the isolated worker pool. Cases are generated
lazily and submitted a window ahead of the one being judged, so the pool never waits and a long run
holds only the window in memory. Each case is judged on its own:

* ``pass``: every quantity at every frequency within tolerance;
* ``fail``: a quantity outside tolerance. *Explained* when the verdict says why: the comparer finds
  the size fits the matrix condition; or it is within ngspice's own attainable accuracy (``_explain``);
  or the point agrees when ngspice runs that frequency alone (``isolate``). Unexplained otherwise: a
  genuine disagreement;
* ``unavailable``: an engine gave no value (the own solver found the equations singular, or ngspice
  had no answer at a point). *Explained* only when the generator's caveat for the case says why;
* ``error``: an engine crashed, or refused the case outright.

Every unexplained failure (and error) is shrunk (``shrink``) while it still fails the same way, and
the small case is written to ``out`` as a netlist, a case file and both engines' numbers.
"""

from __future__ import annotations

import json
import math
import time
from collections import deque
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Sequence

import numpy as np

from crosscheck.fuzz import faults
from crosscheck.judge.compare import COMPARED, PointCheck, compare_point
from crosscheck.own.equivalent import Equivalent, thevenin
from crosscheck.errors import CrosscheckError, EngineUnavailableError, SingularNetworkError
from crosscheck.fuzz.generate import GeneratedCase, Knobs, case_seed, generate_case, well_posed
from crosscheck.model.netlist_writer import write_netlist
from crosscheck.model.network import Network, Port, floating_reference
from crosscheck.own.solver import MnaSystem
from crosscheck.fuzz.shrink import ShrinkResult, shrink
from crosscheck.model.tolerance import SOLVER_VS_SPICE, Tolerance

#: ngspice's element growth allowance: 1 / pivrel, pivrel's default being 1e-3 (see ``_explain``).
NGSPICE_GROWTH = 1e3
EPS = float(np.finfo(float).eps)
#: Phrases of the comparer's verdict text that say a failure is the size the matrix condition allows.
EXPLAINED_PHRASES = ("ill-conditioned", "fits the matrix condition")
PERCENTILES = (50.0, 90.0, 99.0, 99.9)
STATUSES = ("pass", "fail", "unavailable", "error")


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

    def __post_init__(self) -> None:
        if self.count < 0 or self.seed < 0:
            raise ValueError(f"count and seed must be >= 0 (got count {self.count}, seed {self.seed})")
        if any(s < 0 for s in self.case_seeds):
            raise ValueError(f"case seeds must be >= 0 (got {self.case_seeds})")
        if self.workers is not None and self.workers < 1:
            raise ValueError(f"workers must be at least 1 (got {self.workers})")

    def seeds(self) -> list[int]:
        return list(self.case_seeds) if self.case_seeds else [case_seed(self.seed, i) for i in range(self.count)]


@dataclass(frozen=True)
class CaseOutcome:
    """How one case went: its status, whether something accounts for it, and the engines' numbers."""

    index: int
    case: GeneratedCase
    status: str
    explained: bool
    reason: str
    points: tuple[PointCheck, ...] = ()
    own: tuple[Equivalent, ...] | None = None
    spice: object | None = None  # reference.SpiceResult

    @property
    def problem(self) -> bool:
        """A disagreement or breakage nothing accounts for."""
        return self.status == "error" or (self.status in ("fail", "unavailable") and not self.explained)


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


# --------------------------------------------------------------------------- judging one case


def solve_own(network: Network, port: Port,
              freqs: Sequence[float]) -> tuple[list[Equivalent] | None, CrosscheckError | None]:
    """The own solver's equivalents, or the error it raised (a case's error is data, not an exception)."""
    try:
        return thevenin(network, port, freqs), None
    except CrosscheckError as exc:
        return None, exc


def judge(index: int, case: GeneratedCase, own: Sequence[Equivalent] | None, own_error: CrosscheckError | None,
          spice: object | None, spice_error: CrosscheckError | None, tol: Tolerance) -> CaseOutcome:
    """The outcome of one case from both engines' answers (or errors)."""
    from crosscheck.run.check import spice_answers

    if isinstance(spice_error, EngineUnavailableError):
        raise spice_error  # no ngspice at all: nothing to fuzz against
    if spice_error is not None:
        return CaseOutcome(index, case, "error", False, f"ngspice: {spice_error}", own=_tuple(own))
    if own_error is not None:
        if isinstance(own_error, SingularNetworkError):
            return CaseOutcome(index, case, "unavailable", bool(case.caveat),
                               _with_caveat(f"own solver: {own_error}", case), spice=spice)
        return CaseOutcome(index, case, "error", False, f"own solver: {own_error}", spice=spice)
    assert own is not None and spice is not None
    refs = spice_answers(spice)
    points = tuple(compare_point(o, r, tol) for o, r in zip(own, refs))
    checks = [(p, c) for p in points for c in p.quantities]
    failing = [(p, c) for p, c in checks if c.verdict == "fail"]
    if failing:
        whys = [_explain(case, p, c) for p, c in failing]
        i = max(range(len(failing)), key=lambda j: failing[j][1].err)
        p, c = failing[i]
        reason = (f"at {p.freq_hz:g} Hz: {c.quantity} {whys[i]} (the comparer said: {c.explanation})" if whys[i]
                  else f"at {p.freq_hz:g} Hz: {c.explanation}")
        explained = all(any(x in c.explanation for x in EXPLAINED_PHRASES) or why for (_, c), why in zip(failing, whys))
        return CaseOutcome(index, case, "fail", explained, reason, points, tuple(own), spice)
    missing = [(p, c) for p, c in checks if c.verdict == "unavailable"]
    if missing:
        p, c = missing[0]
        return CaseOutcome(index, case, "unavailable", bool(case.caveat),
                           _with_caveat(f"at {p.freq_hz:g} Hz: {c.explanation}", case), points, tuple(own), spice)
    return CaseOutcome(index, case, "pass", True, "", points, tuple(own), spice)


def _explain(case: GeneratedCase, point: PointCheck, check) -> str:
    """Why a failure the comparer could not explain is still roundoff: ngspice's own attainable accuracy.

    The comparer allows 16·κ·ε times the largest *node voltage* of the solution. ngspice can miss by
    more: it factors with threshold pivoting (Sparse 1.3; ``.options pivrel``, default 1e-3 per the
    ngspice manual's options chapter, from memory), which lets elements grow by up to 1/pivrel per
    step, and the solution's size may sit in branch currents (a port pinned by a voltage source has
    all node voltages 0 while the 1 A test current flows through the source). Returns the reason when
    |Δ| <= NGSPICE_GROWTH·κ·ε·‖x‖∞ over the whole solution (node voltages and branch currents), else "".
    """
    if any(x in check.explanation for x in EXPLAINED_PHRASES) or check.own is None or check.ref is None:
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
    return (f"within ngspice's roundoff: |Δ| = {delta:.3g} <= {NGSPICE_GROWTH:g}·κ·ε·‖x‖∞ = {bound:.3g} "
            f"(κ = {fac.condition:.3g}, ‖x‖∞ = {scale:.3g} over node voltages and branch currents; ngspice pivots "
            "with a relative threshold of 1e-3)")


def isolate(outcome: CaseOutcome, pool, tol: Tolerance) -> CaseOutcome:
    """Rerun each failing frequency alone in ngspice: if every one then agrees, the failure was ngspice's.

    ngspice runs the ``.ac`` cards of one deck one after another and keeps the pivot order it chose
    for the analysis before (it reorders only when a pivot is exactly singular). Where the pivots'
    sizes change a lot with frequency (a tank near resonance), that order can cost ngspice accuracy
    far beyond the matrix condition. Seen with ngspice 39; the own solver factors each frequency afresh.
    """
    from dataclasses import replace

    from crosscheck.run.check import spice_answers

    case = outcome.case
    own = {e.freq_hz: e for e in outcome.own or ()}
    notes = []
    for p in outcome.points:
        failing = [c for c in p.quantities if c.verdict == "fail"]
        if not failing or all(any(x in c.explanation for x in EXPLAINED_PHRASES) for c in failing):
            continue
        alone, error = _result(pool.submit(case.network, case.port, [p.freq_hz]))
        if error is not None or p.freq_hz not in own:
            return outcome
        again = compare_point(own[p.freq_hz], spice_answers(alone)[0], tol)
        if again.verdict != "pass":
            return outcome
        worst = max(failing, key=lambda c: c.err)
        notes.append(f"at {p.freq_hz:g} Hz {worst.quantity} differed by {worst.err:.3g} (judged) with the other "
                     f"frequencies in ngspice's deck and agrees when ngspice runs this frequency alone")
    if not notes:
        return outcome
    reason = ("; ".join(notes) + ": ngspice keeps the pivot order of the analysis it ran before, which lost it "
              "accuracy here (an ngspice limitation, not a modelling difference)")
    return replace(outcome, explained=True, reason=reason)


def _tuple(x):
    return None if x is None else tuple(x)


def _with_caveat(reason: str, case: GeneratedCase) -> str:
    return f"{reason} (expected for this case: {case.caveat})" if case.caveat else reason


# --------------------------------------------------------------------------- the run


def run_fuzz(options: FuzzOptions, on_progress: Callable[[int, int, CaseOutcome], None] | None = None,
             pool=None) -> FuzzSummary:
    """Generate, solve, compare; then shrink and write out what failed. ``pool``: a SpicePool to reuse."""
    from crosscheck.spice.workers import SpicePool

    summary = FuzzSummary(options, tuple(sorted(faults.active)))
    if pool is None:
        with SpicePool(workers=options.workers, timeout_s=options.timeout_s) as own_pool:
            return _run(options, summary, own_pool, on_progress)
    return _run(options, summary, pool, on_progress)


def _run(options: FuzzOptions, summary: FuzzSummary, pool, on_progress) -> FuzzSummary:
    seeds = options.seeds()
    summary.workers = pool.workers
    window = max(16, 8 * pool.workers)
    pending: deque = deque()
    started = time.perf_counter()
    next_index = 0

    def submit_more() -> None:
        nonlocal next_index
        while next_index < len(seeds) and len(pending) < window:
            case = generate_case(seeds[next_index], options.knobs)
            pending.append((next_index, case, pool.submit(case.network, case.port, case.freqs_hz)))
            next_index += 1

    submit_more()
    while pending:
        index, case, future = pending.popleft()
        t0 = time.perf_counter()
        own, own_error = solve_own(case.network, case.port, case.freqs_hz)
        summary.own_s += time.perf_counter() - t0
        spice, spice_error = _result(future)
        outcome = judge(index, case, own, own_error, spice, spice_error, options.tolerance)
        if outcome.status == "fail" and not outcome.explained and len(case.freqs_hz) > 1:
            outcome = isolate(outcome, pool, options.tolerance)
        if note_outcome(summary, outcome, len(seeds), options, on_progress):
            for _, _, f in pending:
                f.cancel()
            pending.clear()
            break
        submit_more()
    summary.elapsed_s = time.perf_counter() - started
    return finish(summary, options, pool)


def note_outcome(summary: FuzzSummary, outcome, total: int, options: FuzzOptions, on_progress) -> bool:
    """Record one case's outcome and report progress; True once ``stop_after_failures`` problems are in."""
    _record(summary, outcome)
    if on_progress is not None:
        on_progress(summary.cases_run, total, outcome)
    limit = options.stop_after_failures
    if limit is not None and len(summary.problems) >= limit:
        summary.stopped_early = summary.cases_run < total
        return True
    return False


def finish(summary: FuzzSummary, options: FuzzOptions, pool=None) -> FuzzSummary:
    """Shrink what failed (on ``pool``, or on a local SpicePool started for it) and write the outputs."""
    from crosscheck.spice.workers import SpicePool

    if options.shrink and summary.problems:
        t0 = time.perf_counter()
        if pool is None:
            with SpicePool(workers=options.workers, timeout_s=options.timeout_s) as local_pool:
                summary.reproducers.extend(_shrink_one(o, options, local_pool) for o in summary.problems)
        else:
            summary.reproducers.extend(_shrink_one(o, options, pool) for o in summary.problems)
        summary.shrink_s = time.perf_counter() - t0
    if options.out is not None:
        write_outputs(summary, options.out)
    return summary


def _result(future) -> tuple[object | None, CrosscheckError | None]:
    try:
        return future.result(), None
    except CrosscheckError as exc:
        return None, exc


def _record(summary: FuzzSummary, outcome: CaseOutcome) -> None:
    summary.cases_run += 1
    summary.counts[outcome.status] += 1
    if outcome.spice is not None and not summary.ngspice_version:
        summary.ngspice_version = getattr(outcome.spice, "ngspice_version", "")
    for p in outcome.points:
        for c in p.quantities:
            if math.isfinite(c.err):
                summary.errors[c.quantity].append(c.err)
                summary.rel_errors[c.quantity].append(c.rel_err)
                if c.err > summary.worst.get(c.quantity, (-1.0, 0, 0.0))[0]:
                    summary.worst[c.quantity] = (c.err, outcome.case.seed, p.freq_hz)
    if outcome.problem:
        summary.problems.append(outcome)
        if summary.first_problem_at is None:
            summary.first_problem_at = summary.cases_run
    elif outcome.status in ("fail", "unavailable"):
        summary.explained[outcome.status] += 1
        summary.explained_cases.append(outcome)


# --------------------------------------------------------------------------- shrinking


def recheck(case: GeneratedCase, network: Network, port: Port, freqs: tuple[float, ...], pool,
            tol: Tolerance, index: int = -1) -> CaseOutcome:
    """Both engines and the judgement for a variant of ``case`` (the shrinker's probe)."""
    from dataclasses import replace

    variant = replace(case, network=network, port=port, freqs_hz=tuple(freqs))
    own, own_error = solve_own(network, port, freqs)
    spice, spice_error = _result(pool.submit(network, port, freqs))
    return judge(index, variant, own, own_error, spice, spice_error, tol)


def signature(outcome: CaseOutcome) -> tuple[str, ...]:
    """What kind of failure this is: shrinking must keep it, not trade it for another one."""
    if outcome.status == "fail":
        worst = max((c for p in outcome.points for c in p.quantities if c.verdict == "fail"), key=lambda c: c.err)
        return ("fail", worst.quantity)
    if outcome.status == "unavailable":
        missing = next((c for p in outcome.points for c in p.quantities if c.verdict == "unavailable"), None)
        if missing is None:
            return ("unavailable", "own solver singular")
        return ("unavailable", missing.quantity, "own" if missing.own is None else "ngspice")
    return (outcome.status, outcome.reason.split(":", 1)[0])


def _shrink_one(outcome: CaseOutcome, options: FuzzOptions, pool) -> Reproducer:
    case = outcome.case

    wanted = signature(outcome)

    def still_fails(network: Network, port: Port, freqs: tuple[float, ...]) -> bool:
        again = recheck(case, network, port, freqs, pool, options.tolerance)
        return again.problem and signature(again) == wanted

    # Stay among well-posed networks if the original was one, so the failure stays the original's.
    admissible = well_posed if well_posed(case.network, case.port, case.freqs_hz) else None
    result = shrink(case.network, case.port, case.freqs_hz, still_fails, budget=options.shrink_budget,
                    admissible=admissible)
    final = recheck(case, result.network, result.port, result.freqs_hz, pool, options.tolerance, outcome.index)
    return Reproducer(case.seed, result, final)


# --------------------------------------------------------------------------- output files


def _cx(z: complex | None) -> dict | None:
    return None if z is None else {"re": z.real, "im": z.imag}


def _num(x: float) -> float | None:
    return x if math.isfinite(x) else None


def numbers_document(outcome: CaseOutcome) -> dict:
    """Both engines' numbers and the comparison, point by point (JSON-ready)."""
    points = []
    own = outcome.own or ()
    spice_points = getattr(outcome.spice, "points", ()) or ()
    for i, p in enumerate(outcome.points):
        o = own[i] if i < len(own) else None
        s = spice_points[i] if i < len(spice_points) else None
        points.append({
            "freq_hz": p.freq_hz,
            "condition": _num(p.condition),
            "own": None if o is None else {"vth": _cx(o.vth), "zth": _cx(o.zth), "in": _cx(o.in_), "note": o.note},
            "ngspice": None if s is None else {"vth": _cx(s.vth), "zth": _cx(s.zth), "in": _cx(s.isc),
                                               "notes": list(s.notes)},
            "checks": {c.quantity: {"err": _num(c.err), "rel_err": _num(c.rel_err), "verdict": c.verdict,
                                    "explanation": c.explanation} for c in p.quantities},
            "verdict": p.verdict,
        })
    return {"status": outcome.status, "explained": outcome.explained, "reason": outcome.reason, "points": points,
            "ngspice_version": getattr(outcome.spice, "ngspice_version", None)}


def _toml_string(text: str) -> str:
    return json.dumps(text, ensure_ascii=True)  # a JSON string is a valid TOML basic string


def regenerate_command(seed: int, knobs: Knobs) -> str:
    """The command that reruns one case alone with the knobs it was drawn with."""
    default = Knobs()
    parts = [f"crosscheck fuzz --case-seed {seed}"]
    if knobs.family != default.family:
        parts.append(f"--family {knobs.family}")
    if (knobs.min_nodes, knobs.max_nodes) != (default.min_nodes, default.max_nodes):
        parts.append(f"--nodes {knobs.min_nodes} {knobs.max_nodes}")
    if knobs.kinds != default.kinds:
        parts.append(f"--kinds {knobs.kinds}")
    return " ".join(parts)


def write_reproducer(out: Path, rep: Reproducer, original: CaseOutcome, knobs: Knobs,
                     injected: Sequence[str] = ()) -> tuple[str, ...]:
    """Netlist, case file (TOML, as ``cases.load_case`` reads it) and numbers of one shrunk failure."""
    out.mkdir(parents=True, exist_ok=True)
    stem = f"fuzz_{rep.seed}"
    case = original.case
    shrunk = rep.shrunk
    title = f"fuzz case {rep.seed} ({case.family}), shrunk"
    netlist = write_netlist(Network(title, shrunk.network.elements))
    (out / f"{stem}.cir").write_text(netlist, encoding="utf-8")
    (out / f"{stem}.original.cir").write_text(write_netlist(case.network), encoding="utf-8")
    e0, n0, f0 = shrunk.original_size
    e1, n1, f1 = shrunk.size
    fault_note = f"# Found with injected fault(s) {', '.join(injected)}: the own solver was broken on purpose.\n" \
        if injected else ""
    lines = [
        f"# Found by crosscheck fuzz: case seed {rep.seed}, family {case.family}"
        f"{' (traits: ' + ', '.join(case.traits) + ')' if case.traits else ''}.",
        fault_note.rstrip("\n"),
        f"# Shrunk from {e0} elements, {n0} nodes, {f0} frequencies to {e1}, {n1}, {f1} "
        f"({shrunk.checks} checks); the original is {stem}.original.cir.",
        f"# Regenerate the original: {regenerate_command(rep.seed, knobs)}",
        f"# Outcome: {rep.outcome.status}: {rep.outcome.reason}".replace("\n", " "),
        f"# Both engines' numbers: {stem}.json",
        f"title = {_toml_string(title)}",
        f"netlist = {_toml_string(stem + '.cir')}",
        f"port = [{_toml_string(shrunk.port.a)}, {_toml_string(shrunk.port.b)}]",
        f"frequencies = [{', '.join(_toml_string(repr(f)) for f in shrunk.freqs_hz)}]",
        f"tags = [\"fuzz\", {_toml_string(case.family)}]",
    ]
    (out / f"{stem}.toml").write_text("\n".join(x for x in lines if x) + "\n", encoding="utf-8")
    doc = {"seed": rep.seed, "family": case.family, "traits": list(case.traits), "caveat": case.caveat,
           "faults": list(injected), "regenerate": regenerate_command(rep.seed, knobs),
           "shrunk": numbers_document(rep.outcome), "original": numbers_document(original),
           "size": {"original": list(shrunk.original_size), "shrunk": list(shrunk.size)},
           "shrink_checks": shrunk.checks}
    (out / f"{stem}.json").write_text(json.dumps(doc, indent=2, ensure_ascii=False) + "\n", encoding="utf-8")
    return tuple(str(out / f"{stem}{ext}") for ext in (".cir", ".toml", ".json", ".original.cir"))


def write_outputs(summary: FuzzSummary, out: Path) -> None:
    """Every reproducer, and the summary as JSON."""
    from crosscheck.report.fuzz_summary import summary_document

    by_seed = {o.case.seed: o for o in summary.problems}
    for i, rep in enumerate(summary.reproducers):
        files = write_reproducer(out, rep, by_seed[rep.seed], summary.options.knobs, summary.faults)
        summary.reproducers[i] = Reproducer(rep.seed, rep.shrunk, rep.outcome, files)
    out.mkdir(parents=True, exist_ok=True)
    (out / "summary.json").write_text(json.dumps(summary_document(summary), indent=2, ensure_ascii=False) + "\n",
                                      encoding="utf-8")
