"""What the commands share: exit codes, usage errors, option values turned into settings, --strict,
--touchstone; one module so that `cli` (verify, fuzz) and `cli_reduce` (reduce) agree."""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence
from typing import TYPE_CHECKING

from crosscheck.errors import CrosscheckError
from crosscheck.model.budget import Budget, parse_memory
from crosscheck.model.frequencies import checked_frequencies
from crosscheck.model.tolerance import HAND_CALCULATION, SOLVER_VS_SPICE, Tolerance
from crosscheck.model.values import parse_number

if TYPE_CHECKING:  # the rest loads inside the commands that use it (start-up time: --version loads none of it)
    from crosscheck.judge.result import CaseResult
    from crosscheck.model.read_limits import ReadLimits

# Exit codes (documented in the README).
EXIT_OK = 0  # every compared quantity within tolerance (or nothing to compare)
EXIT_FAIL = 1  # some quantity outside tolerance, or a design limit or expectation not met
EXIT_USAGE = 2  # the command line itself is wrong (argparse's own code)
EXIT_ERROR = 3  # invalid input (netlist, case file), an engine crashed on a case, or (--strict) a reading warning
EXIT_UNAVAILABLE = 4  # nothing failed, but an engine could not produce some quantity
EXIT_DRIFT = 5  # nothing failed, but a result moved from the stored baseline (verify --baseline)


def terminal(text: object) -> str:
    """``report.untrusted.terminal_text``: user text made inert for the terminal (rich's markup loads on use)."""
    from crosscheck.report.untrusted import terminal_text  # start-up time: not for --version and --help

    return terminal_text(text)


def frequencies(texts: Sequence[str]) -> list[float]:
    """--freq values in the order given (engineering numbers; finite and >= 0)."""
    return list(checked_frequencies((parse_number(t) for t in texts), where="--freq"))


def excitation_frequencies(texts: Sequence[str] | None, excitation: str) -> list[float]:
    """--freq under --excitation: required under ac; under dc absent means 0 Hz and any other is a usage error."""
    if excitation == "dc":
        freqs = frequencies(texts) if texts else [0.0]
        other = [t for t, f in zip(texts or (), freqs, strict=False) if f != 0]
        if other:
            raise UsageError(
                f"--excitation dc with --freq {other[0]}: a DC network is solved at 0 Hz only; "
                "leave --freq out (or write --freq 0), or use --excitation ac for that frequency"
            )
        return freqs
    if not texts:
        raise UsageError("--freq F ... is required (frequencies in Hz), unless --excitation dc (0 Hz)")
    return frequencies(texts)


def budget_from_options(args: argparse.Namespace) -> Budget:
    """--timeout and --memory as the time and memory each route may take per case (a usage error if unusable)."""
    return Budget(time_s=args.timeout, memory_bytes=parse_memory(args.memory))


def tolerance_from_options(args: argparse.Namespace) -> Tolerance:
    """--rel as the solver-vs-SPICE tolerance (the default when not given)."""
    if args.rel is None:
        return SOLVER_VS_SPICE
    return Tolerance(rel=args.rel, abs=SOLVER_VS_SPICE.abs)


def expect_tolerance(args: argparse.Namespace) -> Tolerance:
    """--expect-rel and --expect-phase as the hand values' tolerance (three significant figures by default)."""
    rel = HAND_CALCULATION.rel if args.expect_rel is None else args.expect_rel
    phase = {None: HAND_CALCULATION.phase_deg, "none": None}.get(args.expect_phase, args.expect_phase)
    try:
        return Tolerance(rel=rel, abs=HAND_CALCULATION.abs, phase_deg=phase)
    except ValueError as exc:
        raise UsageError(f"--expect-rel: {exc}") from None


class UsageError(CrosscheckError, ValueError):
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


class AlreadyReported(CrosscheckError):
    """An error already put in words by the case result; the command line prints it as it is."""


def strict(args: argparse.Namespace, results: Sequence[CaseResult]) -> list[CaseResult]:
    """The results under --strict (an unacknowledged reading warning makes its case an error), else as they are."""
    from crosscheck.run.check import held_strictly  # start-up time: per command

    return [held_strictly(r) for r in results] if args.strict else list(results)


def touchstone(args: argparse.Namespace, results: Sequence[CaseResult], command: str) -> bool:
    """``--touchstone``: write the files (report/touchstone.py); False, with the reasons on stderr, when one
    could not be written."""
    if args.touchstone is None:
        return True
    from crosscheck.report.touchstone import export_cases  # start-up time: loaded only when asked for

    written, problems = export_cases(
        args.touchstone,
        results,
        args.touchstone_kind,
        args.touchstone_z0,
        args.touchstone_version,
        one_file=command == "reduce",
    )
    for problem in problems:
        print(f"crosscheck {command}: error: {terminal(problem)}", file=sys.stderr)
    if written:
        print(f"Touchstone: {len(written)} file(s) written under {terminal(str(args.touchstone))}", file=sys.stderr)
    return not problems


def warnings_on_stderr(result: CaseResult) -> None:
    """The case's unacknowledged reading warnings on stderr, for a reduce that ends in an error without a report."""

    for warning in result.open_warnings:
        print(f"crosscheck: warning: {terminal(str(warning))}", file=sys.stderr)


def read_limits_given(args: argparse.Namespace) -> ReadLimits | None:
    """--max-elements and --max-netlist-mib as the reader's limits (None when neither was given)."""
    from crosscheck.model.read_limits import ReadLimits  # start-up time: per command

    return ReadLimits.given(args.max_elements, args.max_netlist_mib)
