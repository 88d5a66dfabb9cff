"""A card split into fields as ngspice splits it: blanks, commas and '=', with (...), {...} and '...' groups.

Shared by every card the reader reads. A quoted expression ``'2*rb'`` becomes the field ``{2*rb}``:
ngspice reads single quotes and braces the same way, and the rest of the reader knows braces. Splitting
only cuts the text; nothing in a field is evaluated here.
"""

from __future__ import annotations

import re
from collections.abc import Callable

from crosscheck.errors import NetlistError
from crosscheck.model.netlist_cards import Card, Tok, show
from crosscheck.model.netlist_subset import CONTROL_CHAR

__all__ = ["line_problem", "split_fields", "strip_comment"]

#: Makes the error for a message and a line (the reader's ``err``, which adds the file).
Error = Callable[[str, "int | None"], NetlistError]

_DOLLAR_COMMENT = re.compile(r"(?:^|\s)\$(?:\s|$)")
_FIELD = re.compile(r"[\s,]*(?:(?P<word>[^\s,(){}=']+|=)|(?P<open>[({'])|(?P<close>[)}]))")
_PLAIN = re.compile(r"^[^,(){}=']*$")
_CLOSING = {"(": ")", "{": "}", "'": "'"}


def line_problem(raw: str, number: int, most_chars: int, err: Error) -> NetlistError | None:
    """Why one physical line cannot be read at all (too long, or binary data), else None."""
    if len(raw) > most_chars:
        return err(
            f"line of {len(raw)} characters is longer than the limit ({most_chars}); split it with + continuation lines",
            number,
        )
    bad = CONTROL_CHAR.search(raw)
    if bad:
        return err(
            f"control character {bad.group()!r} in the text: binary data is not a netlist; give the SPICE text file",
            number,
        )
    return None


def strip_comment(line: str) -> str:
    """The line without its ``;`` comment or ``$`` comment (a ``$`` with blanks or the line's ends around it)."""
    line = line.split(";", 1)[0]
    dollar = _DOLLAR_COMMENT.search(line)
    return line[: dollar.start()] if dollar else line


def split_fields(card: Card, err: Error) -> list[Tok]:
    """Split a card at blanks, commas and '='; a (...), {...} or '...' group is one field; key=value pairs merge.

    A quoted expression '2*rb' becomes the field {2*rb}: ngspice reads both the same way. A word ending in
    '-' followed at once by a (...) group is one name: schematic editors export nodes as ``Net-(R1-Pad2)``,
    which ngspice takes as one node (measured with ngspice 39).
    """
    text, pos = card.text, 0
    out: list[Tok] = []
    if len(card.starts) == 1 and _PLAIN.match(text):  # the common card: blank-separated words
        return [Tok(word, card.line) for word in text.split()]
    line = card.line_at
    word_end = -1  # where the last plain word ended, to join a schematic editor's Net-(R1-Pad2)
    while (m := _FIELD.match(text, pos)) is not None:
        opener, closer = m.group("open"), m.group("close")
        start = m.start(m.lastindex or 0)
        if closer:
            raise err(f"unbalanced {closer!r} on this card", line(start))
        pos = m.end()
        if opener:
            pos = _group_end(err, text, opener, start, pos, line(start))
            if opener == "(" and start == word_end and out[-1].text.endswith("-"):
                out[-1] = Tok(out[-1].text + text[start:pos], out[-1].line)  # one node name, as ngspice reads it
                continue
            if opener == "'":
                out.append(Tok("{" + text[start + 1 : pos - 1] + "}", line(start)))
                continue
        out.append(Tok(text[start:pos], line(start)))
        word_end = pos if m.group("word") else -1
    return _merge_keys(err, out) if "=" in text else out


def _group_end(err: Error, text: str, opener: str, start: int, pos: int, line: int) -> int:
    """The offset just past the group opened at ``start``: ( and { nest, a quote ends at the next quote."""
    close, depth = _CLOSING[opener], 1
    while depth and pos < len(text):
        if opener == "'":
            depth -= text[pos] == "'"
        else:
            depth += (text[pos] == opener) - (text[pos] == close)
        pos += 1
    if depth and opener == "'":
        raise err("unbalanced \"'\": no closing quote on this card; close the quoted expression with '", line)
    if depth:
        raise err(f"unbalanced {opener!r}: no matching {close!r} on this card", line)
    return pos


def _merge_keys(err: Error, out: list[Tok]) -> list[Tok]:
    merged: list[Tok] = []
    k = 0
    while k < len(out):
        if k + 1 < len(out) and out[k + 1].text == "=":
            key = out[k]
            if k + 2 >= len(out) or out[k + 2].text == "=" or not re.match(r"^[a-z_]\w*:?$", key.text, re.I):
                raise err(f"malformed key=value field near {show(key.text)}", key.line)
            merged.append(Tok(key.text, key.line, out[k + 2]))
            k += 3
        elif out[k].text == "=":
            raise err("'=' with no name before it", out[k].line)
        else:
            merged.append(out[k])
            k += 1
    return merged
