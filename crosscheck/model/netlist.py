"""Read the SPICE subset crosscheck supports (the writer is ``model.netlist_writer``).

The reader takes netlists written by others: the first line is the title (as
in SPICE), ``*`` comment lines, ``;`` and ``$`` inline comments, ``+``
continuation lines, names in any case, ``.param`` arithmetic and ``{expr}``
values, ``.subckt``/``.ends`` with ``X`` instances flattened the way ngspice
names them (R2 in X1 becomes ``r.x1.r2``, node n3 becomes ``x1.n3``).
Analysis and output cards (``.ac .op .options .print .plot .save .probe``) are
ignored with a note; everything that could read other files, run scripts or
needs a nonlinear or transient model is refused with the file and line
(the cards and devices are listed in ``model.netlist_subset``; each kind of element card is read
by ``model.netlist_cards``).
"""

from __future__ import annotations

import re
from os import PathLike

from crosscheck.errors import Location, NetlistError, ValueSyntaxError
from crosscheck.model.files import InputFileError, read_regular
from crosscheck.model.functions import function_definition, recursive_chain
from crosscheck.model.netlist_cards import Card, CardReader, Tok, show
from crosscheck.model.netlist_subset import CONTROL_CHAR, IGNORED_CARDS, REFUSED_CARDS, SUBSET
from crosscheck.model.network import GROUND, Element, Network, Port
from crosscheck.model.params import Expression, Function, Scope, assignments, parse, unwrap
from crosscheck.model.reading import Reading
from crosscheck.model.subcircuits import Instance, Subckt, flatten
from crosscheck.model.validation import validate

__all__ = [
    "read_netlist",
    "read_netlist_with_notes",
    "read_netlist_reading",
    "read_netlist_file",
    "read_netlist_file_with_notes",
    "read_netlist_text",
    "decode_netlist_bytes",
    "MAX_ELEMENTS",
    "MAX_LINE_CHARS",
    "MAX_SUBCKT_DEPTH",
]

#: Limits for untrusted input: beyond these the reader refuses instead of using unbounded time or memory.
MAX_ELEMENTS = 200_000  # elements (and subcircuit instances) after flattening
MAX_LINE_CHARS = 100_000
MAX_SUBCKT_DEPTH = 50
MAX_TEXT_CHARS = 64 * 2**20

_DOLLAR_COMMENT = re.compile(r"(?:^|\s)\$(?:\s|$)")
_FIELD = re.compile(r"[\s,]*(?:(?P<word>[^\s,(){}='][^\s,(){}=]*|=)|(?P<open>[({'])|(?P<close>[)}]))")
_PLAIN = re.compile(r"^[^,(){}=']*$")


# --------------------------------------------------------------------------- public API


def read_netlist(
    text: str, file: str = "<string>", *, allow_negative: bool = False, port: Port | None = None
) -> Network:
    """Read a netlist into a validated Network (see ``read_netlist_with_notes`` for what is ignored)."""
    return read_netlist_with_notes(text, file, allow_negative=allow_negative, port=port)[0]


def read_netlist_with_notes(
    text: str, file: str = "<string>", *, allow_negative: bool = False, port: Port | None = None
) -> tuple[Network, list[str]]:
    """Read a netlist; also return one note per card or field that was accepted but ignored.

    ``port`` is passed to ``validate``: a part of the network with no ground is accepted
    only when it holds the whole port (a transformer secondary, for example).
    """
    return _Reader(file).read(text, allow_negative, port)


def read_netlist_reading(
    text: str, file: str = "<string>", *, allow_negative: bool = False, port: Port | None = None
) -> tuple[Network, Reading]:
    """Read a netlist; also return its ``Reading``: the notes and the warnings (traps), each naming file and line."""
    network, notes = read_netlist_with_notes(text, file, allow_negative=allow_negative, port=port)
    return network, Reading(tuple(notes), ())


def read_netlist_file(path: str | PathLike, *, allow_negative: bool = False, port: Port | None = None) -> Network:
    """Read a netlist file (UTF-8 text; binary data and NUL bytes are refused)."""
    return read_netlist_file_with_notes(path, allow_negative=allow_negative, port=port)[0]


def read_netlist_file_with_notes(
    path: str | PathLike, *, allow_negative: bool = False, port: Port | None = None
) -> tuple[Network, list[str]]:
    """``read_netlist_with_notes`` for a file, refused before parsing if it is not UTF-8 text."""
    return read_netlist_with_notes(read_netlist_text(path), str(path), allow_negative=allow_negative, port=port)


def read_netlist_text(path: str | PathLike) -> str:
    """The text of a netlist file; unreadable, oversized, binary (NUL bytes) or non-UTF-8 files are refused."""
    file = str(path)
    try:
        data = read_regular(path, MAX_TEXT_CHARS)
    except InputFileError as exc:
        raise NetlistError(f"cannot read the netlist: {exc}; check the path", Location(file)) from None
    return decode_netlist_bytes(data, file)


