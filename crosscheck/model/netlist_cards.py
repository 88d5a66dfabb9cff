"""The per-kind readers of element cards, the part of the netlist reader that knows each device.

``CardReader`` turns one element card, already split into fields, into an ``Element`` (or an
``Instance`` of a subcircuit): R L C and K, the E F G H controlled sources, V and I with their
DC/AC/transient forms, and X instances. ``model.netlist`` subclasses it with the file-level work
(lines to cards, fields, ``.param`` and ``.subckt``) so that each module stays about one job.
"""

from __future__ import annotations

import bisect
import re
from dataclasses import dataclass
from typing import NamedTuple

from crosscheck.errors import Location, NetlistError, ValueSyntaxError
from crosscheck.model.netlist_subset import BEHAVIOURAL, DEVICES, NAME, NAME_CHARS, SUBSET, TRANSIENT, USAGE, VALUE_KEYS
from crosscheck.model.network import Element, make_element
from crosscheck.model.params import Scope, evaluate
from crosscheck.model.subcircuits import Instance
from crosscheck.model.values import parse_number

#: The longest element, node or subcircuit name accepted (a case file's port names share the limit).
MAX_NAME_CHARS = 200

_NUMERIC = re.compile(r"^[+-]?(?:\d|\.\d|\{)|^'")


class Tok(NamedTuple):
    """One field of a card; ``value`` is set for ``key=value`` fields (``text`` is then the key)."""

    text: str
    line: int
    value: Tok | None = None


@dataclass
class Card:
    """One card: its physical lines joined, with the line each part came from (for messages)."""

    text: str
    line: int
    starts: list[tuple[int, int]]  # (offset in text, physical line) of each joined line
    parts: list[str] | None = None  # continuation text gathered by ``extend`` until ``join``
    _length: int = 0  # the length ``text`` will have once joined

    def extend(self, text: str, line: int) -> None:
        """Add a ``+`` continuation line; the text is joined once by ``join`` so reading stays linear."""
        if self.parts is None:
            self.parts = [self.text]
            self._length = len(self.text)
        self._length += 1
        self.starts.append((self._length, line))
        self.parts.append(text)
        self._length += len(text)

    def join(self) -> None:
        """Join the continuation lines gathered by ``extend`` into ``text``, once."""
        if self.parts is not None:
            self.text = " ".join(self.parts)
            self.parts = None

    def line_at(self, offset: int) -> int:
        """The physical line holding ``offset``; a binary search, as ``starts`` is in ascending order."""
        index = bisect.bisect_right(self.starts, offset, key=lambda start: start[0]) - 1
        return self.starts[max(index, 0)][1]


def show(text: str, limit: int = 60) -> str:
    """User text quoted for a message, cut short so one long field cannot flood it."""
    return repr(text if len(text) <= limit else text[:limit] + "…")


