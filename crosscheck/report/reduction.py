"""What `crosscheck reduce` prints: the equivalents of one netlist, and the comparison when both routes ran."""

from __future__ import annotations

from typing import Any

from rich.console import Console

from crosscheck.judge.result import CaseResult
from crosscheck.model.network import Network, Port
from crosscheck.report.caution import CAUTION
from crosscheck.report.equivalents_json import equivalents_document
from crosscheck.report.equivalents_text import print_equivalents
from crosscheck.report.results_json import case_document, checks_document, results_document
from crosscheck.report.results_text import print_checks, print_results


def reduction_document(
    result: CaseResult, compared: bool, sources: str, source_file: str, expectations: bool
) -> dict[str, Any]:
    """The JSON document: the own equivalents alone, or both routes' points with their verdicts."""
    if compared:
        doc = results_document([result])
        doc.update({"port": list(result.port), "points": case_document(result)["points"], "verdict": result.verdict})
    else:
        doc = equivalents_document(
            Network(result.title, ()), Port(*result.port), result.own or (), sources, source_file=source_file
        )
    if expectations:
        doc.update({"expectations": checks_document(result)["expectations"], "verdict": result.verdict})
    return doc


def print_reduction(console: Console, result: CaseResult, compared: bool, sources: str, expectations: bool) -> None:
    """The equivalents as text, then the comparison (both routes) or the hand calculations (own route)."""
    source_note = f"Sources as written in the netlist, taken as {sources.upper()} phasors."
    print_equivalents(
        console, result.title, result.port, result.own or (), source_note, caution=not compared and not expectations
    )
    if compared:
        print_results(console, [result], detail=True)
    elif expectations:
        print_checks(console, result, detail=True)
        console.print(f"[dim]Caution: {CAUTION}[/]")
