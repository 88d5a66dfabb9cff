"""Command line: argument parsing and exit codes only; the work happens in the modules it calls."""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path
from typing import Sequence

from .errors import CrosscheckError

# Exit codes (documented in the README).
EXIT_OK = 0           # every compared quantity within tolerance (or nothing to compare)
EXIT_FAIL = 1         # some quantity outside tolerance, or a design limit or expectation not met
EXIT_USAGE = 2        # the command line itself is wrong (argparse's own code)
EXIT_ERROR = 3        # invalid input (netlist, case file) or an engine crashed on a case
EXIT_UNAVAILABLE = 4  # nothing failed, but an engine could not produce some quantity


def _parser() -> argparse.ArgumentParser:
    from . import __version__

    top = argparse.ArgumentParser(
        prog="crosscheck",
        description="Thevenin and Norton equivalents of linear AC networks, from crosscheck's own "
                    "solver and checked against ngspice.",
        epilog="Exit codes: 0 pass, 1 fail, 2 usage, 3 error (invalid input), 4 unavailable.",
    )
    top.add_argument("--version", action="version", version=f"crosscheck {__version__}")
    sub = top.add_subparsers(dest="command", required=True, metavar="COMMAND")

    reduce = sub.add_parser("reduce", help="equivalents of one netlist at a port and frequencies")
    reduce.add_argument("netlist", type=Path, help="SPICE netlist file (R L C V I E F G H K, .subckt, .param)")
    reduce.add_argument("--port", nargs=2, metavar=("A", "B"), required=True,
                        help="port nodes: V_th = V(A) - V(B)")
    reduce.add_argument("--freq", nargs="+", required=True, metavar="F",
                        help="frequencies in Hz, engineering notation allowed (50 1k 10.7meg; 0 is DC)")
    reduce.add_argument("--format", choices=("text", "json"), default="text")
    reduce.add_argument("--engine", choices=("own", "spice", "both"), default="both",
                        help="own: crosscheck's solver only; spice: compare with ngspice too (same as both)")
    _common_options(reduce)

    verify = sub.add_parser("verify", help="check case files (and netlists) with both engines")
    verify.add_argument("paths", nargs="+", type=Path, metavar="PATH",
                        help="case files (*.toml), folders searched for them, or netlists (with --port and --freq)")
    verify.add_argument("--port", nargs=2, metavar=("A", "B"), help="port for netlists named directly")
    verify.add_argument("--freq", nargs="+", metavar="F", help="frequencies for netlists named directly")
    verify.add_argument("--format", choices=("text", "json"), default="text")
    verify.add_argument("--output", type=Path, help="write the report to this file instead of standard output")
    verify.add_argument("--workers", type=int, default=None, help="ngspice worker processes (default: all cores)")
    verify.add_argument("--timeout", type=float, default=60.0, help="seconds ngspice may take per case (default 60)")
    verify.add_argument("--allow-outside-paths", action="store_true",
                        help="let case files name netlists outside their own folder")
    verify.add_argument("--detail", action="store_true", help="show every point of every case")
    _common_options(verify)
    return top


def _common_options(p: argparse.ArgumentParser) -> None:
    p.add_argument("--allow-negative", action="store_true",
                   help="accept negative resistances (active device models)")
    p.add_argument("--sources", choices=("peak", "rms"), default="peak",
                   help="how the netlist's AC magnitudes are meant (labels the output; default peak)")
    p.add_argument("--rel", type=float, default=None,
                   help="relative tolerance, solver vs SPICE (default 1e-6)")


def main(argv: Sequence[str] | None = None) -> int:
    args = _parser().parse_args(argv)
    try:
        if args.command == "reduce":
            return _reduce(args)
        if args.command == "verify":
            return _verify(args)
    except (CrosscheckError, _AlreadyReported) as exc:
        print(f"crosscheck: error: {exc}", file=sys.stderr)
        return EXIT_ERROR
    except KeyboardInterrupt:
        print("crosscheck: interrupted", file=sys.stderr)
        return 130
    return EXIT_USAGE


def _frequencies(texts: Sequence[str]) -> list[float]:
    from .values import parse_number

    freqs = []
    for text in texts:
        f = parse_number(text)
        if not f >= 0 or f == float("inf"):
            raise CrosscheckError(f"frequency {text!r} must be a finite number >= 0 Hz")
        freqs.append(f)
    return freqs


def _tolerance(args: argparse.Namespace):
    from .tolerance import SOLVER_VS_SPICE, Tolerance

    if args.rel is None:
        return SOLVER_VS_SPICE
    return Tolerance(rel=args.rel, abs=SOLVER_VS_SPICE.abs)


