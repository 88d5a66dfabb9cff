"""The reader's fast path: plain ``R|L|C name n1 n2 number`` lines read in bulk, every other line left to the card path.

A large netlist is mostly cards like ``R12 n3 n4 4.7k``. The card path (``model.netlist``) reads each
through fields, tokens and per-kind checks; here such lines are recognised by one regular expression
each, their numbers parsed in one pass and their elements built directly. What comes out is what the
card path makes of the same line: the same ``Element`` (``where`` included), the same value text for
``model.traps``, the same accepted line for ``Network.source_lines``; ``tests/test_fast_reader.py``
reads netlists both ways and compares everything.

A line takes this path only when reading it cannot depend on anything around it:

- it is a plain card: a name starting with R, L or C, two nodes, one number with an optional scale
  suffix and unit letters; only ASCII letters, digits, ``_ . : # + - [ ] < > ! /``, blanks and tabs;
  at most ``MAX_PLAIN_CHARS`` characters (so no name or number reaches the card path's length limits);
  never line 1 (the title);
- the card path's walk (``walk``) reaches it at the top level: outside ``.control`` blocks and
  ``.subckt`` definitions, before ``.end``;
- no ``+`` continuation line follows it (the nearest candidate before any line starting with ``+`` is
  handed to the card path, whatever lies between).

Why this path is safe: it accepts a subset of what the card path accepts, character by character
(a whitelist), turns it into names, nodes and floats only, and the lines reach ``Network.source_lines``
exactly as the card path would pass them on.
"""

from __future__ import annotations

import bisect
import gc
import re
import string
from collections import deque
from collections.abc import Callable, Iterable, Iterator, Sequence
from contextlib import contextmanager
from dataclasses import MISSING, fields
from functools import cache
from itertools import chain, compress, repeat
from operator import itemgetter, ne, not_
from typing import Any, NamedTuple

from crosscheck.errors import Location
from crosscheck.model.network import GROUND, GROUND_ALIASES, Element
from crosscheck.model.subcircuits import Instance
from crosscheck.model.traps import ValueText
from crosscheck.model.values import _SCALES  # the one table of scale suffixes, shared with parse_number

__all__ = [
    "MAX_PLAIN_CHARS",
    "PlainCards",
    "PlainLines",
    "merge_by_line",
    "no_cyclic_gc",
    "plain_values",
    "trap_values",
    "walk",
]

#: The longest line read here; a longer one goes the card path (names and numbers have length limits there).
MAX_PLAIN_CHARS = 100

_NAME = r"[A-Za-z0-9_.:#+\-\[\]<>!/]"
_NUMBER = r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?"
_PLAIN_CARD = re.compile(rf"[ \t]*[rlcRLC]{_NAME}*[ \t]+{_NAME}+[ \t]+{_NAME}+[ \t]+{_NUMBER}[A-Za-z]*[ \t]*")
_LETTERS = string.ascii_letters

#: The fields every element read here has at their defaults; None when one has no plain default (then the
#: elements are built by their constructor).
_SET_HERE = ("name", "kind", "nodes", "value", "where")
_DEFAULT_VALUES = {f.name: f.default for f in fields(Element) if f.name not in _SET_HERE}
_PLAIN_DEFAULTS = MISSING not in _DEFAULT_VALUES.values() and not hasattr(Element, "__post_init__")
_DEFAULTS: dict[str, Any] | None = _DEFAULT_VALUES if _PLAIN_DEFAULTS else None


class PlainCards(NamedTuple):
    """The lines read here, all in the same order: their numbers (ascending), their text without surrounding
    blanks, their elements, and each name and value as written (for ``model.traps``, see ``trap_values``)."""

    numbers: list[int]
    stripped: list[str]
    elements: list[Element]
    names: Sequence[str] = ()
    texts: Sequence[str] = ()

    def value_texts(self, indices: Iterable[int]) -> list[ValueText]:
        """The ``ValueText`` the card path keeps for each of these lines."""
        names, texts, numbers, elements = self.names, self.texts, self.numbers, self.elements
        return [ValueText(names[k][0].lower(), names[k], texts[k], numbers[k], elements[k].value) for k in indices]


