"""`crosscheck reduce`: one netlist at its ports, the equivalents (and both routes compared unless --engine
own), in text or JSON; the exit code."""

from __future__ import annotations

import argparse
import json
import sys
from collections.abc import Sequence
from dataclasses import replace
from typing import TYPE_CHECKING

from crosscheck.cli_common import (
    EXIT_ERROR,
    EXIT_UNAVAILABLE,
    EXIT_USAGE,
    AlreadyReported,
    UsageError,
    excitation_frequencies,
    exit_code,
    expect_tolerance,
    read_limits_given,
    strict,
    terminal,
    tolerance_from_options,
    touchstone,
    warnings_on_stderr,
)
from crosscheck.cli_parser import spread_spec
from crosscheck.vocabulary import same_frequency

if TYPE_CHECKING:  # the rest loads inside the commands that use it (start-up time: --version loads none of it)
    from crosscheck.judge.result import CaseResult


def reduce(args: argparse.Namespace) -> int:
    """One netlist at one port: the equivalents, and both routes compared unless --engine own."""
    from crosscheck.model.netlist import read_netlist_text  # start-up time: per command
    from crosscheck.model.read_limits import ReadLimits  # start-up time: per command
    from crosscheck.report.reduction import print_reduction, reduction_document  # start-up time: per command
    from crosscheck.report.results_text import report_console  # start-up time: per command
    from crosscheck.run.check import case_from_netlist, run_cases  # start-up time: per command

    excitation = args.excitation or "ac"
    sources = args.sources or "peak"
    try:
        freqs = excitation_frequencies(args.freq, excitation)
        expectations = expectations_given(args, freqs)
        if len(args.port) > 1 and args.vary:
            raise UsageError("--vary is computed at one port; give one --port, or reduce each port on its own")
    except UsageError as exc:
        print(f"crosscheck reduce: error: {exc}", file=sys.stderr)
        return EXIT_USAGE
    if args.touchstone is not None and args.engine == "spice":
        print(
            "crosscheck reduce: error: --touchstone writes the own route's matrices; use --engine own or both",
            file=sys.stderr,
        )
        return EXIT_USAGE
    extra = [e.at_hz for e in expectations if not any(same_frequency(e.at_hz, f) for f in freqs)]
    limits = read_limits_given(args)
    case = case_from_netlist(
        str(args.netlist),
        read_netlist_text(args.netlist, limits=limits),
        tuple(args.port[0]),
        freqs,
        tolerance_from_options(args),
        args.allow_negative,
        sources,
        args.accept_warning,
        excitation,
    )
    case = replace(
        case,
        freqs_hz=tuple(freqs + extra),
        expectations=expectations,
        spread=spread_spec(args, None),
        read_limits=limits or ReadLimits(),
    )
    if len(args.port) > 1:  # several ports: voc, Z, isc and Y (``run.multiport``)
        from crosscheck.model.port_spec import MultiportSpec, ports_from_pairs  # start-up time: per command

        case = replace(case, multiport=MultiportSpec(ports_from_pairs(args.port)))
    if args.engine == "own":
        [result] = run_cases([case], engine="own")
    else:
        from crosscheck.spice.workers import SpicePool  # start-up time: per command

        with SpicePool(workers=2 if case.spread is not None else 1) as pool:
            [result] = run_cases([case], engine=args.engine, pool=pool)
    if result.multiport is not None:
        return reduce_multiport(args, result)
    if args.engine == "spice":
        return spice_alone(args, result, sources, bool(expectations))
    result = strict(args, [result])[0]
    if result.error and result.own is None:
        warnings_on_stderr(result)
        raise AlreadyReported(result.error)
    compared = args.engine != "own"
    if args.format == "json":
        doc = reduction_document(result, compared, sources, str(args.netlist), bool(expectations))
        json.dump(doc, sys.stdout, indent=2, ensure_ascii=False)
        print()
    else:
        print_reduction(report_console(), result, compared, sources, bool(expectations))
    if not touchstone(args, [result], "reduce"):
        return EXIT_ERROR
    return exit_code([result.verdict])


def reduce_multiport(args: argparse.Namespace, result: CaseResult) -> int:
    """`reduce` with several --port: the matrices per frequency (both routes unless --engine own)."""
    from crosscheck.report.multiport_reduction import (  # start-up time: loaded only by the commands that use it
        multiport_reduction_document,
        print_multiport,
    )
    from crosscheck.report.results_text import report_console  # start-up time: per command

    result = strict(args, [result])[0]
    if args.format == "json":
        json.dump(multiport_reduction_document(result, str(args.netlist)), sys.stdout, indent=2, ensure_ascii=False)
        print()
    else:
        print_multiport(report_console(), result)
    if not touchstone(args, [result], "reduce"):
        return EXIT_ERROR
    return exit_code([result.verdict])


def spice_alone(args: argparse.Namespace, result: CaseResult, sources: str, expectations: bool) -> int:
    """`reduce --engine spice`: ngspice's equivalents alone (any --expect values held against them), nothing
    compared; exit 4 when ngspice was unavailable, 3 when it failed on the netlist."""
    from crosscheck.api import spice_equivalents  # start-up time: per command
    from crosscheck.judge.case import judged  # start-up time: per command
    from crosscheck.report.reduction import print_reduction, reduction_document  # start-up time: per command
    from crosscheck.report.results_text import report_console  # start-up time: per command

    points = spice_equivalents(result)
    if points is None:
        if result.error and not result.error.startswith("own solver:"):  # the own route's trouble is not asked about
            warnings_on_stderr(result)
            raise AlreadyReported(result.error)
        why = result.spice_note or "ngspice was not run"
        print(f"crosscheck reduce: ngspice gave no equivalents: {terminal(why)}", file=sys.stderr)
        return EXIT_UNAVAILABLE
    result = strict(args, [judged(replace(result, own=points, points=(), error=None), None, compare=False)])[0]
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
        console.print(f"Equivalents from ngspice alone ({terminal(version)}); not compared with crosscheck's solver.")
        print_reduction(console, result, False, sources, expectations)
    return exit_code([result.verdict])


def expectations_given(args: argparse.Namespace, freqs: Sequence[float]) -> tuple:
    """--expect options as expectations; a malformed one is a usage error."""
    from crosscheck.model.expect_option import (  # start-up time: per command
        ExpectOptionError,
        expectations_from_options,
    )

    if not args.expect:
        return ()
    if len(args.port) > 1:
        raise UsageError("--expect takes one-port values (vth, zth ...); with several --port state z11, voc1 ... in "
                          "a case file's [[expect]]")  # fmt: skip
    try:
        return expectations_from_options(args.expect, freqs, expect_tolerance(args))
    except ExpectOptionError as exc:
        raise UsageError(str(exc)) from None