def exit_code(verdicts: Sequence[str]) -> int:
    """0 all pass; 1 any fail; 3 any error; 4 only unavailable beside passes."""
    if "error" in verdicts:
        return EXIT_ERROR
    if "fail" in verdicts:
        return EXIT_FAIL
    if "unavailable" in verdicts:
        return EXIT_UNAVAILABLE
    return EXIT_OK


def _reduce(args: argparse.Namespace) -> int:
    from rich.console import Console

    from .check import case_from_netlist, run_cases
    from .report.equivalents_json import equivalents_document
    from .report.equivalents_text import print_equivalents
    from .report.results_json import case_document, results_document
    from .report.results_text import print_results

    freqs = _frequencies(args.freq)
    text = _read_text(args.netlist)
    case = case_from_netlist(str(args.netlist), text, tuple(args.port), freqs, _tolerance(args),
                             args.allow_negative, args.sources)
    case = _keep_order(case, freqs)
    if args.engine == "own":
        [result] = run_cases([case], engine="own")
    else:
        from .workers import SpicePool

        with SpicePool(workers=1) as pool:
            [result] = run_cases([case], engine="both", pool=pool)
    if result.error and result.own is None:
        raise _AlreadyReported(result.error)
    source_note = f"Sources as written in the netlist, taken as {args.sources.upper()} phasors."
    if args.format == "json":
        if args.engine == "own":
            from .network import Port

            doc = equivalents_document(_network_title(result), Port(*result.port), result.own, args.sources,
                                       source_file=str(args.netlist))
        else:
            doc = results_document([result])
            doc.update({"port": list(result.port), "points": case_document(result)["points"],
                        "verdict": result.verdict})
        json.dump(doc, sys.stdout, indent=2, ensure_ascii=False)
        print()
    else:
        console = Console()
        print_equivalents(console, result.title, result.port, result.own, source_note,
                          caution=args.engine == "own")
        if args.engine != "own":
            print_results(console, [result], detail=True)
    return exit_code([result.verdict])


def _network_title(result):
    from .network import Network

    return Network(result.title, ())


def _keep_order(case, freqs):
    from dataclasses import replace

    return replace(case, freqs_hz=tuple(freqs))


class _AlreadyReported(Exception):
    pass


def _read_text(path: Path) -> str:
    from .netlist import read_netlist_text

    return read_netlist_text(path)


def _verify(args: argparse.Namespace) -> int:
    from rich.console import Console
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeRemainingColumn

    from .cases import find_case_files, load_case
    from .check import case_from_netlist, run_cases
    from .report.results_json import results_document
    from .report.results_text import print_results
    from .workers import SpicePool

    items: list = []
    for path in find_case_files(list(args.paths)):
        try:
            if path.suffix.lower() == ".toml":
                items.append(load_case(path, allow_outside=args.allow_outside_paths))
            else:
                if not args.port or not args.freq:
                    raise CrosscheckError(f"{path}: a netlist named directly needs --port A B and --freq F ...")
                items.append(case_from_netlist(str(path), _read_text(path), tuple(args.port),
                                               _frequencies(args.freq), _tolerance(args), args.allow_negative,
                                               args.sources))
        except CrosscheckError as exc:
            items.append((str(path), exc))
    if not items:
        raise CrosscheckError(f"no case files (*.toml) found under {', '.join(map(str, args.paths))}")
    err_console = Console(stderr=True)
    progress = Progress(TextColumn("checking"), BarColumn(), MofNCompleteColumn(), TextColumn("{task.fields[rate]}"),
                        TimeRemainingColumn(), console=err_console, transient=True,
                        disable=not err_console.is_terminal)
    with progress, SpicePool(workers=args.workers, timeout_s=args.timeout) as pool:
        task = progress.add_task("cases", total=len(items), rate="")
        results = run_cases(items, engine="both", pool=pool,
                            on_done=lambda r: progress.advance(task))
    if args.format == "json":
        text = json.dumps(results_document(results), indent=2, ensure_ascii=False) + "\n"
        _emit(text, args.output)
    else:
        console = Console(file=open(args.output, "w", encoding="utf-8") if args.output else None,
                          width=160 if args.output else None)
        print_results(console, results, detail=args.detail)
    return exit_code([r.verdict for r in results])


def _emit(text: str, output: Path | None) -> None:
    if output is None:
        sys.stdout.write(text)
    else:
        output.parent.mkdir(parents=True, exist_ok=True)
        output.write_text(text, encoding="utf-8")


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
