"""Command line: argument parsing and exit codes only; the work happens in the modules it calls."""

from __future__ import annotations

import argparse
import json
import shlex
import sys
from collections.abc import Callable, Sequence
from dataclasses import replace
from pathlib import Path

from rich.console import Console
from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeRemainingColumn

from crosscheck.cli_parser import parser
from crosscheck.errors import CrosscheckError
from crosscheck.judge.baseline import BaselineCorrupt, load_baseline, update_baseline_file
from crosscheck.judge.result import CaseResult
from crosscheck.model.budget import Budget, BudgetSettingError, parse_memory
from crosscheck.model.cases import Case, find_case_files, load_case
from crosscheck.model.expect_option import ExpectOptionError, expectations_from_options
from crosscheck.model.frequencies import checked_frequencies
from crosscheck.model.netlist import read_netlist_text
from crosscheck.model.read_limits import ReadLimits
from crosscheck.model.tolerance import HAND_CALCULATION, SOLVER_VS_SPICE, Tolerance
from crosscheck.model.values import parse_number
from crosscheck.report.outputs import unknown_extensions, verify_format, write_reports
from crosscheck.report.results_text import report_console
from crosscheck.report.untrusted import terminal_text
from crosscheck.vocabulary import same_frequency

# Exit codes (documented in the README).
EXIT_OK = 0  # every compared quantity within tolerance (or nothing to compare)
EXIT_FAIL = 1  # some quantity outside tolerance, or a design limit or expectation not met
EXIT_USAGE = 2  # the command line itself is wrong (argparse's own code)
EXIT_ERROR = 3  # invalid input (netlist, case file), an engine crashed on a case, or (--strict) a reading warning
EXIT_UNAVAILABLE = 4  # nothing failed, but an engine could not produce some quantity
EXIT_DRIFT = 5  # nothing failed, but a result moved from the stored baseline (verify --baseline)


def main(argv: Sequence[str] | None = None) -> int:
    args = parser().parse_args(argv)
    try:
        if args.command == "reduce":
            return _reduce(args)
        if args.command == "verify":
            return _verify(args)
        if args.command == "fuzz":
            return _fuzz(args)
    except BudgetSettingError as exc:
        print(f"crosscheck {args.command}: error: {terminal_text(str(exc))}", file=sys.stderr)
        return EXIT_USAGE
    except (CrosscheckError, _AlreadyReported) as exc:
        print(f"crosscheck: error: {terminal_text(str(exc))}", file=sys.stderr)
        return EXIT_ERROR
    except KeyboardInterrupt as interrupt:
        # Ctrl-C: cancel every ngspice pool at once (queued cases dropped, running workers killed), say how
        # many cases finished, exit with 130 (128 + SIGINT). A command that kept its finished results
        # attaches them to the interrupt as ``finished`` (a list of CaseResult) before re-raising it;
        # without that, the count is ngspice's finished cases.
        from crosscheck.spice.workers import cancel_all  # start-up time: needed only after an interrupt

        spice_done, cancelled = cancel_all()
        kept = getattr(interrupt, "finished", None)
        done = (
            f"{len(kept)} case(s) finished and were kept"
            if kept is not None
            else f"{spice_done} ngspice case(s) finished"
        )
        print(f"crosscheck: interrupted: {done}; {cancelled} queued or running case(s) cancelled", file=sys.stderr)
        return 130
    return EXIT_USAGE


def _frequencies(texts: Sequence[str]) -> list[float]:
    """--freq values in the order given (engineering numbers; finite and >= 0)."""
    return list(checked_frequencies((parse_number(t) for t in texts), where="--freq"))


