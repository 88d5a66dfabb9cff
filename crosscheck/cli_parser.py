"""The command line's grammar: every command, option and help text (the work is in ``cli``)."""

from __future__ import annotations

import argparse
import math
import sys
from dataclasses import replace
from pathlib import Path
from typing import TYPE_CHECKING, Any

from crosscheck.errors import CrosscheckError
from crosscheck.model.frequencies import check_frequency_text, checked_frequency
from crosscheck.model.read_limits import DEFAULT_MAX_ELEMENTS, DEFAULT_MAX_NETLIST_MIB, MOST_ELEMENTS, MOST_NETLIST_MIB
from crosscheck.model.reading import WARNING_CODES
from crosscheck.model.values import parse_number

if TYPE_CHECKING:
    from crosscheck.model.vary import SpreadSpec, Vary
from crosscheck.report.outputs import VERIFY_FORMATS
from crosscheck.version import __version__

#: The smallest --rel that means anything: machine epsilon, the spacing of doubles near 1. Below it (0
#: included) the comparison would drop its round-off floor and blame the last bit of any answer on
#: ill-conditioning, which contradicts the documented pass rule; so those values are refused.
SMALLEST_REL = sys.float_info.epsilon

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
    reduce.add_argument(
        "--port",
        nargs=2,
        action="append",
        metavar=("A", "B"),
        required=True,
        help="port nodes: V_th = V(A) - V(B); repeat for several ports (voc, Z, isc and Y; ports numbered 1, 2, ...)",
    )
    reduce.add_argument(
        "--freq",
        nargs="+",
        default=None,
        type=_frequency_option,
        metavar="F",
        help="frequencies in Hz, engineering notation allowed (50 1k 10.7meg; 0 is DC); "
        "required unless --excitation dc (0 Hz)",
    )
    reduce.add_argument("--format", choices=("text", "json"), default="text")
    reduce.add_argument(
        "--engine",
        choices=("own", "spice", "both"),
        default="both",
        help="own: crosscheck's solver only; spice: ngspice only (its equivalents, nothing compared); "
        "both (default): both, compared",
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
        type=_expect_rel_option,
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
    _excitation_option(reduce, "")
    _touchstone_options(reduce, "a file (.sNp, n = number of ports; .ts also for 2.0)")
    _spread_options(reduce, "")


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
    verify.add_argument(
        "--freq", nargs="+", type=_frequency_option, metavar="F", help="frequencies for netlists named directly"
    )
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
        "formats from one run (each file's extension names its format: .json .xml .csv .html .htm .md "
        ".markdown .txt; without --format any other extension is refused, none at all is text)",
    )
    verify.add_argument(
        "--workers", type=_count_option, default=None, help="ngspice worker processes (default: all cores)"
    )
    verify.add_argument("--cluster", metavar="ADDRESS", help=CLUSTER_HELP)
    verify.add_argument(
        "--timeout",
        type=float,  # checked with --memory right after parsing, by the budget (model/budget.py)
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
    _touchstone_options(verify, "a folder, one <case>.sNp per case (or a file when there is one case)")
    _baseline_options(verify)
    _common_options(verify)
    _excitation_option(verify, " for netlists named directly (case files say excitation = ...)")
    _spread_options(
        verify,
        " for netlists named directly (case files state [[vary]]; --samples, --seed and "
        "--spice-samples also override theirs)",
    )


def _baseline_options(verify: argparse.ArgumentParser) -> None:
    verify.add_argument(
        "--baseline",
        type=_baseline_option,
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
    from crosscheck.fuzz.knobs import (  # start-up time: the fuzz grammar needs the knobs, not the generator
        ALL_KINDS,
        FAMILIES,
        MIXED,
    )

    fuzz = sub.add_parser("fuzz", help="random networks through both engines; shrinks what disagrees")
    fuzz.add_argument("--count", type=_count_option, default=100, metavar="N", help="how many networks (default 100)")
    fuzz.add_argument(
        "--seed", type=_seed_option, default=0, metavar="S", help="run seed; case i gets seed S*1000003+i"
    )
    fuzz.add_argument(
        "--case-seed",
        type=_seed_option,
        nargs="+",
        metavar="SEED",
        help="run only these case seeds (printed with every failure) instead of --count/--seed",
    )
    fuzz.add_argument(
        "--nodes",
        type=_count_option,
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
    fuzz.add_argument(
        "--workers", type=_count_option, default=None, help="ngspice worker processes (default: all cores)"
    )
    fuzz.add_argument("--cluster", metavar="ADDRESS", help=CLUSTER_HELP)
    fuzz.add_argument(
        "--out",
        type=Path,
        metavar="DIR",
        help="write summary.json and, per failure, the shrunk netlist, case file and numbers here",
    )
    fuzz.add_argument("--format", choices=("text", "json"), default="text", help="summary on standard output")
    fuzz.add_argument("--no-shrink", action="store_true", help="report failures without shrinking them")


def _touchstone_options(p: argparse.ArgumentParser, target: str) -> None:
    """``--touchstone`` and its kind, reference and version (report/touchstone.py writes the file)."""
    p.add_argument(
        "--touchstone",
        type=Path,
        metavar="PATH",
        help=f"also write the own route's matrices as Touchstone to {target}",
    )
    p.add_argument(
        "--touchstone-kind",
        type=str.upper,
        choices=("Z", "Y", "S"),
        default="Z",
        help="parameters written: Z (default), Y, or S relative to --touchstone-z0",
    )
    p.add_argument(
        "--touchstone-z0",
        type=_z0_option,
        default=50.0,
        metavar="OHMS",
        help="reference resistance of the file, one for every port (default 50); version 1.1 also "
        "normalises Z and Y by it",
    )
    p.add_argument("--touchstone-version", choices=("1.1", "2.0"), default="1.1", help="Touchstone version (1.1)")


def _z0_option(text: str) -> float:
    value = _finite(text, "--touchstone-z0")
    if value <= 0:
        raise argparse.ArgumentTypeError(f"--touchstone-z0 {text!r} is not above 0 ohm: give a resistance, e.g. 50")
    return value


def _common_options(p: argparse.ArgumentParser) -> None:
    p.add_argument("--allow-negative", action="store_true", help="accept negative resistances (active device models)")
    p.add_argument(
        "--sources",
        choices=("peak", "rms"),
        default=None,
        help="how the netlist's AC magnitudes are meant (labels the output; default peak); with verify it "
        "overrides the case files' own 'sources' (the report header says so)",
    )
    p.add_argument(
        "--rel",
        type=_rel_option,
        default=None,
        help=f"relative tolerance, solver vs SPICE (default 1e-6; from {SMALLEST_REL:.3g}, machine epsilon, to 1)",
    )
    _warning_options(p)
    _size_options(p)


def _size_options(p: argparse.ArgumentParser) -> None:
    """--max-elements, --max-netlist-mib: the reader's limits for untrusted input, raised for trusted work."""
    p.add_argument(
        "--max-elements",
        type=lambda text: _limit_option(text, MOST_ELEMENTS),
        default=None,
        metavar="N",
        help=f"read netlists of up to N elements after flattening (default {DEFAULT_MAX_ELEMENTS:,}, a limit for "
        "untrusted input; raise it for a large network you trust); overrides case files' max_elements",
    )
    p.add_argument(
        "--max-netlist-mib",
        type=lambda text: _limit_option(text, MOST_NETLIST_MIB),
        default=None,
        metavar="N",
        help=f"read netlist files of up to N MiB (default {DEFAULT_MAX_NETLIST_MIB}, a limit for untrusted input); "
        "overrides case files' max_netlist_mib",
    )


def _limit_option(text: str, most: int) -> int:
    value = _whole(text, f"a whole number from 1 to {most}, e.g. 2000000")
    if not 1 <= value <= most:
        raise argparse.ArgumentTypeError(f"{text!r} is out of range; write a whole number from 1 to {most}")
    return value


def _excitation_option(p: argparse.ArgumentParser, what: str) -> None:
    p.add_argument(
        "--excitation",
        choices=("ac", "dc"),
        default=None,
        help=f"what drives the network{what}: ac (default: the sources' AC values, at the --freq "
        "frequencies) or dc (the sources' DC values, at 0 Hz only: leave --freq out, or give 0; "
        "ngspice's route then uses its operating point)",
    )


def _warning_options(p: argparse.ArgumentParser) -> None:
    p.add_argument(
        "--strict",
        action="store_true",
        help="make every reading warning nobody acknowledged an error (exit 3), for CI gates; without it a "
        "warning is reported in every format but never changes a verdict or the exit code",
    )
    p.add_argument(
        "--accept-warning",
        action="append",
        default=[],
        choices=tuple(WARNING_CODES),
        metavar="CODE",
        help="acknowledge a reading warning for netlists named on the command line (case files use "
        f"accept_warnings); repeat for more. Codes: {', '.join(WARNING_CODES)}",
    )


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


def _finite(text: str, what: str) -> float:
    """``text`` as a finite float, or an argparse error naming the value and what to write."""
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a number; write {what}") from None
    if not math.isfinite(value):
        raise argparse.ArgumentTypeError(f"{text!r} is not a finite number; write {what}")
    return value


def _rel_option(text: str) -> float:
    """--rel: a relative tolerance from machine epsilon to 1 (see ``SMALLEST_REL`` for why not 0)."""
    what = f"a relative tolerance from {SMALLEST_REL:.3g} (machine epsilon, the smallest meaningful) to 1, e.g. 1e-6"
    value = _finite(text, what)
    if not SMALLEST_REL <= value <= 1:
        raise argparse.ArgumentTypeError(f"{text!r} is out of range; write {what}")
    return value


def _expect_rel_option(text: str) -> float:
    """--expect-rel: a relative tolerance above 0 and at most 1 for hand-calculated values."""
    what = "a relative tolerance above 0 and at most 1, e.g. 0.01 (three significant figures)"
    value = _finite(text, what)
    if not 0 < value <= 1:
        raise argparse.ArgumentTypeError(f"{text!r} is out of range; write {what}")
    return value


def _spread_options(p: argparse.ArgumentParser, what: str) -> None:
    """--vary (repeatable), --samples, --seed, --spice-samples: component spread (``model.vary``)."""
    p.add_argument(
        "--vary",
        action="append",
        default=[],
        type=_vary_option,
        metavar="PARTS=TOL",
        help='component spread, e.g. "R*=1%%", "C1=10n", "V1=10%%:normal", "R1,R2=1%%@pair" (a group moves '
        f"together); repeat for more parts{what}",
    )
    p.add_argument(
        "--samples", type=_samples_option, default=None, metavar="N", help="Monte Carlo samples (default 0: none)"
    )
    p.add_argument("--seed", type=_seed_option, default=None, metavar="S", help="Monte Carlo seed (default 1)")
    p.add_argument(
        "--spice-samples",
        type=_samples_option,
        default=None,
        metavar="N",
        help="Monte Carlo samples ngspice re-runs to confirm them (default 20)",
    )


def spread_spec(args: argparse.Namespace, stated: SpreadSpec | None) -> SpreadSpec | None:
    from crosscheck.model.vary import SpreadSpec  # start-up time: the grammar loads no model

    """A case's spread: its own (``stated``, a case file's) with --samples, --seed and --spice-samples in place of
    its numbers when given; a netlist's (``stated`` None) from --vary; None when neither states one."""
    if stated is None:
        if not getattr(args, "vary", None):
            return None
        stated = SpreadSpec(tuple(args.vary))
    numbers = {"samples": args.samples, "seed": args.seed, "spice_samples": args.spice_samples}
    return replace(stated, **{k: v for k, v in numbers.items() if v is not None})


def _vary_option(text: str) -> Vary:
    from crosscheck.model.vary import SpreadError, parse_vary_option  # start-up time: the grammar loads no model

    try:
        return parse_vary_option(text)
    except SpreadError as exc:
        raise argparse.ArgumentTypeError(str(exc)) from None


def _samples_option(text: str) -> int:
    """--samples, --spice-samples: a whole number from 0 to ``MAX_SAMPLES``."""
    from crosscheck.model.vary import MAX_SAMPLES  # start-up time: the grammar loads no model

    value = _whole(text, f"a whole number from 0 to {MAX_SAMPLES}, e.g. 2000")
    if not 0 <= value <= MAX_SAMPLES:
        raise argparse.ArgumentTypeError(f"{text!r} is outside 0 to {MAX_SAMPLES}; write e.g. 2000")
    return value


def _whole(text: str, what: str) -> int:
    try:
        return int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a whole number; write {what}") from None


def _count_option(text: str) -> int:
    """--workers, --count, --nodes: a whole number of at least 1."""
    value = _whole(text, "a whole number of at least 1, e.g. 4")
    if value < 1:
        raise argparse.ArgumentTypeError(f"{text!r} must be at least 1; write a whole number of at least 1, e.g. 4")
    return value


def _seed_option(text: str) -> int:
    """--seed, --case-seed: a whole number >= 0 (the random generator takes no negative seeds)."""
    value = _whole(text, "a whole number >= 0, e.g. 0 or 12345")
    if value < 0:
        raise argparse.ArgumentTypeError(f"{text!r} is negative; write a whole number >= 0, e.g. 0 or 12345")
    return value


def _frequency_option(text: str) -> str:
    """--freq: checked here (a finite frequency >= 0 in engineering notation, no misread scale such as
    ``1MHz``: ``frequencies.misread_frequency_text``), kept as written."""
    try:
        check_frequency_text(text, where="--freq")
        checked_frequency(parse_number(text), where="--freq")
    except CrosscheckError as exc:
        raise argparse.ArgumentTypeError(str(exc)) from None
    return text


def _baseline_option(text: str) -> Path:
    """--baseline: a file path, not a folder (a folder cannot be read or written as a baseline)."""
    path = Path(text)
    if path.is_dir():
        raise argparse.ArgumentTypeError(
            f"{text!r} is a folder; name the baseline's JSON file, e.g. {text}/baseline.json"
        )
    return path
