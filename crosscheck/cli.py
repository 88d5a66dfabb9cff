"""Command line: argument parsing and exit codes only; the work happens in the modules it calls."""

from __future__ import annotations

import argparse
import json
import sys
from collections.abc import Sequence
from contextlib import nullcontext
from dataclasses import replace
from pathlib import Path

from rich.console import Console

from crosscheck.errors import CrosscheckError
from crosscheck.judge.baseline import diff_baselines, format_changes, load_baseline, updated_baseline, write_baseline
from crosscheck.model.cases import find_case_files, load_case
from crosscheck.model.expect_option import ExpectOptionError, expectations_from_options
from crosscheck.model.frequencies import checked_frequencies
from crosscheck.model.netlist import read_netlist_text
from crosscheck.model.tolerance import HAND_CALCULATION, SOLVER_VS_SPICE, Tolerance
from crosscheck.model.values import parse_number
from crosscheck.report.outputs import VERIFY_FORMATS, render_report, verify_format
from crosscheck.version import __version__
from crosscheck.vocabulary import same_frequency

# Exit codes (documented in the README).
EXIT_OK = 0  # every compared quantity within tolerance (or nothing to compare)
EXIT_FAIL = 1  # some quantity outside tolerance, or a design limit or expectation not met
EXIT_USAGE = 2  # the command line itself is wrong (argparse's own code)
EXIT_ERROR = 3  # invalid input (netlist, case file) or an engine crashed on a case
EXIT_UNAVAILABLE = 4  # nothing failed, but an engine could not produce some quantity
EXIT_DRIFT = 5  # nothing failed, but a result moved from the stored baseline (verify --baseline)

CLUSTER_HELP = (
    "run every case as a task on the Dask cluster whose scheduler is at ADDRESS (tcp://host:port); "
    "its workers need crosscheck and ngspice installed (pip install 'crosscheck[cluster]')"
)


def _parser() -> argparse.ArgumentParser:

    top = argparse.ArgumentParser(
        prog="crosscheck",
        description="Thevenin and Norton equivalents of linear AC networks, from crosscheck's own "
        "solver and checked against ngspice.",
        epilog="Exit codes: 0 pass, 1 fail, 2 usage, 3 error (invalid input), 4 unavailable, "
        "5 drift from the baseline.",
    )
    top.add_argument("--version", action="version", version=f"crosscheck {__version__}")
    sub = top.add_subparsers(dest="command", required=True, metavar="COMMAND")

    reduce = sub.add_parser("reduce", help="equivalents of one netlist at a port and frequencies")
    reduce.add_argument("netlist", type=Path, help="SPICE netlist file (R L C V I E F G H K, .subckt, .param)")
    reduce.add_argument("--port", nargs=2, metavar=("A", "B"), required=True, help="port nodes: V_th = V(A) - V(B)")
    reduce.add_argument(
        "--freq",
        nargs="+",
        required=True,
        metavar="F",
        help="frequencies in Hz, engineering notation allowed (50 1k 10.7meg; 0 is DC)",
    )
    reduce.add_argument("--format", choices=("text", "json"), default="text")
    reduce.add_argument(
        "--engine",
        choices=("own", "spice", "both"),
        default="both",
        help="own: crosscheck's solver only; spice: compare with ngspice too (same as both)",
    )
    reduce.add_argument(
        "--expect",
        action="append",
        default=[],
        metavar="QTY[@F]=VALUE",
        help='a hand-calculated value to check, e.g. vth=57.34∠-55° or "zth=4.7 - j6.7" '
        "(vth zth in yn series_r series_l series_c); @F names the frequency when several "
        "--freq are given; repeat for more values",
    )
    reduce.add_argument(
        "--expect-rel",
        type=float,
        default=None,
        metavar="REL",
        help="magnitude tolerance of --expect values (default 0.01: three significant figures)",
    )
    reduce.add_argument(
        "--expect-phase",
        type=_phase_option,
        default=None,
        metavar="DEG",
        help="phase tolerance of --expect values in degrees (default 0.5); 'none' judges the "
        "complex relative error against --expect-rel instead",
    )
    _common_options(reduce)

    verify = sub.add_parser("verify", help="check case files (and netlists) with both engines")
    verify.add_argument(
        "paths",
        nargs="+",
        type=Path,
        metavar="PATH",
        help="case files (*.toml), folders searched for them, or netlists (with --port and --freq)",
    )
    verify.add_argument("--port", nargs=2, metavar=("A", "B"), help="port for netlists named directly")
    verify.add_argument("--freq", nargs="+", metavar="F", help="frequencies for netlists named directly")
    verify.add_argument(
        "--format",
        choices=VERIFY_FORMATS,
        default=None,
        help="report format (default: from the --output file's extension — .json, .xml (junit), "
        ".csv, .html, .md — else text)",
    )
    verify.add_argument(
        "--output",
        type=Path,
        action="append",
        help="write the report to this file instead of standard output; repeat it for several "
        "formats from one run (each file's extension names its format)",
    )
    verify.add_argument("--workers", type=int, default=None, help="ngspice worker processes (default: all cores)")
    verify.add_argument("--cluster", metavar="ADDRESS", help=CLUSTER_HELP)
    verify.add_argument("--timeout", type=float, default=60.0, help="seconds ngspice may take per case (default 60)")
    verify.add_argument(
        "--allow-outside-paths", action="store_true", help="let case files name netlists outside their own folder"
    )
    verify.add_argument("--detail", action="store_true", help="show every point of every case")
    verify.add_argument(
        "--baseline",
        type=Path,
        metavar="FILE",
        help="compare the own solver's equivalents with this stored baseline; a change beyond "
        "numerical noise is 'drift' (exit code 5)",
    )
    verify.add_argument(
        "--update-baseline",
        action="store_true",
        help="write this run's equivalents to --baseline FILE and list what changed",
    )
    _common_options(verify)
    _fuzz_parser(sub)
    return top