def decode_netlist_bytes(data: bytes, file: str) -> str:
    """Netlist file bytes as text; binary (NUL bytes) or non-UTF-8 data is refused with the line."""
    nul = data.find(b"\x00")
    if nul >= 0:
        raise NetlistError(
            "the file contains NUL bytes: it is binary data, not a netlist; give the SPICE text file",
            Location(file, data.count(b"\n", 0, nul) + 1),
        )
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = data.count(b"\n", 0, exc.start) + 1
        raise NetlistError(
            f"the file is not UTF-8 text (byte 0x{data[exc.start]:02x}); "
            "save it as UTF-8 (a binary file is not a netlist)",
            Location(file, line),
        ) from None


# --------------------------------------------------------------------------- lines, cards, fields


def _strip_comment(line: str) -> str:
    line = line.split(";", 1)[0]
    dollar = _DOLLAR_COMMENT.search(line)
    return line[: dollar.start()] if dollar else line


class _Reader(CardReader):
    """The file-level reader: lines to cards, cards to fields, ``.param`` and ``.subckt`` blocks."""

    def __init__(self, file: str):
        super().__init__(file)
        self.param_lines: dict[str, int] = {}
        self.subckts: dict[str, Subckt] = {}
        self.count = 0

    # ---- text to cards

    def cards(self, text: str) -> tuple[str, list[Card], int]:
        if len(text) > MAX_TEXT_CHARS:
            raise self.err(f"the netlist is longer than {MAX_TEXT_CHARS} characters; it is refused", 1)
        lines = text.lstrip("\ufeff").replace("\r\n", "\n").replace("\r", "\n").split("\n")
        if not text.strip():
            raise self.err("the netlist is empty; a netlist is a title line followed by element cards", 1)
        cards: list[Card] = []
        last = 1
        for number, raw in enumerate(lines, start=1):
            if len(raw) > MAX_LINE_CHARS:
                raise self.err(
                    f"line of {len(raw)} characters is longer than the limit ({MAX_LINE_CHARS}); "
                    "split it with + continuation lines",
                    number,
                )
            bad = CONTROL_CHAR.search(raw)
            if bad:
                raise self.err(
                    f"control character {bad.group()!r} in the text: binary data is not a netlist; "
                    "give the SPICE text file",
                    number,
                )
            if number == 1:
                continue
            stripped = _strip_comment(raw).strip()
            if not stripped or stripped.startswith("*"):
                continue
            last = number
            if stripped.startswith("+"):
                if not cards:
                    raise self.err(
                        "a + continuation line with no card before it (line 1 is always the title); "
                        "join it to a card or remove the +",
                        number,
                    )
                cards[-1].extend(stripped[1:], number)
                continue
            if stripped.split(None, 1)[0].lower() == ".end":
                if any(_strip_comment(rest).strip() for rest in lines[number:]):
                    self.note("text after .end ignored", number)
                break
            cards.append(Card(stripped, number, [(0, number)]))
        for card in cards:
            card.join()
        title = lines[0].lstrip("\ufeff").strip()
        if re.match(r"^[rlcvi][a-z_]*\d\w*(\s+\S+){2}\s+([0-9.{]|dc|ac)", title, re.IGNORECASE):
            self.note(
                f"the first line {show(title)} is read as the title, as SPICE does; "
                "if it is an element, add a title line above it",
                1,
            )
        return title, cards, last

    def fields(self, card: Card) -> list[Tok]:
        """Split a card at blanks, commas and '='; a (...) or {...} group is one field; key=value pairs merge."""
        text, out, pos = card.text, [], 0
        if len(card.starts) == 1 and _PLAIN.match(text):  # the common card: blank-separated words
            return [Tok(word, card.line) for word in text.split()]
        line = card.line_at
        while (m := _FIELD.match(text, pos)) is not None:
            opener, closer = m.group("open"), m.group("close")
            start = m.start(m.lastindex or 0)
            if closer:
                raise self.err(f"unbalanced {closer!r} on this card", line(start))
            pos = m.end()
            if opener == "'":  # a quoted expression is one field, as {...} is
                close_at = text.find("'", pos)
                if close_at < 0:
                    raise self.err('unbalanced "\'": no closing quote on this card', line(start))
                pos = close_at + 1
            elif opener:
                close, depth = ")" if opener == "(" else "}", 1
                while depth and pos < len(text):
                    depth += (text[pos] == opener) - (text[pos] == close)
                    pos += 1
                if depth:
                    raise self.err(f"unbalanced {opener!r}: no matching {close!r} on this card", line(start))
            out.append(Tok(text[start:pos], line(start)))
        if "=" not in text:
            return out
        merged: list[Tok] = []
        k = 0
        while k < len(out):
            if k + 1 < len(out) and out[k + 1].text == "=":
                key = out[k]
                if k + 2 >= len(out) or out[k + 2].text == "=" or not re.match(r"^[a-z_]\w*:?$", key.text, re.I):
                    raise self.err(f"malformed key=value field near {show(key.text)}", key.line)
                merged.append(Tok(key.text, key.line, out[k + 2]))
                k += 3
            elif out[k].text == "=":
                raise self.err("'=' with no name before it", out[k].line)
            else:
                merged.append(out[k])
                k += 1
        return merged

    # ---- the whole file

    def read(self, text: str, allow_negative: bool, port: Port | None) -> tuple[Network, list[str]]:
        title, cards, last = self.cards(text)
        top: list[tuple[Card, list[Tok]]] = []
        current: Subckt | None = None
        for card in cards:
            first = card.text.split(None, 1)[0]
            if first.startswith("."):
                current = self.dot_card(card, first, current)
                continue
            self.count += 1
            if self.count > MAX_ELEMENTS:
                raise self.err(f"more than {MAX_ELEMENTS} element cards; a netlist that large is refused", card.line)
            (current.cards if current else top).append((card, self.fields(card)))
        if current is not None:
            raise self.err(
                f"subcircuit {current.name!r} is never closed; add '.ends {current.name}' after its last card",
                current.line,
            )
        return self.network(title, top, last, allow_negative, port)

    def dot_card(self, card: Card, first: str, current: Subckt | None) -> Subckt | None:
        """A card starting with '.': read, ignored with a note, or refused; returns the open subcircuit."""
        word = first.lower()
        if word == ".param":
            self.param(card, len(first), current)
        elif word == ".func":
            self.func(card, len(first), current)
        elif word == ".subckt":
            if current is not None:
                raise self.err(
                    f".subckt inside subcircuit {current.name!r} (line {current.line}); "
                    "define each subcircuit at the top level",
                    card.line,
                )
            current = self.subckt_header(card, self.fields(card))
        elif word == ".ends":
            if current is None:
                raise self.err(".ends with no .subckt before it; remove it or add the .subckt card", card.line)
            toks = self.fields(card)
            if len(toks) > 1 and toks[1].text.lower() != current.name:
                raise self.err(
                    f".ends {toks[1].text} closes subcircuit {current.name!r} "
                    f"(line {current.line}); make the names match",
                    card.line,
                )
            self.subckts[current.name] = current
            current = None
        elif word in IGNORED_CARDS:
            self.note(f"{first} card ignored: {IGNORED_CARDS[word]}", card.line)
        elif word in REFUSED_CARDS:
            raise self.err(f"{first} is not supported: {REFUSED_CARDS[word]}", card.line)
        else:
            raise self.err(
                f"unknown card {show(first)}; {SUBSET} with .param, .subckt/.ends and "
                f".end (and ignores {' '.join(sorted(IGNORED_CARDS))}); remove it",
                card.line,
            )
        return current

    def network(
        self, title: str, top: list[tuple[Card, list[Tok]]], last: int, allow_negative: bool, port: Port | None
    ) -> tuple[Network, list[str]]:
        """Every card read: top-level parameters evaluated, the top level's cards read, each subcircuit's
        cards read again per instance in its scope while flattening, the network validated, and the notes."""
        scope = self.global_scope()
        self.refuse_recursion({name: (f.body, f.line) for name, f in scope.functions.items()})
        for sub in self.subckts.values():
            self.refuse_recursion({name: (body, line) for name, _, body, line in sub.functions})
        for name, (_, line) in scope.definitions.items():
            try:
                self.params[name] = scope.find(name)  # type: ignore[assignment]  # found: it is defined here
            except ValueSyntaxError as exc:
                raise self.err(f".param {name}: {exc}", getattr(exc, "line", None) or line) from None
        self.scope = scope
        protos = [self.element(card, toks) for card, toks in top]
        elements = flatten(protos, self.subckts, MAX_ELEMENTS, MAX_SUBCKT_DEPTH, self.read_in_scope, scope)
        for sub in self.subckts.values():
            if not sub.checked and sub.cards:
                self.note(f"subcircuit {sub.name!r} is never placed by an X card; its cards were not read", sub.line)
        if not elements:
            raise self.err("the netlist has no element cards; add the network's elements after the title", last)
        network = Network(title, tuple(elements), allow_negative=allow_negative)
        validate(network, port)
        return network, list(dict.fromkeys(text for _, text in sorted(self.notes, key=lambda note: note[0])))

    def refuse_recursion(self, functions: dict[str, tuple[Expression, int]]) -> None:
        """A .func that calls itself, directly or through others, is refused even if unused (ngspice crashes on it)."""
        chain = recursive_chain({name: body for name, (body, _) in functions.items()})
        if chain:
            raise self.err(
                f".func {chain[0]} calls itself ({' -> '.join(chain)}); recursion is not supported: "
                "write the arithmetic out",
                functions[chain[0]][1],
            )

    def read_in_scope(self, card: Card, toks: list[Tok], scope: Scope) -> Element | Instance:
        """One subcircuit card read with its values evaluated in an instance's parameter scope."""
        outer, self.scope = self.scope, scope
        try:
            return self.element(card, toks)
        finally:
            self.scope = outer

    def global_scope(self) -> Scope:
        """The top level's parameters and functions (made on first use)."""
        scope = getattr(self, "_globals", None)
        if scope is None:
            scope = self._globals = Scope()
        return scope

    def param(self, card: Card, skip: int, current: Subckt | None = None) -> None:
        """A ``.param`` card: its expressions parsed now and evaluated when first needed (so, as in ngspice,
        a parameter may use one defined further down); inside a subcircuit, scoped to its instances."""
        try:
            found = assignments(card.text[skip:])
        except ValueSyntaxError as exc:
            raise self.err(f".param: {exc}", card.line) from None
        for name, text, offset in found:
            line = card.line_at(skip + offset)
            if current is not None:  # a .param may redefine a header default (it wins, as in ngspice)
                first = next((at for known, _, at in current.params if known == name), None)
            else:
                first = self.param_lines.get(name)
            if first is not None:
                raise self.err(
                    f"parameter {name!r} is defined twice (first at line {first}); keep one definition", line
                )
            try:
                expr = parse(text)
            except ValueSyntaxError as exc:
                raise self.err(f".param {name}: {exc}", line) from None
            if current is not None:
                current.params.append((name, expr, line))
            else:
                self.global_scope().definitions[name] = (expr, line)
                self.param_lines[name] = line

    def func(self, card: Card, skip: int, current: Subckt | None) -> None:
        """A ``.func name(args) {body}``: plain arithmetic callable in later expressions (recursion is refused
        when called); inside a subcircuit, it sees that instance's parameters."""
        try:
            name, args, body = function_definition(card.text[skip:])
        except ValueSyntaxError as exc:
            raise self.err(f".func: {exc}", card.line) from None
        known = (
            {f[0]: f[3] for f in current.functions}
            if current
            else {n: f.line for n, f in self.global_scope().functions.items()}
        )
        if name in known:
            raise self.err(f".func {name} is defined twice (first at line {known[name]}); keep one", card.line)
        if current is not None:
            current.functions.append((name, args, body, card.line))
        else:
            scope = self.global_scope()
            scope.functions[name] = Function(name, args, body, card.line, scope)

    def subckt_header(self, card: Card, toks: list[Tok]) -> Subckt:
        """``.subckt NAME nodes... [params:] [name=default ...]``: terminals, then parameter defaults."""
        if len(toks) < 2:
            raise self.err(".subckt needs a name: .subckt NAME node1 node2 ...", card.line)
        name = self.name(toks[1], "subcircuit name")
        split = next((i for i, t in enumerate(toks) if i > 1 and (t.value or t.text.lower() == "params:")), len(toks))
        ports = tuple(self.name(t, f"{name}: node") for t in toks[2:split])
        for i, p in enumerate(ports):
            if p == GROUND:
                raise self.err(
                    f"ground ({toks[2 + i].text}) cannot be a terminal of subcircuit {name!r}; "
                    "ground is global: use it inside the subcircuit directly",
                    toks[2 + i].line,
                )
            if p in ports[:i]:
                raise self.err(f"terminal {p!r} is listed twice in subcircuit {name!r}", toks[2 + i].line)
        if name in self.subckts:
            raise self.err(
                f"subcircuit {name!r} is defined twice (first at line {self.subckts[name].line}); rename one of them",
                card.line,
            )
        sub = Subckt(name, ports, card.line, [])
        for t in toks[split:]:
            if t.text.lower() == "params:" and t.value is None:
                continue
            if t.value is None:
                raise self.err(
                    f".subckt {name}: {show(t.text)} after the parameters is not name=value; write "
                    f".subckt {name} {' '.join(ports)} params: name=default ...",
                    t.line,
                )
            key = t.text.lower().rstrip(":")
            if sub.parameter_line(key) is not None:
                raise self.err(f".subckt {name}: parameter {key!r} is given twice; keep one", t.line)
            try:
                sub.defaults.append((key, parse(unwrap(t.value.text)), t.line))
            except ValueSyntaxError as exc:
                raise self.err(f".subckt {name}: parameter {key}: {exc}", t.value.line) from None
        return sub
