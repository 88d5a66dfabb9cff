"""Command line: argument parsing and exit codes only; the work happens in the modules it calls."""

from __future__ import annotations

import argparse
import json
import sys
from collections.abc import Callable, Sequence
from dataclasses import replace
from pathlib import Path
from typing import TYPE_CHECKING

from crosscheck.cli_common import (
    EXIT_DRIFT,
    EXIT_ERROR,
    EXIT_FAIL,
    EXIT_OK,
    EXIT_UNAVAILABLE,
    EXIT_USAGE,
    AlreadyReported,
    UsageError,
    budget_from_options,
    excitation_frequencies,
    exit_code,
    read_limits_given,
    strict,
    terminal,
    tolerance_from_options,
    touchstone,
)
from crosscheck.cli_parser import parser, spread_spec
from crosscheck.cli_reduce import reduce
from crosscheck.errors import CrosscheckError
from crosscheck.model.budget import BudgetSettingError
from crosscheck.report.outputs import verify_format  # light: its writers load when a format is asked for

#: The command line's public names: ``main`` and the exit codes (documented in the README), kept here for callers.
__all__ = ["EXIT_DRIFT", "EXIT_ERROR", "EXIT_FAIL", "EXIT_OK", "EXIT_UNAVAILABLE", "EXIT_USAGE", "exit_code", "main"]

if TYPE_CHECKING:  # the rest loads inside the commands that use it (start-up time: --version loads none of it)
    from rich.progress import Progress

    from crosscheck.judge.result import CaseResult
    from crosscheck.model.cases import Case


def main(argv: Sequence[str] | None = None) -> int:
    args = parser().parse_args(argv)  # --version and --help end here, before any command's modules load
    try:
        if args.command == "reduce":
            return reduce(args)
        if args.command == "verify":
            return _verify(args)
        if args.command == "fuzz":
            return _fuzz(args)
    except BudgetSettingError as exc:
        print(f"crosscheck {args.command}: error: {terminal(str(exc))}", file=sys.stderr)
        return EXIT_USAGE
    except (CrosscheckError, AlreadyReported) as exc:
        print(f"crosscheck: error: {terminal(str(exc))}", file=sys.stderr)
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


def _verify(args: argparse.Namespace) -> int:
    """Case files (and netlists named with --port and --freq) through both routes; reports; the exit code."""
    from crosscheck.report.outputs import unknown_extensions  # start-up time: per command
    from crosscheck.run.batch import run_batch  # start-up time: per command

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
    budget = budget_from_options(args)  # a usable limit, or a usage error before any work
    try:
        if args.excitation == "dc" and args.freq:
            excitation_frequencies(args.freq, "dc")  # a frequency other than 0 under dc: a usage error
    except UsageError as exc:
        print(f"crosscheck verify: error: {exc}", file=sys.stderr)
        return EXIT_USAGE
    items = _verify_items(args)
    if _refuse_outputs_that_are_inputs(args, items):
        return EXIT_USAGE
    wrong = unknown_extensions(args.format, args.output or ())
    for problem in wrong:
        print(f"crosscheck verify: error: {terminal(problem)}", file=sys.stderr)
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
        _write_reports(args, strict(args, finished))
        interrupt.finished = finished  # type: ignore[attr-defined]
        raise
    results = strict(args, results)
    written = _write_reports(args, results) and touchstone(args, results, "verify")
    if args.update_baseline:
        _update_baseline(args, results)
    return exit_code([r.verdict for r in results]) if written else EXIT_ERROR


def _verify_items(args: argparse.Namespace) -> list[Case | tuple[str, CrosscheckError]]:
    """Every case file found under the paths, read; a file that cannot be read stays as (path, error)."""
    from crosscheck.model.cases import find_case_files, load_case  # start-up time: per command
    from crosscheck.model.netlist import read_netlist_text  # start-up time: per command
    from crosscheck.model.read_limits import ReadLimits  # start-up time: per command
    from crosscheck.run.check import case_from_netlist  # start-up time: per command

    items: list[Case | tuple[str, CrosscheckError]] = []
    netlists = 0
    for path in find_case_files(list(args.paths)):
        try:
            if path.suffix.lower() == ".toml" or path.is_dir():  # a folder here is one that could not be searched
                case = load_case(path, allow_outside=args.allow_outside_paths, read_limits=read_limits_given(args))
                items.append(_overridden(case, args))
                continue
            netlists += 1
            excitation = args.excitation or "ac"
            if not args.port or not (args.freq or excitation == "dc"):
                raise CrosscheckError(f"{path}: a netlist named directly needs --port A B and --freq F ...")
            limits = read_limits_given(args)
            case = replace(
                case_from_netlist(
                    str(path),
                    read_netlist_text(path, limits=limits),
                    tuple(args.port),
                    excitation_frequencies(args.freq, excitation),
                    tolerance_from_options(args),
                    args.allow_negative,
                    args.sources or "peak",
                    args.accept_warning,
                    excitation,
                ),
                spread=spread_spec(args, None),
                read_limits=limits or ReadLimits(),
            )
            items.append(case)
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