def _excitation_frequencies(texts: Sequence[str] | None, excitation: str) -> list[float]:
    """--freq under --excitation: required under ac; under dc absent means 0 Hz and any other is a usage error."""
    if excitation == "dc":
        freqs = _frequencies(texts) if texts else [0.0]
        other = [t for t, f in zip(texts or (), freqs, strict=False) if f != 0]
        if other:
            raise _UsageError(
                f"--excitation dc with --freq {other[0]}: a DC network is solved at 0 Hz only; "
                "leave --freq out (or write --freq 0), or use --excitation ac for that frequency"
            )
        return freqs
    if not texts:
        raise _UsageError("--freq F ... is required (frequencies in Hz), unless --excitation dc (0 Hz)")
    return _frequencies(texts)


def _budget(args: argparse.Namespace) -> Budget:
    """--timeout and --memory as the time and memory each route may take per case (a usage error if unusable)."""
    return Budget(time_s=args.timeout, memory_bytes=parse_memory(args.memory))


def _tolerance(args: argparse.Namespace) -> Tolerance:
    """--rel as the solver-vs-SPICE tolerance (the default when not given)."""
    if args.rel is None:
        return SOLVER_VS_SPICE
    return Tolerance(rel=args.rel, abs=SOLVER_VS_SPICE.abs)


def _expect_tolerance(args: argparse.Namespace) -> Tolerance:
    """--expect-rel and --expect-phase as the hand values' tolerance (three significant figures by default)."""
    rel = HAND_CALCULATION.rel if args.expect_rel is None else args.expect_rel
    phase = {None: HAND_CALCULATION.phase_deg, "none": None}.get(args.expect_phase, args.expect_phase)
    try:
        return Tolerance(rel=rel, abs=HAND_CALCULATION.abs, phase_deg=phase)
    except ValueError as exc:
        raise _UsageError(f"--expect-rel: {exc}") from None


class _UsageError(CrosscheckError, ValueError):
    """A command-line value that cannot be used; reported as a usage error (exit 2)."""


def exit_code(verdicts: Sequence[str]) -> int:
    """0 all pass; 1 any fail; 3 any error; 5 drift from the baseline (no fail or error); 4 only
    unavailable beside passes."""
    if "error" in verdicts:
        return EXIT_ERROR
    if "fail" in verdicts:
        return EXIT_FAIL
    if "drift" in verdicts:
        return EXIT_DRIFT
    if "unavailable" in verdicts:
        return EXIT_UNAVAILABLE
    return EXIT_OK


def _reduce(args: argparse.Namespace) -> int:
    """One netlist at one port: the equivalents, and both routes compared unless --engine own."""
    from crosscheck.report.reduction import (  # start-up time: loaded only by the commands that use it
        print_reduction,
        reduction_document,
    )
    from crosscheck.run.check import (  # start-up time: loaded only by the commands that use it
        case_from_netlist,
        run_cases,
    )

    excitation = args.excitation or "ac"
    sources = args.sources or "peak"
    try:
        freqs = _excitation_frequencies(args.freq, excitation)
        expectations = _expectations(args, freqs)
    except _UsageError as exc:
        print(f"crosscheck reduce: error: {exc}", file=sys.stderr)
        return EXIT_USAGE
    extra = [e.at_hz for e in expectations if not any(same_frequency(e.at_hz, f) for f in freqs)]
    limits = _read_limits(args)
    case = case_from_netlist(
        str(args.netlist),
        read_netlist_text(args.netlist, limits=limits),
        tuple(args.port),
        freqs,
        _tolerance(args),
        args.allow_negative,
        sources,
        args.accept_warning,
        excitation,
    )
    case = replace(case, freqs_hz=tuple(freqs + extra), expectations=expectations, read_limits=limits or ReadLimits())
    if args.engine == "own":
        [result] = run_cases([case], engine="own")
    else:
        from crosscheck.spice.workers import SpicePool  # start-up time: loaded only by the commands that use it

        with SpicePool(workers=1) as pool:
            [result] = run_cases([case], engine=args.engine, pool=pool)
    if args.engine == "spice":
        return _spice_alone(args, result, sources, bool(expectations))
    result = _strict(args, [result])[0]
    if result.error and result.own is None:
        _warnings_on_stderr(result)
        raise _AlreadyReported(result.error)
    compared = args.engine != "own"
    if args.format == "json":
        doc = reduction_document(result, compared, sources, str(args.netlist), bool(expectations))
        json.dump(doc, sys.stdout, indent=2, ensure_ascii=False)
        print()
    else:
        print_reduction(report_console(), result, compared, sources, bool(expectations))
    return exit_code([result.verdict])


