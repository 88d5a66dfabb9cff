"""Which report format an output file gets, the report text in each file format, and writing them all."""

from __future__ import annotations

import io
import json
import sys
from collections.abc import Sequence
from pathlib import Path
from typing import TYPE_CHECKING

if TYPE_CHECKING:  # start-up time: the command line's grammar reads VERIFY_FORMATS without the pipeline
    from crosscheck.judge.result import CaseResult

#: Report formats of `verify`, and the one an --output file's extension picks when --format is not given.
VERIFY_FORMATS = ("text", "json", "junit", "csv", "html", "markdown")
FORMAT_BY_EXTENSION = {
    ".json": "json",
    ".xml": "junit",
    ".csv": "csv",
    ".html": "html",
    ".htm": "html",
    ".md": "markdown",
    ".markdown": "markdown",
    ".txt": "text",
}


def verify_format(given: str | None, output: Path | None) -> str:
    """The --format asked for, else the one the --output file's extension names, else text."""
    if given is not None:
        return given
    return FORMAT_BY_EXTENSION.get(output.suffix.lower(), "text") if output is not None else "text"


def unknown_extensions(given: str | None, outputs: Sequence[Path]) -> list[str]:
    """A usage message for each output whose extension names no report format while --format is not given.

    Such a file (``r.pdf``) would otherwise be written as text under a misleading name. A file with no
    extension at all is text, as documented.
    """
    if given is not None:
        return []
    known = " ".join(FORMAT_BY_EXTENSION)
    return [
        f"--output {o}: the extension {o.suffix!r} names no report format; end the file name with one of {known} "
        "(or give --format)"
        for o in outputs
        if o.suffix and o.suffix.lower() not in FORMAT_BY_EXTENSION
    ]


def render_report(fmt: str, results: Sequence[CaseResult]) -> str:
    """The report text in one of the file formats (everything but the terminal's text)."""
    # start-up time: each writer (pandas, matplotlib behind some) loads only when its format is asked for
    if fmt == "json":
        from crosscheck.report.results_json import results_document  # start-up time: see above

        return json.dumps(results_document(results), indent=2, ensure_ascii=False) + "\n"
    if fmt == "junit":
        from crosscheck.report.junit import junit_xml  # start-up time: see above

        return junit_xml(results)
    if fmt == "csv":
        from crosscheck.report.csv_out import csv_report  # start-up time: see above

        return csv_report(results)
    if fmt == "html":
        from crosscheck.report.html import html_report  # start-up time: see above

        return html_report(results)
    if fmt == "markdown":
        from crosscheck.report.markdown import markdown_report  # start-up time: see above

        return markdown_report(results)
    raise ValueError(f"format must be one of {VERIFY_FORMATS} (got {fmt!r})")


def write_reports(
    outputs: Sequence[Path | None], given: str | None, results: Sequence[CaseResult], detail: bool, header: str
) -> bool:
    """Each output in the format ``given`` (or its extension) names, None meaning standard output; then the summary.

    Each output is written on its own: one that fails (a missing folder that cannot be made, a
    folder as the path, a full disk) does not stop the others, and the terminal summary still
    prints, so no result is lost; the failures are then reported on stderr. ``header`` (which
    command-line options overrode the case files) heads the text report, and goes to stderr when a
    file format (which has no header line) is written. Returns True when every output was written.
    """
    from rich.console import Console  # start-up time: loaded only by the commands that write reports

    from crosscheck.report.results_text import (  # start-up time: loaded only by the commands that write reports
        PIPE_WIDTH,
        print_results,
        report_console,
    )

    failed: list[tuple[Path | None, OSError]] = []
    if header and any(verify_format(given, o) != "text" for o in outputs):
        print(f"crosscheck verify: note: {header}", file=sys.stderr)
    for output in outputs:
        fmt = verify_format(given, output)
        try:
            if fmt != "text":
                _emit(render_report(fmt, results), output)
            elif output is None:
                print_results(report_console(), results, detail=detail, header=header)
            else:
                buffer = io.StringIO()
                print_results(Console(file=buffer, width=PIPE_WIDTH), results, detail=detail, header=header)
                _emit(buffer.getvalue(), output)
        except OSError as exc:
            failed.append((output, exc))
    files = [o for o in outputs if o is not None]
    if files:  # the reports went to files: the terminal still gets the summary and where to look
        print_results(report_console(), results, detail=False, header=header)
        written = [str(o) for o in files if all(o is not f for f, _ in failed)]
        if written:
            print(f"report{'s' if len(written) > 1 else ''} written to {', '.join(written)}")
    if any(output is None for output, _ in failed):  # standard output failed: the summary on stderr
        print_results(report_console(stderr=True), results, detail=False, header=header)
    for output, problem in failed:
        print(_write_failure(output, problem), file=sys.stderr)
    return not failed


def _write_failure(output: Path | None, exc: OSError) -> str:
    """What could not be written, why, and what to do (the path shown with control characters made visible)."""
    from crosscheck.report.untrusted import terminal_text  # start-up time: loaded only by the commands that use it

    reason = terminal_text(exc.strerror or str(exc) or type(exc).__name__)
    if output is None:
        return (
            f"crosscheck verify: error: could not write the report to standard output: {reason}. The summary "
            "is above on stderr; write the report to a file with --output FILE and run again."
        )
    return (
        f"crosscheck verify: error: could not write the report {terminal_text(output)}: {reason}. The run's "
        "results are in the summary above and in any other report written; give --output a file path in a "
        "folder that exists or can be made and is writable (not a folder itself), then run again."
    )


def _emit(text: str, output: Path | None) -> None:
    """The report text to standard output, or to ``output`` (its missing folders made); an OSError is the caller's.

    ``output`` comes from the command line, never from a case file, and ``_verify`` has already
    refused one that names an input of the run.
    """
    if output is None:
        sys.stdout.write(text)
        sys.stdout.flush()
    else:
        output.parent.mkdir(parents=True, exist_ok=True)
        output.write_text(text, encoding="utf-8")