class CardReader:
    """Element cards to elements; errors and notes name the file and the card's line."""

    def __init__(self, file: str):
        self.file = file
        self.notes: list[tuple[int, str]] = []
        self.params: dict[str, float] = {}

    def err(self, message: str, line: int | None) -> NetlistError:
        return NetlistError(message, Location(self.file, line))

    def note(self, message: str, line: int) -> None:
        self.notes.append((line, f"{Location(self.file, line)}: {message}"))

    def name(self, tok: Tok, what: str) -> str:
        if len(tok.text) > MAX_NAME_CHARS:
            raise self.err(
                f"{what} {show(tok.text)} has {len(tok.text)} characters; names have at most {MAX_NAME_CHARS}",
                tok.line,
            )
        if tok.value is not None or not NAME.match(tok.text):
            raise self.err(f"{what} {show(tok.text)} is not a valid name; use {NAME_CHARS}", tok.line)
        return tok.text.lower()

    #: The parameter scope values are evaluated in (the reader sets it per subcircuit instance); None: ``params``.
    scope: Scope | None = None

    def value(self, tok: Tok, element: str, what: str, scope: Scope | None = None) -> float:
        """A number, ``{expr}`` or ``'expr'``, with names from ``scope`` (default: the reader's current scope)."""
        if tok.value is not None:
            raise self.err(
                f"{element}: expected the {what}, got the parameter {tok.text}=...; "
                f"write it as {USAGE.get(element[0], 'a plain value')}",
                tok.line,
            )
        text = tok.text
        env: Scope | dict[str, float] = scope or self.scope or self.params
        try:
            if text[:1] in "{'" and len(text) >= 2:
                return evaluate(text[1:-1], env)
            return parse_number(text)
        except ValueSyntaxError as exc:
            known = env.find(text.lower()) is not None if isinstance(env, Scope) else text.lower() in env
            hint = f" (to use the parameter, write {{{text}}})" if known else ""
            line = getattr(exc, "line", None) or tok.line
            raise self.err(f"{element}: {what}: {exc}{hint}", line) from None

    def element(self, card: Card, toks: list[Tok]) -> Element | Instance:
        """The element (or subcircuit instance) of one card; its first letter picks the reader."""
        if not toks:
            raise self.err(f"the card {show(card.text)} has no fields; remove it", card.line)
        letter = toks[0].text[0].lower()
        if letter in DEVICES:
            raise self.err(
                f"{toks[0].text} is {DEVICES[letter]}, outside the supported subset; {SUBSET}: "
                "replace it by its small-signal linear model (R, C, E/G sources) and remove any "
                ".model card",
                card.line,
            )
        if letter not in USAGE:
            raise self.err(
                f"unknown element {show(toks[0].text)}: the first letter names the kind, and {SUBSET}", card.line
            )
        name = self.name(toks[0], "element name")
        where = Location(self.file, card.line)
        if letter in "efgh":
            self.refuse_behavioural(name, toks)
        if letter == "x":
            return self.instance(name, card, toks, where)
        if letter in "vi":
            return self.source(name, card, toks, where)
        return self.linear(name, card, toks, where)

    def refuse_behavioural(self, name: str, toks: list[Tok]) -> None:
        """E F G H: only the linear forms; a VALUE=, TABLE or POLY(...) form is refused."""
        usage = USAGE[name[0]]
        for i, t in enumerate(toks):
            if (i == 3 or t.value is not None) and t.text.lower() in BEHAVIOURAL or t.text.startswith("("):
                raise self.err(
                    f"{name}: the {show(t.text.upper())} form is behavioural or polynomial, outside "
                    f"the linear subset; write a linear source: {usage}",
                    t.line,
                )

    def instance(self, name: str, card: Card, toks: list[Tok], where: Location) -> Instance:
        """X name node... subckt [params:] [name=value ...]: the nodes, the subcircuit's name and the
        overrides, evaluated here in the caller's scope (a bare name is a parameter, as ngspice reads it)."""
        usage = USAGE[name[0]] + " [params: name=value ...]"
        split = next((i for i, t in enumerate(toks) if t.value or t.text.lower() == "params:"), len(toks))
        if split < 2:
            raise self.err(f"{name}: too few fields; write {usage}", card.line)
        overrides: dict[str, tuple[float, int]] = {}
        for t in toks[split:]:
            if t.value is None and t.text.lower() == "params:":
                continue
            if t.value is None:
                raise self.err(f"{name}: {show(t.text)} after the parameters is not name=value; write {usage}", t.line)
            key = t.text.lower().rstrip(":")
            if key in overrides:
                raise self.err(f"{name}: parameter {key!r} is given twice; keep one", t.line)
            text = t.value.text
            quoted = text if text[:1] in "{'" else "{" + text + "}"
            overrides[key] = (self.value(Tok(quoted, t.value.line), name, f"parameter {key}"), t.line)
        nodes = tuple(self.name(t, f"{name}: node") for t in toks[1 : split - 1])
        subckt = self.name(toks[split - 1], f"{name}: subcircuit")
        return Instance(name, nodes, subckt, where, tuple((k, v, line) for k, (v, line) in overrides.items()))

    def linear(self, name: str, card: Card, toks: list[Tok], where: Location) -> Element:
        """R L C, E F G H and K: nodes (or coupled inductors), a controlling source and one value."""
        letter, usage = name[0], USAGE[name[0]]
        positional = [t for t in toks if t.value is None]
        keyed = [t for t in toks if t.value is not None]
        value_tok = None
        for t in keyed:
            key = t.text.lower()
            if letter in VALUE_KEYS and key in VALUE_KEYS[letter]:
                if value_tok is not None or len(positional) >= 4:
                    raise self.err(f"{name}: the value is given twice; write {usage}", t.line)
                value_tok = t.value
            elif key == "ic" and letter in "lc":
                raise self.err(
                    f"{name}: an initial condition (ic=) only affects transient analysis and "
                    "crosscheck's model is small-signal AC; remove it",
                    t.line,
                )
            else:
                raise self.err(f"{name}: the parameter {t.text}= is not supported; write {usage}", t.line)
        expected = {"e": 6, "g": 6, "f": 5, "h": 5, "k": 4}.get(letter, 3 if value_tok else 4)
        if len(positional) < expected:
            raise self.err(f"{name}: too few fields; write {usage}", card.line)
        if len(positional) > expected:
            extra = positional[expected]
            raise self.err(
                f"{name}: unexpected field {show(extra.text)} (model names and extra parameters "
                f"are not supported); write {usage}",
                extra.line,
            )
        value_tok = value_tok or positional[-1]
        value = self.value(value_tok, name, usage.rsplit(" ", 1)[1])
        if letter == "k":
            coupled = (self.name(positional[1], f"{name}: inductor"), self.name(positional[2], f"{name}: inductor"))
            return make_element(name, "K", (), value, coupled=coupled, where=where)
        nodes = tuple(self.name(t, f"{name}: node") for t in positional[1 : (5 if letter in "eg" else 3)])
        control = self.name(positional[3], f"{name}: controlling source") if letter in "fh" else None
        return make_element(name, None, nodes, value, control=control, where=where)

    def source(self, name: str, card: Card, toks: list[Tok], where: Location) -> Element:
        """V and I: the AC phasor; a DC value is checked and ignored, a transient function noted."""
        usage = USAGE[name[0]]
        if len(toks) < 3 or any(t.value is not None for t in toks[:3]):
            raise self.err(f"{name}: too few fields; write {usage}", card.line)
        nodes = [self.name(t, f"{name}: node") for t in toks[1:3]]
        rest: list[Tok] = []  # dc=v, ac=v and a leading bare value become the keyword forms DC v, AC v
        for t in toks[3:]:
            keyword = t.value is not None and t.text.lower() in ("dc", "ac")
            rest += [Tok(t.text, t.line), t.value] if keyword and t.value else [t]

        def is_value(k: int) -> bool:
            return k < len(rest) and rest[k].value is None and _NUMERIC.match(rest[k].text) is not None

        if is_value(0):
            rest.insert(0, Tok("DC", rest[0].line))
        mag, phase, seen, k = 0.0, 0.0, set(), 0
        while k < len(rest):
            t, word = rest[k], rest[k].text.lower()
            if word in seen:
                raise self.err(f"{name}: {word.upper()} is given twice; write {usage}", t.line)
            if word == "dc" and is_value(k + 1):
                self.value(rest[k + 1], name, "DC value")  # checked, then ignored: the model is small-signal AC
                seen.add(word)
                k += 2
            elif word == "ac":
                seen.add(word)
                mag, k = 1.0, k + 1
                if is_value(k):
                    mag, k = self.value(rest[k], name, "AC magnitude"), k + 1
                    if is_value(k):
                        phase, k = self.value(rest[k], name, "AC phase"), k + 1
            elif word in TRANSIENT and k + 1 < len(rest) and rest[k + 1].text.startswith("("):
                self.note(
                    f"{name}: transient function {t.text.upper()}(...) ignored: it has no effect on AC analysis", t.line
                )
                k += 2
            elif word in TRANSIENT:
                raise self.err(
                    f"{name}: write the transient function's arguments in parentheses, as "
                    f"{t.text.upper()}(...); crosscheck ignores it for AC analysis",
                    t.line,
                )
            elif word.startswith("distof"):
                raise self.err(f"{name}: {t.text} (distortion analysis) is not supported; remove it", t.line)
            else:
                raise self.err(f"{name}: unexpected field {show(t.text)}; write {usage}", t.line)
        return make_element(name, None, nodes, 0.0, ac_mag=mag, ac_phase_deg=phase, where=where)