def _overridden(case: Case, args: argparse.Namespace) -> Case:
    """A case file's case with --rel and --sources from the command line in place of its own (when given)."""
    tolerance = case.tolerance if args.rel is None else replace(case.tolerance, rel=args.rel)
    return replace(
        case,
        tolerance=tolerance,
        sources=args.sources or case.sources,
        spread=spread_spec(args, case.spread) if case.spread else None,
    )


def override_header(args: argparse.Namespace) -> str:
    """The report's first line when --rel or --sources overrode the case files' own settings, else ""."""
    given = [f"rel = {args.rel:g} (solver vs SPICE)"] if args.rel is not None else []
    given += [f"sources = {args.sources.upper()}"] if args.sources else []
    return f"Command line overrides every case file: {', '.join(given)}." if given else ""


def _progress_bar(total: int) -> tuple[Progress, Callable[[object], None]]:
    """A progress bar on standard error (only on a terminal), and the callback that advances it."""
    from rich.console import Console  # start-up time: per command
    from rich.progress import (  # start-up time: per command
        BarColumn,
        MofNCompleteColumn,
        Progress,
        TextColumn,
        TimeRemainingColumn,
    )

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
    from crosscheck.report.outputs import write_reports  # start-up time: per command

    written = write_reports(args.output or [None], args.format, results, args.detail, override_header(args))
    args.format = verify_format(args.format, (args.output or [None])[0])
    return written


def _refuse_outputs_that_are_inputs(args: argparse.Namespace, items: Sequence[Case | tuple[str, object]]) -> bool:
    """Report (and return True for) any --output that is an input of this run: a case file, a netlist a case
    names, or the --baseline file, compared as resolved paths (links followed), so a report never
    overwrites what it was made from."""
    from crosscheck.model.cases import Case  # start-up time: per command

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
            f"crosscheck verify: error: --output {terminal(output)} is {what} of this run; writing the "
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
    from crosscheck.judge.baseline import load_baseline  # start-up time: per command

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
    from crosscheck.judge.baseline import BaselineCorrupt  # start-up time: per command

    try:
        return read(*more)
    except BaselineCorrupt as exc:
        raise BaselineCorrupt(exc.path, exc.problem, cases=_repair_cases(args)) from None


def _repair_cases(args: argparse.Namespace) -> str:
    """This run's paths and the options that decide which cases run, quoted for a shell."""
    import shlex

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
    from crosscheck.judge.baseline import update_baseline_file  # start-up time: per command

    report = _recoverable(
        args,
        lambda: update_baseline_file(results, args.baseline, prune=args.prune, replace_corrupt=args.replace_corrupt),
    )
    out = sys.stderr if args.format != "text" and not args.output else sys.stdout
    print("\n".join(report.lines(args.baseline)), file=out)


def _fuzz(args: argparse.Namespace) -> int:
    """Random networks through both engines; exit 0 when nothing disagrees beyond what roundoff explains."""
    from crosscheck.fuzz.generate import Knobs  # start-up time: per command
    from crosscheck.fuzz.loop import FuzzOptions, run_fuzz  # start-up time: per command
    from crosscheck.fuzz.reproducer import summary_document  # start-up time: per command
    from crosscheck.report.fuzz_summary import fuzz_progress, print_summary  # start-up time: per command
    from crosscheck.report.results_text import report_console  # start-up time: per command

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
            from crosscheck.fuzz.batch import run_fuzz_batch  # start-up time: per command

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
    from crosscheck.run.batch import cluster_executor  # start-up time: per command

    return cluster_executor(address)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
