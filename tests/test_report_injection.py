"""Hostile text from a case file stays inert in every report: Markdown, CSV, terminal, HTML and JUnit.

Results come from crosscheck's own solver on a small RC case; hostile strings are put into the
title, file name, node names, ``how`` text, explanations and the error message with
``dataclasses.replace``, so each writer meets every kind of user string.
"""

from __future__ import annotations

import io
import re
import xml.etree.ElementTree as ET
from dataclasses import replace
from html.parser import HTMLParser
from pathlib import Path
from types import SimpleNamespace

import pandas as pd
import pytest
from markdown_it import MarkdownIt
from rich.console import Console

from crosscheck.fuzz.loop import FuzzOptions
from crosscheck.fuzz.summary import FuzzSummary
from crosscheck.judge.result import CaseResult
from crosscheck.model.cases import load_case
from crosscheck.report.csv_out import csv_report
from crosscheck.report.equivalents_text import print_equivalents
from crosscheck.report.fuzz_summary import print_summary
from crosscheck.report.html import html_report
from crosscheck.report.junit import junit_xml
from crosscheck.report.markdown import markdown_report
from crosscheck.report.results_text import print_results
from crosscheck.report.untrusted import csv_text, markdown_fence, markdown_text, markup_text, terminal_text
from crosscheck.run.check import run_cases

RC = "rc output\nV1 in 0 DC 0 AC 1\nR1 in out 1k\nC1 out 0 100n\n.end\n"

#: Raw HTML, a link, an image, an autolink, a mention, emphasis, a heading, table breakers and backticks.
HOSTILE = (
    '<img src=x onerror="alert(1)"> [click](https://evil.example) ![pic](https://evil.example/p.png) '
    "| cell\nnew row `tick` ``` **bold** # @octocat <script>alert(1)</script> www.evil.example"
)
#: Terminal sequences: window title (OSC 0), screen clear, hidden text, an OSC 8 link, CSI as one C1 byte.
ESCAPES = "\x1b]0;pwned\x07\x1b[2J\x1b[8mhidden\x1b[0m\x1b]8;;https://evil.example\x1b\\link\x9b31m"
#: rich markup that would restyle, hide or link what follows.
MARKUP = "[link=https://evil.example]x[/link] [black on black]hidden[/]"
#: Cells a spreadsheet reads as formulas.
FORMULAS = ["=HYPERLINK(\"https://evil.example\")", "+1+cmd|' /C calc'!A0", "-2+3", "@SUM(A1:A2)", "\tx", "\rx"]


@pytest.fixture(scope="module")
def hostile(tmp_path_factory: pytest.TempPathFactory) -> CaseResult:
    """A failing case (hand value off, limit broken) whose every user string is hostile."""
    folder = tmp_path_factory.mktemp("hostile")
    (folder / "rc.cir").write_text(RC)
    toml = folder / "rc.toml"
    toml.write_text(
        'title = "t"\nnetlist = "rc.cir"\nport = ["out", "0"]\nfrequencies = ["1k"]\n'
        '[[expect]]\nat = "1k"\nzth = "10"\nhow = "h"\n'
        '[[limit]]\nquantity = "abs(zth)"\nmax = "1"\nwhy = "w"\n'
    )
    [result] = run_cases([load_case(toml)], engine="own")
    assert result.verdict == "fail", "the fixture must not pass, so every section of the reports shows"
    text = HOSTILE + ESCAPES + MARKUP
    expectations = tuple(replace(e, explanation=text, how=text, slip=text) for e in result.expectations)
    limits = tuple(replace(c, explanation=text) for c in result.limits)
    return replace(
        result,
        title=text,
        name=f"{FORMULAS[0]}/{HOSTILE}.toml",
        port=(text, "0"),
        error=text,
        spice_note=text,
        baseline_note=text,
        expectations=expectations,
        limits=limits,
    )


# --- Markdown -------------------------------------------------------------------------------------------

_OUR_TAGS = {"details", "summary"}
_RENDERED_OK = {"h3", "p", "table", "thead", "tbody", "tr", "th", "td", "code", "pre", "strong", "blockquote"}