def _fuzz_parser(sub) -> None:
    from crosscheck.fuzz.generate import (  # start-up time: loaded only by the commands that use it
        ALL_KINDS,
        FAMILIES,
        MIXED,
    )

    fuzz = sub.add_parser("fuzz", help="random networks through both engines; shrinks what disagrees")
    fuzz.add_argument("--count", type=int, default=100, metavar="N", help="how many networks (default 100)")
    fuzz.add_argument("--seed", type=int, default=0, metavar="S", help="run seed; case i gets seed S*1000003+i")
    fuzz.add_argument(
        "--case-seed",
        type=int,
        nargs="+",
        metavar="SEED",
        help="run only these case seeds (printed with every failure) instead of --count/--seed",
    )
    fuzz.add_argument(
        "--nodes",
        type=int,
        nargs=2,
        default=(2, 8),
        metavar=("MIN", "MAX"),
        help="non-ground nodes per network (default 2 8)",
    )
    fuzz.add_argument(
        "--family",
        choices=(MIXED, *FAMILIES),
        default=MIXED,
        help="topology family; mixed (default) draws one per case",
    )
    fuzz.add_argument(
        "--kinds",
        default=ALL_KINDS,
        metavar="LETTERS",
        help=f"element kinds to draw from (default {ALL_KINDS}; F and H bring 0 V sensing sources)",
    )
    fuzz.add_argument("--workers", type=int, default=None, help="ngspice worker processes (default: all cores)")
    fuzz.add_argument("--cluster", metavar="ADDRESS", help=CLUSTER_HELP)
    fuzz.add_argument(
        "--out",
        type=Path,
        metavar="DIR",
        help="write summary.json and, per failure, the shrunk netlist, case file and numbers here",
    )
    fuzz.add_argument("--format", choices=("text", "json"), default="text", help="summary on standard output")
    fuzz.add_argument("--no-shrink", action="store_true", help="report failures without shrinking them")


def _common_options(p: argparse.ArgumentParser) -> None:
    p.add_argument("--allow-negative", action="store_true", help="accept negative resistances (active device models)")
    p.add_argument(
        "--sources",
        choices=("peak", "rms"),
        default="peak",
        help="how the netlist's AC magnitudes are meant (labels the output; default peak)",
    )
    p.add_argument("--rel", type=float, default=None, help="relative tolerance, solver vs SPICE (default 1e-6)")


def main(argv: Sequence[str] | None = None) -> int:
    args = _parser().parse_args(argv)
    try:
        if args.command == "reduce":
            return _reduce(args)
        if args.command == "verify":
            return _verify(args)
        if args.command == "fuzz":
            return _fuzz(args)
    except (CrosscheckError, _AlreadyReported) as exc:
        print(f"crosscheck: error: {exc}", file=sys.stderr)
        return EXIT_ERROR
    except KeyboardInterrupt:
        print("crosscheck: interrupted", file=sys.stderr)
        return 130
    return EXIT_USAGE


def _frequencies(texts: Sequence[str]) -> list[float]:
    """--freq values in the order given (engineering numbers; finite and >= 0)."""
    return list(checked_frequencies((parse_number(t) for t in texts), where="--freq"))


def _tolerance(args: argparse.Namespace):

    if args.rel is None:
        return SOLVER_VS_SPICE
    return Tolerance(rel=args.rel, abs=SOLVER_VS_SPICE.abs)


def _phase_option(text: str) -> float | str:
    """--expect-phase: degrees in [0, 180], or 'none' to judge by the complex relative error."""
    if text.strip().lower() == "none":
        return "none"
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a number of degrees; write e.g. 0.5, or none") from None
    if not 0 <= value <= 180:
        raise argparse.ArgumentTypeError(f"{text!r} must be between 0 and 180 degrees")
    return value


def _expect_tolerance(args: argparse.Namespace):

    rel = HAND_CALCULATION.rel if args.expect_rel is None else args.expect_rel
    phase = {None: HAND_CALCULATION.phase_deg, "none": None}.get(args.expect_phase, args.expect_phase)
    try:
        return Tolerance(rel=rel, abs=HAND_CALCULATION.abs, phase_deg=phase)
    except ValueError as exc:
        raise _UsageError(f"--expect-rel: {exc}") from None


