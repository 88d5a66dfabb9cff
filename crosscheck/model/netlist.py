"""Read the SPICE subset crosscheck supports (the writer is ``model.netlist_writer``).

The reader takes netlists written by others: the first line is the title (as
in SPICE), ``*`` comment lines, ``;`` and ``$`` inline comments, ``+``
continuation lines, names in any case, ``.param`` arithmetic and ``{expr}``
values, ``.subckt``/``.ends`` with ``X`` instances flattened the way ngspice
names them (R2 in X1 becomes ``r.x1.r2``, node n3 becomes ``x1.n3``).
Analysis and output cards (``netlist_subset.IGNORED_CARDS``) are ignored with a note each;
``.control`` blocks are skipped, never run (``model.control_blocks``); what could read other
files or needs a nonlinear model is refused with file and line (``model.netlist_subset``; each
element card is read by ``model.netlist_cards``). One pass finds every problem: one
``NetlistError`` lists them in line order. Traps (``model.traps``) become the ``Reading``'s
warnings; the lines accepted become ``Network.source_lines``.
"""

from __future__ import annotations

from dataclasses import replace
from os import PathLike

from crosscheck.errors import NetlistError, ValueSyntaxError
from crosscheck.model.control_blocks import ControlBlocks
from crosscheck.model.fast_cards import PlainCards, PlainLines, merge_by_line, no_cyclic_gc, trap_values, walk
from crosscheck.model.netlist_cards import Card, ConsequenceError, Tok, show
from crosscheck.model.netlist_encoding import (
    MAX_NETLIST_CHARS,
    decode_netlist_bytes,
    decode_netlist_bytes_with_notes,
    read_netlist_text,
    read_netlist_text_with_notes,
)
from crosscheck.model.netlist_fields import line_problem, split_fields, strip_comment
from crosscheck.model.netlist_params import ParamReader
from crosscheck.model.netlist_subset import (
    GLOBAL_REFUSED,
    IGNORED_CARDS,
    OPTIONS_THAT_MATTER,
    REFUSED_CARDS,
    SUBSET,
)
from crosscheck.model.network import GROUND, Element, Network, Port, canonical_node, check_excitation
from crosscheck.model.params import Scope
from crosscheck.model.read_limits import DEFAULT_MAX_ELEMENTS, ReadLimits
from crosscheck.model.reading import Reading
from crosscheck.model.subcircuits import Instance, Subckt, flatten
from crosscheck.model.traps import ValueText, find_traps, for_excitation, value_text
from crosscheck.model.validation import validate

__all__ = [
    "read_netlist",
    "read_netlist_with_notes",
    "read_netlist_reading",
    "read_netlist_file",
    "read_netlist_file_with_notes",
    "read_netlist_file_reading",
    "read_netlist_text",
    "read_netlist_text_with_notes",
    "decode_netlist_bytes",
    "decode_netlist_bytes_with_notes",
    "MAX_PROBLEMS",
    "MAX_ELEMENTS",
    "MAX_LINE_CHARS",
    "MAX_SUBCKT_DEPTH",
]

#: Limits for untrusted input: beyond these the reader refuses instead of using unbounded time or memory
#: (the element count and the text's length are ``ReadLimits``'s defaults, which a caller may raise).
MAX_ELEMENTS = DEFAULT_MAX_ELEMENTS  # elements (and subcircuit instances) after flattening
MAX_LINE_CHARS = 100_000
MAX_SUBCKT_DEPTH = 50
MAX_TEXT_CHARS = MAX_NETLIST_CHARS
#: Problems listed in one error; the rest are counted ("... and 7 more").
MAX_PROBLEMS = 20

_OPTIONS = (".options", ".option", ".opt", ".opts")


# --------------------------------------------------------------------------- public API


def read_netlist(
    text: str,
    file: str = "<string>",
    *,
    allow_negative: bool = False,
    port: Port | None = None,
    limits: ReadLimits | None = None,
) -> Network:
    """Read a netlist into a validated Network (see ``read_netlist_reading`` for what is ignored)."""
    return read_netlist_reading(text, file, allow_negative=allow_negative, port=port, limits=limits)[0]


def read_netlist_with_notes(
    text: str, file: str = "<string>", *, allow_negative: bool = False, port: Port | None = None
) -> tuple[Network, list[str]]:
    """Read a netlist; also return its notes and then its warnings as text, each naming file and line.

    ``port`` is passed to ``validate``: a part of the network with no ground is accepted
    only when it holds the whole port (a transformer secondary, for example).
    """
    network, reading = read_netlist_reading(text, file, allow_negative=allow_negative, port=port)
    return network, [*reading.notes, *(str(w) for w in reading.warnings)]