def _spice_alone(args: argparse.Namespace, result: CaseResult, sources: str, expectations: bool) -> int:
    """`reduce --engine spice`: ngspice's equivalents alone (any --expect values held against them), nothing
    compared; exit 4 when ngspice was unavailable, 3 when it failed on the netlist."""
    from crosscheck.api import spice_equivalents  # start-up time: loaded only by the commands that use it
    from crosscheck.judge.case import judged  # start-up time: loaded only by the commands that use it
    from crosscheck.report.reduction import (  # start-up time: loaded only by the commands that use it
        print_reduction,
        reduction_document,
    )

    points = spice_equivalents(result)
    if points is None:
        if result.error and not result.error.startswith("own solver:"):  # the own route's trouble is not asked about
            _warnings_on_stderr(result)
            raise _AlreadyReported(result.error)
        why = result.spice_note or "ngspice was not run"
        print(f"crosscheck reduce: ngspice gave no equivalents: {terminal_text(why)}", file=sys.stderr)
        return EXIT_UNAVAILABLE
    result = _strict(args, [judged(replace(result, own=points, points=(), error=None), None, compare=False)])[0]
    version = result.spice.ngspice_version if result.spice is not None else ""
    if args.format == "json":
        doc = reduction_document(result, False, sources, str(args.netlist), expectations)
        doc.update(engine="ngspice", ngspice_version=version)
        for point in doc["points"]:
            point["ngspice"] = dict(point.pop("own"), condition=None)  # ngspice reports no matrix condition
        json.dump(doc, sys.stdout, indent=2, ensure_ascii=False)
        print()
    else:
        console = report_console()
        console.print(
            f"Equivalents from ngspice alone ({terminal_text(version)}); not compared with crosscheck's solver."
        )
        print_reduction(console, result, False, sources, expectations)
    return exit_code([result.verdict])


def _warnings_on_stderr(result: CaseResult) -> None:
    """The case's unacknowledged reading warnings on stderr, for a reduce that ends in an error without a report."""
    for warning in result.open_warnings:
        print(f"crosscheck: warning: {terminal_text(str(warning))}", file=sys.stderr)


def _expectations(args: argparse.Namespace, freqs: Sequence[float]) -> tuple:
    """--expect options as expectations; a malformed one is a usage error."""

    if not args.expect:
        return ()
    try:
        return expectations_from_options(args.expect, freqs, _expect_tolerance(args))
    except ExpectOptionError as exc:
        raise _UsageError(str(exc)) from None


class _AlreadyReported(CrosscheckError):
    """An error already put in words by the case result; the command line prints it as it is."""


