"""A Markdown summary of a run, sized for a pull-request comment.

A header line with the overall status word and the counts; the cautions of the cases that
have their own (``report.caution``: a hazardous level, or the case file's ``caution``); a table of the cases that
did not pass, with the reason; the rest (and the numbers behind each problem) folded
into ``<details>`` blocks; the ngspice version; the caution. Code hosts cap a comment
at about 65,000 characters, so long lists are cut with a note of how many were left out.
Every string the report did not write itself goes through ``untrusted.markdown_text`` (a code
span) or ``untrusted.markdown_fence`` (a fenced block), which say why that makes it inert.
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Sequence

from crosscheck.judge.result import CaseResult
from crosscheck.report.caution import CAUTION, case_cautions
from crosscheck.report.frame import (
    case_reason,
    count_words,
    finding_table,
    findings,
    overall_verdict,
    worst_spice_error,
)
from crosscheck.report.read_warnings import ACKNOWLEDGE, MAX_NOTES_SHOWN, shown_notes, warned
from crosscheck.report.results_json import ngspice_version
from crosscheck.report.spread_markdown import spread_lines
from crosscheck.report.untrusted import markdown_fence, markdown_text
from crosscheck.version import __version__

#: Status words for the header, by the run's overall verdict.
STATUS = {"pass": "PASS", "fail": "FAIL", "error": "ERROR", "unavailable": "UNAVAILABLE", "drift": "DRIFT"}
MAX_ROWS = 200
MAX_REASON = 300
#: Cases whose own cautions are listed at the top (each at most ~1,600 characters: the comment stays under its cap).
MAX_CAUTIONS = 20
#: A case file's caution is cut to this many characters here (the JSON and HTML reports keep it whole).
MAX_STATED = 1_000


def _cell(text: object, limit: int = MAX_REASON) -> str:
    """User text in a table cell: inert, one line, pipes escaped, cut to ``limit`` (``untrusted.markdown_text``)."""
    return markdown_text(text, limit, in_table=True)


def _line(text: object, limit: int = MAX_REASON) -> str:
    """User text on a line of its own or in a sentence outside a table (``untrusted.markdown_text``)."""
    return markdown_text(text, limit)


def _problems_table(problems: Sequence[CaseResult]) -> list[str]:
    lines = ["| case | title | verdict | reason |", "|---|---|---|---|"]
    for r in problems[:MAX_ROWS]:
        lines.append(f"| {_cell(r.name)} | {_cell(r.title, 80)} | **{r.verdict}** | {_cell(case_reason(r))} |")
    if len(problems) > MAX_ROWS:
        lines.append(f"\n… and {len(problems) - MAX_ROWS} more not passing; see the full report.")
    return lines


def _problem_details(problems: Sequence[CaseResult]) -> list[str]:
    lines = ["<details><summary>Numbers behind each problem</summary>", ""]
    for r in problems[:MAX_ROWS]:
        table = finding_table(findings(r), limit=12)
        port = f"{_line(r.port[0], 80)} → {_line(r.port[1], 80)}"
        lines += [f"{_line(r.title, 120)} ({_line(r.name)}, port {port}): {r.verdict}", ""]
        lines += [*markdown_fence(table), ""] if table else [f"> {_line(case_reason(r), 1000)}", ""]
    lines += ["</details>", ""]
    return lines


def _passing_details(passing: Sequence[CaseResult]) -> list[str]:
    lines = [
        f"<details><summary>{len(passing)} passing case(s)</summary>",
        "",
        "| case | title | port | points | worst solver-vs-SPICE error |",
        "|---|---|---|---|---|",
    ]
    for r in passing[:MAX_ROWS]:
        worst = worst_spice_error(r)
        lines.append(
            f"| {_cell(r.name)} | {_cell(r.title, 80)} | {_cell(r.port[0], 80)} → {_cell(r.port[1], 80)} "
            f"| {len(r.freqs_hz)} "
            f"| {'not compared' if worst is None else f'{worst:.1e}'} |"
        )
    if len(passing) > MAX_ROWS:
        lines.append(f"\n… and {len(passing) - MAX_ROWS} more passing.")
    lines += ["", "</details>", ""]
    return lines


def _cautions(results: Sequence[CaseResult]) -> list[str]:
    """A quoted list of each case's own cautions, for the top of the comment ([] when no case has one)."""
    found = case_cautions(results)
    if not found:
        return []
    lines = ["> ⚠️ **Caution for these cases** (crosscheck's judgement, then what the case file says):", ">"]
    for c in found[:MAX_CAUTIONS]:
        if c.hazard:
            lines.append(f"> - {_line(c.name)}: {c.hazard}")
        if c.stated:
            lines.append(f"> - {_line(c.name)}, its case file: {_line(c.stated, MAX_STATED)}")
    if len(found) > MAX_CAUTIONS:
        lines.append(f"> - … and {len(found) - MAX_CAUTIONS} more case(s) with a caution; see the full report.")
    return [*lines, ""]


def _read_warnings(results: Sequence[CaseResult]) -> list[str]:
    """A quoted list of every unacknowledged reading warning, for the top of the comment ([] when none).

    The case name, location and message are user text: each goes through ``_line`` (a code span)."""
    found = warned(results)
    if not found:
        return []
    lines = ["> ⚠️ **Reading warnings**: the answer is probably not what the netlist meant.", ">"]
    shown = [(r, w) for _i, r in found for w in r.open_warnings]
    for r, w in shown[:MAX_CAUTIONS]:
        lines.append(f"> - {_line(r.name)}: **{_line(w.code, 40)}** at {_line(w.location)}: {_line(w.message)}")
    if len(shown) > MAX_CAUTIONS:
        lines.append(f"> - … and {len(shown) - MAX_CAUTIONS} more warning(s); see the full report.")
    return [*lines, ">", f"> {ACKNOWLEDGE}", ""]


def _read_notes(results: Sequence[CaseResult]) -> list[str]:
    """Reading's notes folded into one ``<details>`` block (a fenced block of user text; [] when none)."""
    notes = [n for r in results for n in r.read_notes]
    if not notes:
        return []
    fence = markdown_fence(shown_notes(notes, MAX_NOTES_SHOWN * 5))
    return [
        f"<details><summary>{len(notes)} note(s) from reading the netlists</summary>",
        "",
        *fence,
        "",
        "</details>",
        "",
    ]


def markdown_report(results: Sequence[CaseResult]) -> str:
    """The comment text (GitHub-flavoured Markdown; also renders on other code hosts)."""

    overall = overall_verdict([r.verdict for r in results])
    word = STATUS.get(overall, overall.upper())
    counts = Counter(r.verdict for r in results)
    lines = [f"### crosscheck: {word} — {len(results)} case(s): {count_words(counts)}", ""]
    lines += _cautions(results)
    lines += _read_warnings(results)
    problems = [r for r in results if r.verdict != "pass"]
    passing = [r for r in results if r.verdict == "pass"]
    if problems:
        lines += _problems_table(problems) + [""] + _problem_details(problems)
    else:
        lines += [
            "Every case passed: both engines agree within tolerance, and every hand value and design "
            "limit checked holds.",
            "",
        ]
    if passing:
        lines += _passing_details(passing)
    lines += spread_lines(results, _cell)
    lines += _read_notes(results)
    lines += [
        f"ngspice: {_line(ngspice_version(results) or '') or 'not run'} · crosscheck {__version__}",
        "",
        f"> **Caution.** {CAUTION}",
        "",
    ]
    return "\n".join(lines)