def _markdown_html(text: str) -> str:
    """The HTML a CommonMark renderer with GFM tables and raw HTML on makes of ``text``."""
    return MarkdownIt("commonmark", {"html": True}).enable("table").render(text)


def _outside_code(text: str) -> str:
    """The Markdown source with code spans and fenced blocks removed: what a renderer parses as Markdown."""
    text = re.sub(r"^(`{3,})[^\n]*\n.*?^\1$", "", text, flags=re.S | re.M)
    return re.sub(r"(`+)(?!`).*?(?<!`)\1(?!`)", "", text)


def test_markdown_text_exact_output():
    """User text becomes one code span: fence longer than any backtick run, pipes escaped in cells, one line."""
    assert markdown_text("<b>x</b> | [a](u)\n`c`", in_table=True) == "`` <b>x</b> \\| [a](u) `c` ``"
    assert markdown_text("![i](u) ```x``` | y") == "````![i](u) ```x``` | y````"
    assert markdown_text("a\x1b[2Jb", limit=5) == "`a\\x1…`"
    assert markdown_text("") == ""


def test_markdown_fence_cannot_be_closed_from_inside():
    """A fenced block of user lines is opened by more backticks than any line holds, and newlines stay inside."""
    assert markdown_fence(["a ```` b", "c\n```"]) == ["`````text", "a ```` b", "c", "```", "`````"]


def test_markdown_report_shows_hostile_title_how_and_why_as_inert_text(hostile):
    """The issue's acceptance: title, how, why and errors with HTML, links, images and table breakers are inert."""
    text = markdown_report([hostile])
    rows = [line for line in text.splitlines() if line.startswith("| ") and "---" not in line]
    flat = " ".join((HOSTILE + ESCAPES + MARKUP).split()).replace("\x1b", "\\x1b").replace("\x07", "\\x07")
    flat = flat.replace("\x9b", "\\x9b")
    title_cell = "| `" + flat[:79].replace("|", "\\|") + "…` |"  # no backtick in the first 79: a 1-tick span
    assert title_cell == '| `<img src=x onerror="alert(1)"> [click](https://evil.example) ![pic](https://evi…` |'
    assert title_cell in rows[1], "the title cell is the exact escaped code span"
    outside = _outside_code(text)
    for marker in ("](", "![", "<img", "<script", "@octocat", "www.", "\x1b", "**bold**"):
        assert marker not in outside, f"{marker!r} outside a code span"
    assert set(re.findall(r"</?([a-z]+)", outside)) <= _OUR_TAGS, "only the report's own tags are raw HTML"
    rendered = _markdown_html(text)
    tags = set(re.findall(r"<([a-z0-9]+)", rendered))
    assert tags <= _RENDERED_OK | _OUR_TAGS, f"a renderer made tags {tags - _RENDERED_OK - _OUR_TAGS}"
    assert "<img" not in rendered and "<a " not in rendered and "<script" not in rendered
    for row in re.findall(r"<tr>(.*?)</tr>", rendered, flags=re.S)[1:2]:
        assert row.count("<td>") == 4, "a pipe or newline in user text must not add or split cells"


# --- CSV ------------------------------------------------------------------------------------------------


@pytest.mark.parametrize("cell", FORMULAS)
def test_csv_text_prefixes_formula_cells(cell):
    """Each formula-leading string gets OWASP's leading quote, nothing else changed."""
    assert csv_text(cell) == "'" + cell


@pytest.mark.parametrize("value", [-1.5, 0, "-1.5e-3", "+2", "plain", None, "-inf"])
def test_csv_text_leaves_numbers_and_plain_text(value):
    """Numbers, number strings (a negative number is not a formula) and plain text pass unchanged."""
    assert csv_text(value) == value


def test_csv_report_neutralises_string_cells_and_keeps_numbers(hostile):
    """No string cell of the written CSV starts a formula; number columns read back as numbers, negatives too."""
    frame = pd.read_csv(io.StringIO(csv_report([hostile])), keep_default_na=False, dtype=str)
    for column in frame.columns:
        for cell in frame[column]:
            assert not cell.startswith(("=", "+", "@", "\t", "\r")), (column, cell)
            assert not cell.startswith("-") or re.fullmatch(r"-[\d.eE+-]+|-inf", cell), (column, cell)
    assert any(cell.startswith("'=HYPERLINK") for cell in frame["case"]), "the case file name was neutralised"
    numbers = pd.read_csv(io.StringIO(csv_report([hostile])))
    assert pd.api.types.is_float_dtype(numbers["own_im"]) and (numbers["own_im"].dropna() < 0).any()