def _verify(args: argparse.Namespace) -> int:
    """Case files (and netlists named with --port and --freq) through both routes; reports; the exit code."""
    from crosscheck.run.batch import run_batch  # start-up time: loaded only by the commands that use it

    if args.update_baseline and args.baseline is None:
        print("crosscheck verify: error: --update-baseline needs --baseline FILE (the file to write)", file=sys.stderr)
        return EXIT_USAGE
    if args.output and len(args.output) > 1 and args.format is not None:
        print(
            "crosscheck verify: error: --format with several --output files is ambiguous; leave it out and "
            "let each file's extension (.xml, .md, .html, .json, .csv) name its format",
            file=sys.stderr,
        )
        return EXIT_USAGE
    budget = _budget(args)  # a usable limit, or a usage error before any work
    try:
        if args.excitation == "dc" and args.freq:
            _excitation_frequencies(args.freq, "dc")  # a frequency other than 0 under dc: a usage error
    except _UsageError as exc:
        print(f"crosscheck verify: error: {exc}", file=sys.stderr)
        return EXIT_USAGE
    items = _verify_items(args)
    if _refuse_outputs_that_are_inputs(args, items):
        return EXIT_USAGE
    wrong = unknown_extensions(args.format, args.output or ())
    for problem in wrong:
        print(f"crosscheck verify: error: {terminal_text(problem)}", file=sys.stderr)
    if wrong:
        return EXIT_USAGE
    baseline = _baseline(args)
    progress, advance = _progress_bar(len(items))
    finished: list[CaseResult] = []

    def done(result: CaseResult) -> None:
        finished.append(result)
        advance(result)

    try:
        with progress, _executor(args.cluster) as executor:
            results = run_batch(items, executor, workers=args.workers, budget=budget, on_done=done, baseline=baseline)
    except KeyboardInterrupt as interrupt:  # keep what finished: its reports are written, main says how many
        _write_reports(args, _strict(args, finished))
        interrupt.finished = finished  # type: ignore[attr-defined]
        raise
    results = _strict(args, results)
    written = _write_reports(args, results)
    if args.update_baseline:
        _update_baseline(args, results)
    return exit_code([r.verdict for r in results]) if written else EXIT_ERROR


def _verify_items(args: argparse.Namespace) -> list[Case | tuple[str, CrosscheckError]]:
    """Every case file found under the paths, read; a file that cannot be read stays as (path, error)."""
    from crosscheck.run.check import case_from_netlist  # start-up time: loaded only by the commands that use it

    items: list[Case | tuple[str, CrosscheckError]] = []
    netlists = 0
    for path in find_case_files(list(args.paths)):
        try:
            if path.suffix.lower() == ".toml" or path.is_dir():  # a folder here is one that could not be searched
                case = load_case(path, allow_outside=args.allow_outside_paths, read_limits=_read_limits(args))
                items.append(_overridden(case, args))
                continue
            netlists += 1
            excitation = args.excitation or "ac"
            if not args.port or not (args.freq or excitation == "dc"):
                raise CrosscheckError(f"{path}: a netlist named directly needs --port A B and --freq F ...")
            limits = _read_limits(args)
            direct = case_from_netlist(
                str(path),
                read_netlist_text(path, limits=limits),
                tuple(args.port),
                _excitation_frequencies(args.freq, excitation),
                _tolerance(args),
                args.allow_negative,
                args.sources or "peak",
                args.accept_warning,
                excitation,
            )
            items.append(replace(direct, read_limits=limits or ReadLimits()))
        except CrosscheckError as exc:
            items.append((str(path), exc))
    if not items:
        raise CrosscheckError(f"no case files (*.toml) found under {', '.join(map(str, args.paths))}")
    named = {
        "--port": args.port,
        "--freq": args.freq,
        "--allow-negative": args.allow_negative,
        "--excitation": args.excitation,
    }
    unused = [o for o, given in {**named, "--accept-warning": args.accept_warning}.items() if given]
    if unused and not netlists:
        print(
            f"crosscheck verify: note: {', '.join(unused)} appl{'y' if len(unused) > 1 else 'ies'} only to netlists "
            "named directly; the case files use their own port, frequencies, allow_negative, excitation and accept_warnings",
            file=sys.stderr,
        )
    return items


def _strict(args: argparse.Namespace, results: Sequence[CaseResult]) -> list[CaseResult]:
    """The results under --strict (an unacknowledged reading warning makes its case an error), else as they are."""
    from crosscheck.run.check import held_strictly  # start-up time: loaded only by the commands that use it

    return [held_strictly(r) for r in results] if args.strict else list(results)


