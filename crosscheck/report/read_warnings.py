"""Reading's warnings and notes in words, once, for every report format.

A warning (``model.reading.ReadWarning``) is a trap the reader found: an answer that is probably not what
the netlist's author meant (no AC source, so V_th is zero; an element on the title line; a suffix SPICE
misreads). One nobody acknowledged is shown prominently in every format, near the top; one the case file
acknowledges (``accept_warnings``) stays silent except in JSON, which lists it as accepted. Notes (what was
read and has no effect on an AC answer) are shown less prominently. Warnings never change a verdict
unless ``--strict`` (``run.check.held_strictly``). Messages and locations are user text (file and node
names, values): each writer makes them inert for its format (``report.untrusted``, or the HTML and XML
escaping of that writer); the codes and ``ACKNOWLEDGE`` are crosscheck's own words.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from crosscheck.judge.result import CaseResult
from crosscheck.model.reading import WARNING_CODES, ReadWarning

#: How to answer a warning, said wherever warnings are listed.
ACKNOWLEDGE = (
    "Fix the netlist, or, when it is meant as written, acknowledge the warning in the case file with "
    'accept_warnings = ["CODE"] (--accept-warning CODE for a netlist named on the command line); '
    "--strict makes every unacknowledged warning an error."
)

#: Notes shown per case in the text, Markdown, HTML, JUnit and pytest reports (JSON and CSV keep all).
MAX_NOTES_SHOWN = 20


def warning_words(warning: ReadWarning) -> str:
    """``[no-ac-source] amp.cir:3: ...``: the code, where, and what was found (user text inside)."""
    return f"[{warning.code}] {warning.location}: {warning.message}"


def warning_document(warning: ReadWarning) -> dict[str, Any]:
    """One warning for JSON: its code, what the code means, file, line and message."""
    return {
        "code": warning.code,
        "meaning": WARNING_CODES.get(warning.code, ""),
        "file": warning.location.file,
        "line": warning.location.line,
        "message": warning.message,
    }


def warned(results: Sequence[CaseResult]) -> list[tuple[int, CaseResult]]:
    """The cases (with their position in the run, from 1) that have an unacknowledged warning."""
    return [(i, r) for i, r in enumerate(results, start=1) if r.open_warnings]


def shown_notes(notes: Sequence[str], limit: int = MAX_NOTES_SHOWN) -> list[str]:
    """The first ``limit`` notes, and a line saying how many more the JSON report holds."""
    more = [f"… and {len(notes) - limit} more note(s); the JSON report lists them all"] if len(notes) > limit else []
    return [*notes[:limit], *more]


def warning_lines(result: CaseResult) -> list[str]:
    """The case's unacknowledged warnings as plain lines (``WARNING [code] file:line: message``)."""
    return [f"WARNING {warning_words(w)}" for w in result.open_warnings]


def note_lines(result: CaseResult) -> list[str]:
    """The case's notes from reading as plain lines (``note: ...``), at most ``MAX_NOTES_SHOWN`` and a count."""
    return [f"note: {n}" for n in shown_notes(result.read_notes)]