class PlainLines:
    """Which lines of a netlist may take the fast path; ``walk`` decides the rest as the card path reaches them."""

    def __init__(self, lines: Sequence[str]):
        match = _PLAIN_CARD.fullmatch
        if max(map(len, lines), default=0) <= MAX_PLAIN_CHARS:
            found = list(map(match, lines))
        else:
            found = [match(line) if len(line) <= MAX_PLAIN_CHARS else None for line in lines]
        if found:
            found[0] = None  # the title
        others = list(compress(range(1, len(found) + 1), map(not_, found)))
        demoted = _before_continuations(lines, others)
        for number in demoted:
            found[number - 1] = None
        self.lines, self.found = lines, found
        #: The lines the card path reads (ascending, 1-based), whatever state the walk is in.
        self.others = sorted({*others, *demoted}) if demoted else others
        self.runs: list[tuple[int, int]] = []  # the first and last line of each run taken here

    def take(self, first: int, last: int) -> None:
        """Lines ``first``..``last`` (all plain) are read here."""
        self.runs.append((first, last))

    def cards(self, file: str) -> PlainCards:
        """The elements of every line taken, built in bulk: a plain line is exactly four blank-separated fields."""
        runs, lines = self.runs, self.lines
        numbers = list(chain.from_iterable(range(first, last + 1) for first, last in runs))
        if not numbers:
            return PlainCards([], [], [])
        text = "\n".join(chain.from_iterable(lines[first - 1 : last] for first, last in runs))
        fields, lowered = text.split(), text.lower().split()  # ASCII only: lowering the text lowers each field
        names, texts = fields[0::4], fields[3::4]
        values = plain_values(texts)
        kinds = list("".join(map(itemgetter(0), names)).upper())
        nodes = lowered[1::4] + lowered[2::4]
        table = dict(zip(nodes, nodes))  # one string per node name, shared by every element on it
        table.update((alias, GROUND) for alias in GROUND_ALIASES if alias in table)
        nodes = list(map(table.__getitem__, nodes))
        pairs = list(zip(nodes[: len(names)], nodes[len(names) :]))
        wheres = _build(Location, [{"file": file, "line": n} for n in numbers])
        elements = _elements(lowered[0::4], kinds, pairs, values, wheres)
        return PlainCards(numbers, list(map(str.strip, text.split("\n"))), elements, names, texts)


def _before_continuations(lines: Sequence[str], others: list[int]) -> list[int]:
    """The line before each block of other lines that holds a ``+`` line: a continuation may join it."""
    out: list[int] = []
    block_start = 0
    for k, number in enumerate(others):
        if k == 0 or others[k - 1] != number - 1:
            block_start = number
        if lines[number - 1].lstrip().startswith("+") and block_start > 2:
            out.append(block_start - 1)
    return out


def walk(
    lines: Sequence[str], plain: PlainLines | None, careful: Callable[[int], bool], top: Callable[[], bool]
) -> None:
    """Hand every line to ``careful`` in file order (it returns True at ``.end``), except runs of plain lines
    met while ``top()`` holds (outside blocks and subcircuits), which ``plain`` takes."""
    if plain is None:
        for number in range(1, len(lines) + 1):
            if careful(number):
                return
        return
    previous = 0
    for number in plain.others:
        if number > previous + 1 and _run(plain, previous + 1, number - 1, careful, top):
            return
        previous = number
        if careful(number):
            return
    if len(lines) > previous:
        _run(plain, previous + 1, len(lines), careful, top)


def _run(plain: PlainLines, first: int, last: int, careful: Callable[[int], bool], top: Callable[[], bool]) -> bool:
    if top():
        plain.take(first, last)
        return False
    return any(careful(number) for number in range(first, last + 1))