# --- terminal and CI log --------------------------------------------------------------------------------


def test_terminal_text_shows_control_characters():
    """ESC, BEL, CR, C1 CSI and bidi overrides become visible escapes; tab and newline stay unless told."""
    assert terminal_text("a\x1b[2Jb\x07\r\x9b\u202e\tc\nd") == "a\\x1b[2Jb\\x07\\x0d\\x9b\\u202e\tc\nd"
    assert terminal_text("\t\n", keep_layout=False) == "\\x09\\x0a"
    assert markup_text("[b]x\x1b") == "\\[b]x\\x1b"


def _printed(print_it) -> str:
    buffer = io.StringIO()
    print_it(Console(file=buffer, width=200, force_terminal=False, color_system=None))
    return buffer.getvalue()


@pytest.mark.parametrize("detail", [False, True])
def test_terminal_report_prints_no_escape_sequence_or_markup(hostile, detail):
    """The verify summary and detail print user text with no control character and markup as written."""
    out = _printed(lambda c: print_results(c, [hostile], detail=detail))
    assert "\x1b" not in out and "\x07" not in out and "\x9b" not in out
    assert "\\x1b]0;pwned" in out, "the sequence shows as text"
    assert "[link=https://evil.example]" in out.replace("\n", "")


def test_reduce_report_prints_no_escape_sequence(hostile):
    """The reduce command's equivalents show a hostile title and node names as text."""
    out = _printed(lambda c: print_equivalents(c, hostile.title, hostile.port, hostile.own or (), "note"))
    assert "\x1b" not in out and "[link=https://evil.example]" in out.replace("\n", "")


def test_fuzz_summary_prints_no_escape_sequence():
    """A fuzz problem's reason (engine output) and the ngspice version reach the log as text."""
    outcome = SimpleNamespace(case=SimpleNamespace(seed=7, family="ladder"), status="fail", reason=ESCAPES + MARKUP)
    summary = FuzzSummary(options=FuzzOptions(count=1), faults=(), problems=[outcome], explained_cases=[outcome])
    summary = replace(summary, ngspice_version="ngspice-42" + ESCAPES)
    out = _printed(lambda c: print_summary(c, summary))
    assert "\x1b" not in out and "\x07" not in out
    assert "\\x1b]0;pwned" in out and "[link=https://evil.example]" in out.replace("\n", "")


# --- HTML and JUnit -------------------------------------------------------------------------------------


class _Tags(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.tags: list[tuple[str, dict]] = []
        self.text: list[str] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))

    def handle_data(self, data):
        self.text.append(data)


def test_html_escapes_every_user_string(hostile):
    """No user string makes a tag or attribute in the HTML report; each shows as text."""
    page = _Tags()
    page.feed(html_report([hostile]))
    names = {tag for tag, _ in page.tags}
    assert "script" not in names
    for tag, attrs in page.tags:
        if tag == "img":
            assert attrs["src"].startswith("data:image/") and "onerror" not in attrs
        if tag == "a":
            assert re.fullmatch(r"#case-\d+", attrs["href"])
    text = "".join(page.text)
    assert '<img src=x onerror="alert(1)">' in text and "<script>alert(1)</script>" in text


def test_junit_escapes_every_user_string(hostile):
    """The JUnit XML parses, holds only its own elements, and carries the hostile text as text."""
    root = ET.fromstring(junit_xml([hostile]).split("\n", 1)[1])
    tags = {element.tag for element in root.iter()}
    assert tags <= {"testsuites", "testsuite", "properties", "property", "testcase", "failure", "system-out",
                    "system-err"}
    out = "".join(root.find("testsuite/testcase/system-out").itertext())
    assert "<script>alert(1)</script>" in out
    assert "\x1b" not in junit_xml([hostile]), "a character XML 1.0 cannot hold is replaced"

