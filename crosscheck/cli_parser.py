"""The command line's grammar: every command, option and help text (the work is in ``cli``)."""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import Any

from crosscheck.report.outputs import VERIFY_FORMATS
from crosscheck.version import __version__

CLUSTER_HELP = (
    "run every case as a task on the Dask cluster whose scheduler is at ADDRESS (tcp://host:port); "
    "its workers need crosscheck and ngspice installed (pip install 'crosscheck[cluster]')"
)


def parser() -> argparse.ArgumentParser:
    """The whole command line: ``reduce``, ``verify`` and ``fuzz`` with their options."""
    top = argparse.ArgumentParser(
        prog="crosscheck",
        description="Thevenin and Norton equivalents of linear AC networks, from crosscheck's own "
        "solver and checked against ngspice.",
        epilog="Exit codes: 0 pass, 1 fail, 2 usage, 3 error (invalid input), 4 unavailable, "
        "5 drift from the baseline.",
    )
    top.add_argument("--version", action="version", version=f"crosscheck {__version__}")
    sub = top.add_subparsers(dest="command", required=True, metavar="COMMAND")
    _reduce_parser(sub)
    _verify_parser(sub)
    _fuzz_parser(sub)
    return top


def _reduce_parser(sub: Any) -> None:
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


def _verify_parser(sub: Any) -> None:
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
    verify.add_argument(
        "--timeout",
        type=float,
        default=60.0,
        help="seconds each route may take per case (default 60; raise it for large networks)",
    )
    verify.add_argument(
        "--memory",
        default="2G",
        metavar="SIZE",
        help="memory each route may use per case, e.g. 4G (default 2G; raise it for large networks)",
    )
    verify.add_argument(
        "--allow-outside-paths", action="store_true", help="let case files name netlists outside their own folder"
    )
    verify.add_argument("--detail", action="store_true", help="show every point of every case")
    _baseline_options(verify)
    _common_options(verify)


def _baseline_options(verify: argparse.ArgumentParser) -> None:
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
        help="write this run's equivalents to --baseline FILE and list what changed; only the cases "
        "of this run change, the others are kept",
    )
    verify.add_argument(
        "--prune",
        action="store_true",
        help="with --update-baseline: also remove the cases of the baseline that are not in this run (each is listed)",
    )
    verify.add_argument(
        "--replace-corrupt",
        action="store_true",
        help="with --update-baseline: when the baseline cannot be read, rewrite it from this run and keep "
        "the unreadable file as FILE.corrupt",
    )


def _fuzz_parser(sub: Any) -> None:
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
