"""Which report format an output file gets, and the report text in each file format."""

from __future__ import annotations

import json
from collections.abc import Sequence
from pathlib import Path

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