def read_netlist_reading(
    text: str,
    file: str = "<string>",
    *,
    allow_negative: bool = False,
    port: Port | None = None,
    excitation: str = "ac",
    limits: ReadLimits | None = None,
) -> tuple[Network, Reading]:
    """Read a netlist; also return its ``Reading``: the notes and the warnings (traps), each naming file and line.

    A netlist with problems raises one ``NetlistError`` listing every problem found (``problems``), in
    line order; ill-posed networks raise ``NetworkError`` from ``validate`` once every card reads.
    ``excitation`` ("ac" or "dc") is set on the network and picks the warnings that concern it
    (``no-ac-source`` or ``no-dc-source``, ``traps.for_excitation``). ``limits``: None for the defaults.
    """
    check_excitation(excitation, (), "excitation")
    with no_cyclic_gc():
        network, reading = _Reader(file, limits=limits).read(text, allow_negative, port)
    if excitation != network.excitation:
        network = replace(network, excitation=excitation)
    return network, replace(reading, warnings=for_excitation(reading.warnings, excitation))


def read_netlist_file(path: str | PathLike, *, allow_negative: bool = False, port: Port | None = None) -> Network:
    """Read a netlist file (UTF-8, UTF-16 or Windows-1252 text; binary data is refused)."""
    return read_netlist_file_reading(path, allow_negative=allow_negative, port=port)[0]


def read_netlist_file_with_notes(
    path: str | PathLike, *, allow_negative: bool = False, port: Port | None = None
) -> tuple[Network, list[str]]:
    """``read_netlist_with_notes`` for a file; a note says when the file was not UTF-8."""
    network, reading = read_netlist_file_reading(path, allow_negative=allow_negative, port=port)
    return network, [*reading.notes, *(str(w) for w in reading.warnings)]


def read_netlist_file_reading(
    path: str | PathLike,
    *,
    allow_negative: bool = False,
    port: Port | None = None,
    excitation: str = "ac",
    limits: ReadLimits | None = None,
) -> tuple[Network, Reading]:
    """``read_netlist_reading`` for a file; the decoding note (UTF-16, Windows-1252) comes first."""
    text, decoding = read_netlist_text_with_notes(path, limits=limits)
    network, reading = read_netlist_reading(
        text, str(path), allow_negative=allow_negative, port=port, excitation=excitation, limits=limits
    )
    return network, replace(reading, notes=decoding + reading.notes)


# --------------------------------------------------------------------------- lines, cards, fields