class _UsageError(Exception):
    pass


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

    freqs = _frequencies(args.freq)
    try:
        expectations = _expectations(args, freqs)
    except _UsageError as exc:
        print(f"crosscheck reduce: error: {exc}", file=sys.stderr)
        return EXIT_USAGE
    extra = [e.at_hz for e in expectations if not any(same_frequency(e.at_hz, f) for f in freqs)]
    case = case_from_netlist(
        str(args.netlist),
        _read_text(args.netlist),
        tuple(args.port),
        freqs,
        _tolerance(args),
        args.allow_negative,
        args.sources,
    )
    case = replace(case, freqs_hz=tuple(freqs + extra), expectations=expectations)
    if args.engine == "own":
        [result] = run_cases([case], engine="own")
    else:
        from crosscheck.spice.workers import SpicePool  # start-up time: loaded only by the commands that use it

        with SpicePool(workers=1) as pool:
            [result] = run_cases([case], engine="both", pool=pool)
    if result.error and result.own is None:
        raise _AlreadyReported(result.error)
    compared = args.engine != "own"
    if args.format == "json":
        doc = reduction_document(result, compared, args.sources, str(args.netlist), bool(expectations))
        json.dump(doc, sys.stdout, indent=2, ensure_ascii=False)
        print()
    else:
        print_reduction(Console(), result, compared, args.sources, bool(expectations))
    return exit_code([result.verdict])


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


def _read_text(path: Path) -> str:

    return read_netlist_text(path)


def _verify(args: argparse.Namespace) -> int:
    from rich.console import Console
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeRemainingColumn

    from crosscheck.report.results_text import print_results  # start-up time: loaded only by the commands that use it
    from crosscheck.run.batch import run_batch  # start-up time: loaded only by the commands that use it
    from crosscheck.run.check import case_from_netlist  # start-up time: loaded only by the commands that use it

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
    baseline = _baseline(args)
    items: list = []
    for path in find_case_files(list(args.paths)):
        try:
            if path.suffix.lower() == ".toml":
                items.append(load_case(path, allow_outside=args.allow_outside_paths))
            else:
                if not args.port or not args.freq:
                    raise CrosscheckError(f"{path}: a netlist named directly needs --port A B and --freq F ...")
                items.append(
                    case_from_netlist(
                        str(path),
                        _read_text(path),
                        tuple(args.port),
                        _frequencies(args.freq),
                        _tolerance(args),
                        args.allow_negative,
                        args.sources,
                    )
                )
        except CrosscheckError as exc:
            items.append((str(path), exc))
    if not items:
        raise CrosscheckError(f"no case files (*.toml) found under {', '.join(map(str, args.paths))}")
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
    with progress, _executor(args.cluster) as executor:
        task = progress.add_task("cases", total=len(items), rate="")
        results = run_batch(
            items,
            executor,
            workers=args.workers,
            timeout_s=args.timeout,
            on_done=lambda r: progress.advance(task),
            baseline=baseline,
        )
    outputs = args.output or [None]
    for output in outputs:
        fmt = verify_format(args.format, output)
        if fmt != "text":
            _emit(render_report(fmt, results), output)
        else:
            with open(output, "w", encoding="utf-8") if output else nullcontext(None) as handle:
                print_results(Console(file=handle, width=160 if handle else None), results, detail=args.detail)
    args.format = verify_format(args.format, outputs[0])
    if args.output:
        # The reports went to files: the terminal still gets the summary and where to look.
        print_results(Console(), results, detail=False)
        print(f"report{'s' if len(outputs) > 1 else ''} written to {', '.join(map(str, outputs))}")
    if args.update_baseline:
        _update_baseline(args, results)
    return exit_code([r.verdict for r in results])


def _baseline(args: argparse.Namespace):
    """The stored baseline to compare with, or None (none asked for, or it is about to be rewritten)."""
    if args.baseline is None or args.update_baseline:
        return None

    return load_baseline(args.baseline)


def _update_baseline(args: argparse.Namespace, results) -> None:
    """Write the baseline explicitly and say what changed (to stderr when stdout carries a report file format)."""

    old = load_baseline(args.baseline) if args.baseline.exists() else None
    new, kept = updated_baseline(results, args.baseline, old)
    lines = format_changes(diff_baselines(old, new, kept), args.baseline)
    write_baseline(new, args.baseline)
    out = sys.stderr if args.format != "text" and not args.output else sys.stdout
    print("\n".join(lines), file=out)


def _emit(text: str, output: Path | None) -> None:
    if output is None:
        sys.stdout.write(text)
    else:
        output.parent.mkdir(parents=True, exist_ok=True)
        output.write_text(text, encoding="utf-8")


def _fuzz(args: argparse.Namespace) -> int:
    """Random networks through both engines; exit 0 when nothing disagrees beyond what roundoff explains."""
    from rich.console import Console

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
        print_summary(Console(), summary)
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