def _read_limits(args: argparse.Namespace) -> ReadLimits | None:
    """--max-elements and --max-netlist-mib as the reader's limits (None when neither was given)."""
    return ReadLimits.given(args.max_elements, args.max_netlist_mib)


def _overridden(case: Case, args: argparse.Namespace) -> Case:
    """A case file's case with --rel and --sources from the command line in place of its own (when given)."""
    tolerance = case.tolerance if args.rel is None else replace(case.tolerance, rel=args.rel)
    return replace(case, tolerance=tolerance, sources=args.sources or case.sources)


def override_header(args: argparse.Namespace) -> str:
    """The report's first line when --rel or --sources overrode the case files' own settings, else ""."""
    given = [f"rel = {args.rel:g} (solver vs SPICE)"] if args.rel is not None else []
    given += [f"sources = {args.sources.upper()}"] if args.sources else []
    return f"Command line overrides every case file: {', '.join(given)}." if given else ""


def _progress_bar(total: int) -> tuple[Progress, Callable[[object], None]]:
    """A progress bar on standard error (only on a terminal), and the callback that advances it."""
    err_console = Console(stderr=True)
    progress = Progress(
        TextColumn("checking"),
        BarColumn(),
        MofNCompleteColumn(),
        TextColumn("{task.fields[rate]}"),
        TimeRemainingColumn(),
        console=err_console,
        transient=True,
        disable=not err_console.is_terminal,
    )
    task = progress.add_task("cases", total=total, rate="")
    return progress, lambda _result: progress.advance(task)


def _write_reports(args: argparse.Namespace, results: Sequence[CaseResult]) -> bool:
    """Every --output (standard output without one) and the terminal summary; True when all were written.
    ``args.format`` becomes the first output's format (``_update_baseline`` reads it)."""
    written = write_reports(args.output or [None], args.format, results, args.detail, override_header(args))
    args.format = verify_format(args.format, (args.output or [None])[0])
    return written


def _refuse_outputs_that_are_inputs(args: argparse.Namespace, items: Sequence[Case | tuple[str, object]]) -> bool:
    """Report (and return True for) any --output that is an input of this run: a case file, a netlist a case
    names, or the --baseline file, compared as resolved paths (links followed), so a report never
    overwrites what it was made from."""
    from crosscheck.report.untrusted import terminal_text  # start-up time: loaded only by the commands that use it

    inputs: dict[Path, str] = {}
    for item in items:
        if isinstance(item, Case):
            inputs[_resolved(item.path)] = "a case file"
            inputs.setdefault(_resolved(Path(item.netlist_file)), "a netlist a case names")
        else:
            inputs[_resolved(Path(item[0]))] = "a case file"
    if args.baseline is not None:
        inputs[_resolved(args.baseline)] = "the --baseline file"
    clashes = [(o, inputs[_resolved(o)]) for o in args.output or () if _resolved(o) in inputs]
    for output, what in clashes:
        print(
            f"crosscheck verify: error: --output {terminal_text(output)} is {what} of this run; writing the "
            "report there would overwrite it. Give --output a different path.",
            file=sys.stderr,
        )
    return bool(clashes)


def _resolved(path: Path) -> Path:
    """The absolute path with links followed (as far as it exists), for comparing two names of one file."""
    return Path(path).expanduser().resolve(strict=False)


def _baseline(args: argparse.Namespace):
    """The stored baseline to compare with, or None (none asked for, or it is about to be rewritten).

    Before an update the existing file is read once too, so a corrupt one stops the command before
    the run rather than after it (the update reads it again under the lock)."""
    _baseline_flags(args)
    if args.baseline is None:
        return None
    if args.update_baseline:
        if not args.replace_corrupt and args.baseline.exists():
            _recoverable(args, load_baseline, args.baseline)
        return None
    return _recoverable(args, load_baseline, args.baseline)