class _Reader(ParamReader):
    """The file-level reader: lines to cards, cards to fields, ``.param`` and ``.subckt`` blocks.

    Each card's problem is kept (``problem``) and reading goes on, so one pass finds them all.
    """

    def __init__(self, file: str, fast: bool = True, limits: ReadLimits | None = None):
        super().__init__(file)
        self.limits = limits or ReadLimits(MAX_ELEMENTS, -(-MAX_TEXT_CHARS // 2**20))  # None: looked up now
        self.most = self.limits.max_elements
        self.max_chars = MAX_TEXT_CHARS if limits is None else limits.max_netlist_bytes
        self.fast = fast  # plain R L C lines read in bulk (``model.fast_cards``); False: every line as a card
        self.plain = PlainCards([], [], [])
        self.count = 0
        self.problems: list[tuple[NetlistError, str | None]] = []  # the error, the card's text
        self.stripped: dict[int, str] = {}  # each card line without its comment, for ``source_lines``
        self.accepted: list[Card] = []  # cards that reach the model (elements, .subckt/.ends, .param)
        self.values: list[ValueText] = []  # value texts as written, for ``traps``
        self.trap_lines: set[int] = set()  # the lines whose value texts are in ``values``
        self.globals: list[Card] = []
        self.nested = 0  # .subckt cards refused inside another: their .ends is theirs
        self.broken_header = False  # a .subckt header was refused: flattening would blame its instances

    def problem(self, exc: NetlistError, card: Card | None = None) -> None:
        """Keep a problem and go on; ``finish`` raises them together (a consequence of another is dropped)."""
        if isinstance(exc, ConsequenceError):
            return
        self.problems.append((exc, card.text if card is not None else None))

    def finish(self) -> None:
        """Raise the problems found so far: the one error as it was, or one error listing them in line order."""
        if not self.problems:
            return
        ordered = sorted(self.problems, key=lambda p: p[0].location.line or 0)
        if len(ordered) == 1:
            raise ordered[0][0]
        listed = [
            (exc.location, f"{show(text)}: {exc.bare_message}" if text else exc.bare_message) for exc, text in ordered
        ]
        raise NetlistError.of_problems(listed, MAX_PROBLEMS)

    # ---- text to cards

    def lines(self, text: str) -> list[str]:
        if len(text) > self.max_chars:
            raise self.err(self.limits.size_refusal(len(text)), 1)
        if not text.strip():
            raise self.err("the netlist is empty; a netlist is a title line followed by element cards", 1)
        return text.lstrip("\ufeff").replace("\r\n", "\n").replace("\r", "\n").split("\n")

    def cards(self, text: str) -> tuple[str, list[Card], int]:
        """The title and the cards (continuations joined, comments and .control blocks dropped); plain
        R L C lines at the top level are read in bulk into ``self.plain`` (``model.fast_cards``)."""
        lines = self.lines(text)
        self.all_lines, self.blocks, self.last, self.depth = lines, ControlBlocks(), 1, 0
        self.card_list: list[Card] = []
        plain = PlainLines(lines) if self.fast and len(lines) <= self.most else None  # else the limit's line
        walk(lines, plain, self.card_line, lambda: self.blocks.open is None and not self.depth)
        if plain is not None:
            self.plain = plain.cards(self.file)
            self.stripped.update(zip(self.plain.numbers, self.plain.stripped))
            self.last = max([self.last, *self.plain.numbers[-1:]])
        self.control_notes(self.blocks, self.last)
        for card in self.card_list:
            card.join()
        return lines[0].lstrip("\ufeff").strip(), self.card_list, self.last

    def card_line(self, number: int) -> bool:
        """One physical line into the cards (``self.depth`` counts open .subckt cards); True at ``.end``."""
        raw, cards = self.all_lines[number - 1], self.card_list
        bad = line_problem(raw, number, MAX_LINE_CHARS, self.err)
        if bad is not None:
            self.problem(bad)
            return False
        stripped = strip_comment(raw).strip() if number > 1 else ""
        if not stripped or stripped.startswith("*") or self.blocks.take(number, stripped):
            return False
        self.last = number
        word = stripped.split(None, 1)[0].lower()
        if stripped.startswith("+"):
            if not cards:
                self.problem(
                    self.err(
                        "a + continuation line with no card before it (line 1 is always the title); "
                        "join it to a card or remove the +",
                        number,
                    )
                )
                return False
            cards[-1].extend(stripped[1:], number)
        elif word == ".end":
            if any(strip_comment(rest).strip() for rest in self.all_lines[number:]):
                self.note("text after .end ignored", number)
            return True
        else:
            cards.append(Card(stripped, number, [(0, number)]))
            self.depth = self.depth + 1 if word == ".subckt" else max(self.depth - (word == ".ends"), 0)
        self.stripped[number] = stripped
        return False

    def control_notes(self, blocks: ControlBlocks, end: int) -> None:
        """A note per skipped .control block; a block with no .endc is a problem named at its .control line."""
        for block in blocks.blocks:
            self.note(block.note(), block.first)
        if blocks.open is not None:
            self.problem(
                self.err(
                    f"the .control block is not closed: no .endc before the end of the netlist (line {end}); "
                    "add .endc after the block's last command (crosscheck skips the block; it never runs it)",
                    blocks.open.first,
                )
            )

    def fields(self, card: Card) -> list[Tok]:
        """The card's fields (``model.netlist_fields``); a malformed one raises a NetlistError with its line."""
        return split_fields(card, self.err)

    # ---- the whole file

    def read(self, text: str, allow_negative: bool, port: Port | None) -> tuple[Network, Reading]:
        title, cards, last = self.cards(text)
        top: list[tuple[Card, list[Tok]]] = []
        current: Subckt | None = None
        for card in cards:
            first = card.text.split(None, 1)[0]
            if not first.startswith("."):
                self.count += 1
                if self.count > self.most:  # the limit stops the reading: the one problem to fix first
                    raise self.err(self.limits.elements_refusal(), card.line)
            try:
                if first.startswith("."):
                    current = self.dot_card(card, first, current)
                else:
                    (current.cards if current else top).append((card, self.fields(card)))
                    self.accepted.append(card)
            except NetlistError as exc:
                self.problem(exc, card)
                if first.lower() == ".subckt" and current is None:  # its cards and .ends still belong to it
                    current, self.broken_header = Subckt("", (), card.line, []), True
                elif first.lower() == ".ends" and not self.nested:  # a refused .ends still closes its subcircuit
                    current = None
        if current is not None and current.name:
            self.problem(
                self.err(
                    f"subcircuit {current.name!r} is never closed; add '.ends {current.name}' after its last card",
                    current.line,
                )
            )
        return self.network(title, top, last, allow_negative, port)

    def dot_card(self, card: Card, first: str, current: Subckt | None) -> Subckt | None:
        """A card starting with '.': read, ignored with a note, or refused; returns the open subcircuit."""
        word = first.lower()
        if word in (".subckt", ".ends"):
            return self.subckt_card(card, word, current)
        if word == ".param":
            self.param(card, len(first), current)
            self.values.append(ValueText("text", first, card.text, card.line))
            self.accepted.append(card)
        elif word == ".func":
            self.func(card, len(first), current)
            self.accepted.append(card)
        elif word == ".model":
            self.model_card(card)
            self.accepted.append(card)
        elif word == ".temp":
            self.temp_card(card)
            self.accepted.append(card)
        elif word in _OPTIONS:
            self.options(card, first)
        elif word == ".global":
            self.globals.append(card)
        elif word in IGNORED_CARDS:
            self.note(f"{first} card ignored ({show(card.text)}): {IGNORED_CARDS[word]}", card.line)
        elif word in REFUSED_CARDS:
            raise self.err(f"{first} is not supported: {REFUSED_CARDS[word]}", card.line)
        else:
            raise self.err(
                f"unknown card {show(first)}; {SUBSET} with .param, .func, .model, .temp, .subckt/.ends and "
                f".end (and ignores {' '.join(sorted(IGNORED_CARDS))}, .global and .control blocks); remove it",
                card.line,
            )
        return current

    def options(self, card: Card, first: str) -> None:
        """An .options card: ignored with a note that names any key that would change an answer if applied.

        The hook for reading some keys (temp=, tnom=): a reader that applies one notes what it applied
        and calls ``self.accepted.append(card)`` so the card reaches ``Network.source_lines``.
        """
        toks = self.fields(card)[1:]
        keys = {t.text.lower() for t in toks if t.value is not None}
        if "scale" in keys:
            raise self.err(
                f"{first} scale=: ngspice scales device lengths and widths by it, which crosscheck does not "
                "implement; remove scale= and write the lengths and widths scaled",
                next(t.line for t in toks if t.text.lower() == "scale"),
            )
        self.options_temperature(card)
        applied = [key for key in OPTIONS_THAT_MATTER if key in keys]
        if applied:
            self.accepted.append(card)  # the temperatures reach the reading check as written
        extra = f"; except {', '.join(k + '=' for k in applied)}, which crosscheck applies" if applied else ""
        self.note(f"{first} card ignored ({show(card.text)}): {IGNORED_CARDS[first.lower()]}{extra}", card.line)

    def subckt_card(self, card: Card, word: str, current: Subckt | None) -> Subckt | None:
        """.subckt opens a definition, .ends closes it; the card reaches ``source_lines`` when accepted."""
        if word == ".subckt":
            if current is not None:
                self.nested += 1
                raise self.err(
                    f".subckt inside subcircuit {current.name!r} (line {current.line}); "
                    "define each subcircuit at the top level",
                    card.line,
                )
            current = self.subckt_header(card, self.fields(card))
            self.values.append(ValueText("text", current.name, card.text, card.line))
        elif self.nested:
            self.nested -= 1
            return current
        else:
            if current is None:
                raise self.err(".ends with no .subckt before it; remove it or add the .subckt card", card.line)
            toks = self.fields(card)
            if current.name:
                self.subckts[current.name] = current
            if current.name and len(toks) > 1 and toks[1].text.lower() != current.name:
                raise self.err(
                    f".ends {toks[1].text} closes subcircuit {current.name!r} "
                    f"(line {current.line}); make the names match",
                    card.line,
                )
            current = None
        self.accepted.append(card)
        return current

    # ---- cards to the network

    def protos(self, cards: list[tuple[Card, list[Tok]]]) -> list[Element | Instance]:
        """The top level's elements and instances; a card that cannot be read becomes a problem."""
        out: list[tuple[int, tuple[Element | Instance, ...]]] = []
        for card, toks in cards:
            try:
                out.append((card.line, self.read_card(card, toks)))
            except NetlistError as exc:
                self.problem(exc, card)
        return merge_by_line(self.plain.numbers, self.plain.elements, out)

    def read_card(self, card: Card, toks: list[Tok]) -> tuple[Element | Instance, ...]:
        """One card's element (an RF port source adds its internal resistor); its value text kept for ``traps``."""
        proto = self.element(card, toks)
        if card.line not in self.trap_lines:  # a subcircuit's card is read once per instance: kept once
            self.trap_lines.add(card.line)
            self.values.append(value_text(toks, proto, card.text, card.line))
        port_resistor = self.port_resistors.pop(card.line, None)
        return (proto,) if port_resistor is None else (proto, port_resistor)

    def read_scoped(self, card: Card, toks: list[Tok], scope: Scope) -> tuple[Element | Instance, ...]:
        """A subcircuit's card in an instance's scope (``subcircuits.flatten`` calls it)."""
        outer, self.scope = self.scope, scope
        try:
            return self.read_card(card, toks)
        finally:
            self.scope = outer

    def global_parameters(self) -> Scope:
        """The top level's parameters, each evaluated (a problem each that cannot be), and recursion refused."""
        scope = self.global_scope()
        functions = [{name: (f.body, f.line) for name, f in scope.functions.items()}]
        functions += [{name: (body, line) for name, _, body, line in sub.functions} for sub in self.subckts.values()]
        for table in functions:
            try:
                self.refuse_recursion(table)
            except NetlistError as exc:
                self.problem(exc)
        for name, (_, line) in scope.definitions.items():
            try:
                self.params[name] = scope.find(name)  # type: ignore[assignment]  # found: it is defined here
            except ValueSyntaxError as exc:
                self.problem(self.err(f".param {name}: {exc}", getattr(exc, "line", None) or line))
        return scope

    def network(
        self, title: str, top: list[tuple[Card, list[Tok]]], last: int, allow_negative: bool, port: Port | None
    ) -> tuple[Network, Reading]:
        """Every card read: top-level parameters evaluated, the top level's cards read, each subcircuit's
        cards read again per instance in its scope while flattening, the network validated, notes and warnings.

        Flattening runs unless a .subckt header or a parameter was refused, and stops at its first problem;
        validation runs once every card reads (with a card missing it would report consequences, not causes).
        """
        before = len(self.problems)
        self.scope = self.global_parameters()
        parameters_read = len(self.problems) == before
        protos = self.protos(top)
        elements: list[Element] = []
        if not self.broken_header and parameters_read:
            try:
                elements = flatten(protos, self.subckts, self.most, MAX_SUBCKT_DEPTH, self.read_scoped, self.scope)
            except NetlistError as exc:
                self.problem(exc)
        self.check_globals(elements)
        for sub in self.subckts.values():
            if not sub.checked and sub.cards:
                self.note(f"subcircuit {sub.name!r} is never placed by an X card; its cards were not read", sub.line)
        self.finish()
        if not elements:
            raise self.err("the netlist has no element cards; add the network's elements after the title", last)
        network = Network(title, tuple(elements), allow_negative=allow_negative, source_lines=self.source_lines())
        validate(network, port)
        notes = tuple(dict.fromkeys(text for _, text in sorted(self.notes, key=lambda note: note[0])))
        return network, Reading(
            notes, find_traps(title, self.values + trap_values(self.values, self.plain), network, self.file)
        )

    def source_lines(self) -> tuple[str, ...]:
        """The accepted cards' physical lines in file order, comments removed, + continuations kept."""
        lines = sorted([*(number for card in self.accepted for _, number in card.starts), *self.plain.numbers])
        return tuple(self.stripped[number] for number in lines)

    def check_globals(self, elements: list[Element]) -> None:
        """.global: noted when it names only ground or nodes no subcircuit uses; refused otherwise."""
        inside = {node.rsplit(".", 1)[1] for e in elements for node in e.nodes if "." in node}
        inside.update(node for sub in self.subckts.values() for node in sub.ports)
        for card in self.globals:
            nodes = [canonical_node(t.text) for t in self.fields(card)[1:]]
            clash = [n for n in nodes if n != GROUND and n in inside]
            if clash:
                self.problem(self.err(f".global {clash[0]}: {GLOBAL_REFUSED.format(node=clash[0])}", card.line), card)
            elif all(n == GROUND for n in nodes):
                self.note(f".global card ignored ({show(card.text)}): ground is always global", card.line)
            else:
                self.note(
                    f".global card ignored ({show(card.text)}): no subcircuit uses "
                    f"{', '.join(n for n in nodes if n != GROUND)}, so it has no effect",
                    card.line,
                )
