"""User text made inert for each place a report puts it: the terminal and CI log, Markdown, CSV.

Every string a report did not write itself is untrusted: case titles, file and node names,
``how`` and ``why`` text, explanations built around them, error messages (which quote user
input), and engine output. CI posts the Markdown report as a pull-request comment and prints
the terminal report into the job log, so a hostile case file must not be able to put markup,
links, mentions, spreadsheet formulas or terminal escape sequences into any of them. Each
writer sends user text through the one function here for its format (``svg_text`` for the figures
``report.svg_chart`` writes); HTML and JUnit escape with the standard library at the point of writing
(``html.escape``, ElementTree).
"""

from __future__ import annotations

import html
import re

from rich.markup import escape as _rich_escape

# C0 controls but tab and newline, DEL, C1 controls (U+0080–U+009F: a terminal may take U+009B as CSI),
# and the bidirectional overrides and isolates that reorder what a reader sees (Unicode TR #36).
_CONTROLS = re.compile("[\x00-\x08\x0b-\x1f\x7f-\x9f\u202a-\u202e\u2066-\u2069]")
_CONTROLS_AND_LAYOUT = re.compile("[\x00-\x1f\x7f-\x9f\u2028\u2029\u202a-\u202e\u2066-\u2069]")


def _visible(match: re.Match[str]) -> str:
    code = ord(match.group())
    return f"\\x{code:02x}" if code < 0x100 else f"\\u{code:04x}"


def terminal_text(text: object, keep_layout: bool = True) -> str:
    r"""``text`` with every control character shown as a visible escape (ESC as ``\x1b``), nothing else changed.

    ESC starts every terminal and CI-log sequence that matters here (colour, cursor moves,
    screen clear, window title, OSC 8 links, hidden text); C1's CSI (U+009B) does the same on
    some terminals; CR and backspace overwrite what a line showed; the bidirectional controls
    reorder it. Shown as ``\xNN`` text they do nothing and a reader still sees that they were
    there. Tab and newline are kept when ``keep_layout`` (a message's own lines), else shown too.
    """
    pattern = _CONTROLS if keep_layout else _CONTROLS_AND_LAYOUT
    return pattern.sub(_visible, str(text))


def markup_text(text: object, keep_layout: bool = True) -> str:
    """``terminal_text``, then rich's markup escaped: for user text printed through rich markup or a table cell.

    rich reads ``[...]`` in a printed string or a table cell as markup, which can restyle,
    hide (``[black on black]``) or link (``[link=...]``) what follows; escaped, it prints as written.
    """
    return _rich_escape(terminal_text(text, keep_layout))


def markdown_text(text: object, limit: int | None = None, in_table: bool = False) -> str:
    """User text as one inert Markdown code span: the one way user text enters the Markdown report.

    What it neutralises, and why that is enough for GitHub-flavoured Markdown (GFM spec 0.29,
    sections 6.1 "Code spans" and 4.10 "Tables"): inside a code span nothing is parsed, so
    raw HTML, links, images, autolinks (``www.`` and ``https://`` included, which backslash
    escaping cannot stop), emphasis, headings, entities, and GitHub's ``@mention``, ``#123``
    and ``:emoji:`` references all print as the characters written. The span is delimited by
    a run of backticks one longer than the longest run inside, so no user backtick can close it
    (padded with a space when the text starts or ends with a backtick, which the spec strips).
    Code spans take precedence over every inline construct that starts after their opening
    backticks, and everything before the opening backticks on a line is the report's own text,
    so no user text can open a construct that swallows the span. What a code span cannot stop
    is handled before it: runs of white space (line breaks included) become one space and every
    other control character becomes visible text (``terminal_text``), so the text stays on
    its line and cannot end a table row, a list or a block; in a table cell ``|`` is written
    ``\\|``, which GFM's table reader unescapes inside code spans too (spec example 200), so a
    pipe cannot split the cell. Cut to ``limit`` characters (an ellipsis marks the cut) before
    the backtick count is chosen. The empty string stays empty (an empty span is not a span).

    Rejected alternative: backslash-escaping Markdown's punctuation leaves GitHub's autolinks and
    mentions live, since they are recognised in text after escapes are resolved.
    """
    flat = terminal_text(" ".join(str(text).split()), keep_layout=False)
    if limit is not None and len(flat) > limit:
        flat = flat[: limit - 1] + "…"
    if not flat:
        return ""
    if in_table:
        flat = flat.replace("|", "\\|")
    longest = max((len(run) for run in re.findall("`+", flat)), default=0)
    fence = "`" * (longest + 1)
    pad = " " if flat.startswith("`") or flat.endswith("`") else ""
    return f"{fence}{pad}{flat}{pad}{fence}"


def markdown_fence(lines: list[str], info: str = "text") -> list[str]:
    """Lines of user text as one fenced code block no line inside can close (GFM spec 4.5).

    The fence is a run of backticks longer than any backtick run in the lines (a closing fence
    must be at least as long as the opening one), and every line is cleaned by ``terminal_text``
    with line breaks kept apart: a line holding a newline is split, so each one stays inside.
    """
    body = [part for line in lines for part in terminal_text(line).expandtabs().split("\n")]
    longest = max((len(run) for line in body for run in re.findall("`+", line)), default=0)
    fence = "`" * max(3, longest + 1)
    return [f"{fence}{info}", *body, fence]


#: Characters a spreadsheet reads as the start of a formula in a cell (OWASP, "CSV Injection").
FORMULA_START = ("=", "+", "-", "@", "\t", "\r")
_PLAIN_NUMBER = re.compile(r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?|[+-]?(?:inf|nan)", re.IGNORECASE)


def csv_text(value: object) -> object:
    """A CSV string cell that no spreadsheet evaluates: one starting with ``= + - @``, tab or CR gets a leading ``'``.

    The rule is OWASP's CSV Injection guidance (owasp.org/www-community/attacks/CSV_Injection):
    prefix such cells with a single quote so Excel, LibreOffice and Google Sheets show them as
    text. Anything not a string (numbers, missing values) passes unchanged, and so does a string
    that is a plain number (``-1.5e-3``): a number is not a formula and must read back as one.
    """
    if not isinstance(value, str) or not value.startswith(FORMULA_START) or _PLAIN_NUMBER.fullmatch(value):
        return value
    return "'" + value


def svg_text(text: object) -> str:
    """User text as inert SVG character data or attribute value: one line, controls shown, markup escaped.

    XML 1.0 cannot hold most C0 controls at all, so every control character (line breaks too) is shown as
    ``terminal_text`` shows it; a lone surrogate becomes ``?`` (UTF-8 cannot encode it); then ``& < > " '``
    become entities (``html.escape``), so nothing in the text can open an element, end an attribute or
    start an entity of its own.
    """
    plain = terminal_text(text, keep_layout=False).encode("utf-8", "replace").decode("utf-8")
    return html.escape(plain, quote=True)