@cache
def _suffix(suffix: str) -> tuple[bool, int | None]:
    """What ``parse_number`` does with letters after a numeral: mils, or the decimal exponent of a scale
    (None: unit letters, ignored)."""
    lowered = suffix.lower()
    if lowered.startswith("mil"):
        return True, None
    return False, next((exponent for name, exponent in _SCALES if lowered.startswith(name)), None)


def plain_values(texts: Sequence[str]) -> list[float]:
    """The numbers as ``values.parse_number`` reads them, bit for bit, for texts that match its grammar: a
    numeral is ``float``; letters after it are a scale suffix that moves the decimal exponent, or a unit."""
    numerals = list(map(str.rstrip, texts, repeat(_LETTERS)))
    out = list(map(float, numerals))
    for k in compress(range(len(texts)), map(ne, map(len, texts), map(len, numerals))):
        mils, exponent = _suffix(texts[k][len(numerals[k]) :])
        if mils:
            out[k] = out[k] * 25.4e-6
        elif exponent is not None:
            mantissa, _, exp = numerals[k].lower().partition("e")
            out[k] = float(f"{mantissa}e{int(exp or 0) + exponent}")
    return out


def _build(cls: type, states: list[dict[str, Any]]) -> list[Any]:
    """Instances of ``cls`` with these attribute dictionaries, made without calling ``__init__`` (see ``_elements``)."""
    made: list[Any] = list(map(object.__new__, repeat(cls, len(states))))
    deque(map(object.__setattr__, made, repeat("__dict__"), states), maxlen=0)
    return made


def _elements(
    names: list[str], kinds: list[str], nodes: list[tuple[str, str]], values: list[float], wheres: list[Location]
) -> list[Element]:
    """The elements, each equal to ``make_element``'s, made from their attribute dictionaries: neither
    ``Element`` nor ``Location`` checks anything in ``__init__`` (when that changes, ``_DEFAULTS`` is None
    and the constructor is used)."""
    if _DEFAULTS is None:
        return [Element(n, k, p, v, where=w) for n, k, p, v, w in zip(names, kinds, nodes, values, wheres)]
    rest = _DEFAULTS
    return _build(
        Element,
        [
            {"name": n, "kind": k, "nodes": p, "value": v, **rest, "where": w}
            for n, k, p, v, w in zip(names, kinds, nodes, values, wheres)
        ],
    )


def merge_by_line(
    numbers: list[int], elements: list[Element], careful: list[tuple[int, tuple[Element | Instance, ...]]]
) -> list[Element | Instance]:
    """The fast path's elements and the card path's (each with its card's line), in line order."""
    out: list[Element | Instance] = []
    start = 0
    for line, protos in careful:
        stop = bisect.bisect_left(numbers, line, start)
        out.extend(elements[start:stop])
        out.extend(protos)
        start = stop
    out.extend(elements[start:])
    return out


def trap_values(careful: Sequence[ValueText], plain: PlainCards) -> list[ValueText]:
    """The fast path's value texts that ``model.traps.find_traps`` needs besides the card path's ``careful``
    ones: the same warnings as with every text, with few texts to scan.

    Every rule on an R, L or C value needs an ``m`` or ``M`` in its text (``1MHz``, ``1M`` among kilohms)
    or a text ending in ``F`` or ``f`` (femto): no other text can set one off. Other texts only enter
    ``suffix-mega-mixed``'s median of the other resistors, which is looked at only when some resistor's
    text has an ``m``: then every text is passed. A new rule must be added to this test.
    """
    texts = plain.texts
    marked = plain.value_texts(k for k, text in enumerate(texts) if "m" in text.lower() or text[-1:] in ("f", "F"))
    if any("m" in v.text.lower() for v in (*careful, *marked) if v.kind == "r"):
        return plain.value_texts(range(len(texts)))
    return marked


@contextmanager
def no_cyclic_gc() -> Iterator[None]:
    """The cyclic garbage collector paused while a netlist is read.

    Reading allocates hundreds of thousands of small objects and no cycles; each collection the
    allocations set off walks every object still alive, which cost about a third of a large read.
    The collector is switched back on afterwards (unless it was off before).
    """
    enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if enabled:
            gc.enable()
