"""What `crosscheck reduce` prints: the equivalents of one netlist, and the comparison when both routes ran."""

from __future__ import annotations

from typing import Any

from rich.console import Console

from crosscheck.judge.result import CaseResult
from crosscheck.model.network import Network, Port
from crosscheck.report.caution import CAUTION
from crosscheck.report.equivalents_json import equivalents_document
from crosscheck.report.equivalents_text import print_equivalents
from crosscheck.report.results_json import case_document, checks_document, read_document, results_document
from crosscheck.report.results_text import print_checks, print_read_notes, print_read_warnings, print_results
from crosscheck.report.spread_json import add_spread, spread_document
from crosscheck.report.untrusted import markup_text


def reduction_document(
    result: CaseResult, compared: bool, sources: str, source_file: str, expectations: bool
) -> dict[str, Any]:
    """The JSON document: the own equivalents alone, or both routes' points with their verdicts."""
    if compared:
        doc = results_document([result])
        doc.update({"port": list(result.port), "points": case_document(result)["points"], "verdict": result.verdict})
    else:
        doc = equivalents_document(
            Network(result.title, ()),
            Port(*result.port),
            result.own or (),
            sources,
            source_file=source_file,
            excitation=result.excitation,
        )
    if result.spread is not None:
        if not compared:
            add_spread(doc["points"], result)
        doc.update(spread=spread_document(result.spread), verdict=result.verdict)
    if expectations:
        doc.update({"expectations": checks_document(result)["expectations"], "verdict": result.verdict})
    doc.setdefault("excitation", result.excitation)
    doc.update(read_document(result))  # warnings (unacknowledged), accepted_warnings, notes
    if result.error is not None:  # e.g. --strict made a warning an error: the document says so
        doc.update({"error": result.error, "verdict": result.verdict})
    return doc


def print_reduction(console: Console, result: CaseResult, compared: bool, sources: str, expectations: bool) -> None:
    """The equivalents as text, then the comparison (both routes) or the hand calculations (own route)."""
    source_note = (
        "Excitation DC: the sources' DC values as written in the netlist, at 0 Hz (ngspice: its operating point)."
        if result.excitation == "dc"
        else f"Sources as written in the netlist, taken as {sources.upper()} phasors."
    )
    print_read_warnings(console, [result])  # first: a warning can make every number below meaningless
    print_equivalents(console, result.title, result.port, result.own or (), source_note, caution=False)
    if compared:
        print_results(console, [result], detail=True, reading=False)
        print_read_notes(console, [result])
        return
    if expectations:
        print_checks(console, result, detail=True)
    if result.error:
        console.print(f"[bold magenta]error: {markup_text(result.error)}[/]")
    print_read_notes(console, [result])
    console.print(f"[dim]Caution: {CAUTION}[/]")