def _baseline_flags(args: argparse.Namespace) -> None:
    """--prune and --replace-corrupt only with --update-baseline: a usage error (exit 2) otherwise."""
    for flag, given in (("--prune", args.prune), ("--replace-corrupt", args.replace_corrupt)):
        if given and not args.update_baseline:
            print(f"crosscheck verify: error: {flag} needs --update-baseline (it changes the file)", file=sys.stderr)
            raise SystemExit(EXIT_USAGE)


def _recoverable(args: argparse.Namespace, read: Callable, *more):
    """``read(*more)``; a corrupt baseline is re-raised naming this run's own case paths in the repair command."""
    try:
        return read(*more)
    except BaselineCorrupt as exc:
        raise BaselineCorrupt(exc.path, exc.problem, cases=_repair_cases(args)) from None


def _repair_cases(args: argparse.Namespace) -> str:
    """This run's paths and the options that decide which cases run, quoted for a shell."""
    words = [str(p) for p in args.paths]
    words += ["--port", *args.port] if args.port else []
    words += ["--freq", *args.freq] if args.freq else []
    words += [
        f
        for f, on in (("--allow-outside-paths", args.allow_outside_paths), ("--allow-negative", args.allow_negative))
        if on
    ]
    return " ".join(shlex.quote(w) for w in words)


def _update_baseline(args: argparse.Namespace, results) -> None:
    """Merge this run into the baseline under its lock and say what changed (to stderr when stdout
    carries a report file format): added, changed, kept, removed (only with --prune)."""
    report = _recoverable(
        args,
        lambda: update_baseline_file(results, args.baseline, prune=args.prune, replace_corrupt=args.replace_corrupt),
    )
    out = sys.stderr if args.format != "text" and not args.output else sys.stdout
    print("\n".join(report.lines(args.baseline)), file=out)


def _fuzz(args: argparse.Namespace) -> int:
    """Random networks through both engines; exit 0 when nothing disagrees beyond what roundoff explains."""
    from crosscheck.fuzz.generate import Knobs  # start-up time: loaded only by the commands that use it
    from crosscheck.fuzz.loop import FuzzOptions, run_fuzz  # start-up time: loaded only by the commands that use it
    from crosscheck.fuzz.reproducer import summary_document  # start-up time: loaded only by the commands that use it
    from crosscheck.report.fuzz_summary import (  # start-up time: loaded only by the commands that use it
        fuzz_progress,
        print_summary,
    )

    try:
        knobs = Knobs(min_nodes=args.nodes[0], max_nodes=args.nodes[1], kinds=args.kinds, family=args.family)
        options = FuzzOptions(
            count=args.count,
            seed=args.seed,
            knobs=knobs,
            workers=args.workers,
            out=args.out,
            shrink=not args.no_shrink,
            case_seeds=tuple(args.case_seed or ()),
        )
    except ValueError as exc:
        print(f"crosscheck fuzz: error: {exc}", file=sys.stderr)
        return EXIT_USAGE
    with fuzz_progress(len(options.seeds())) as advance, _executor(args.cluster) as executor:
        if executor is None:
            summary = run_fuzz(options, on_progress=advance)
        else:
            from crosscheck.fuzz.batch import run_fuzz_batch  # start-up time: loaded only by the commands that use it

            summary = run_fuzz_batch(options, executor, on_progress=advance)
    if args.format == "json":
        json.dump(summary_document(summary), sys.stdout, indent=2, ensure_ascii=False)
        print()
    else:
        print_summary(report_console(), summary)
    return exit_code(summary.verdicts())


def _executor(address: str | None):
    """The Dask cluster's executor for --cluster ADDRESS, else None (this machine's worker pool)."""
    from contextlib import nullcontext

    if address is None:
        return nullcontext(None)
    from crosscheck.run.batch import cluster_executor  # start-up time: loaded only by the commands that use it

    return cluster_executor(address)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
