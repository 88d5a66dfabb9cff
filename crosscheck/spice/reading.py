"""The reading check: ngspice reads the user's own accepted lines, so a misreading by our reader shows.

Both routes solve the one ``Network`` the reader made, so a line the reader reads differently from
ngspice would be invisible to the route comparison. Here ngspice gets, besides the model's deck,
a second deck written from ``Network.source_lines`` (the user's lines the reader accepted), runs
the open-circuit ``.ac`` analysis on it (``.op`` under DC excitation) in the same worker task, and
V(a) − V(b) at the port goes back in ``ReadingAnswer`` for ``judge.reading`` to hold against the own route's V_th.

Why this path is safe (user text reaches ngspice here, and only here):

* the lines are only those the reader accepted from its whitelist (element, subcircuit, ``.param``,
  ``.func``, ``.model`` and ``.temp`` cards, names from a fixed character set); every dot-card the
  reader ignored or refused, every ``.control`` block, the title and ``.end`` are left out by the
  reader before the lines are stored;
* ``unsafe_line`` checks every line again before a deck is written, so a bug in the reader cannot
  open the door: a line starting with any dot-card but ``.subckt .ends .param .func .model .temp``
  (and ``.options`` that sets only ``temp``/``tnom``), a line that starts with anything but a
  letter, ``+`` or ``.``, and any line holding a backtick (ngspice's shell substitution), a control
  character or ``.control``/``.endc``/``.include``/``.inc``/``.lib`` anywhere is refused with an
  error finding and the deck is never sent;
* the deck's title, options and analysis cards are ours (``TITLE``, ``deck.deck_options``, ``deck.analysis_cards``);
  no control command carries user text: the element values for the explanation are read through the
  shared library's vector interface (``ngGet_Vec_Info("@name[param]")``), never by a command, and only
  for element names of the model that match ``VECTOR_NAME``;
* it runs in the isolated worker (``spice.sandbox``): an empty working directory, a private ``HOME``
  (no ``.spiceinit``), memory and CPU limits.

The explanation on a difference compares ngspice's element values with the model's. A vector read
searches the whole circuit (measured on ngspice 39: 0.09 s for all values of 148 elements, 6.8 s for
1,028, 46 s for 4,139), so the worker reads them only when ngspice's reading differs from ngspice's own
open-circuit run of the model's deck, in the same task while the reading deck is still loaded, and
within ``VALUE_BUDGET_S``: the normal path costs the one extra ``.ac`` run alone (measured: +2.1 ms on
7.9 ms for 148 elements at 41 frequencies, +24 ms on 105 ms for 1,028, +6.1 s on 21.5 s for 4,139; the
model's deck holds three copies of the network, so one copy's run costs about a quarter of it).
Limits of that comparison (ngspice 39, measured): ``@r[resistance]`` is the nominal value (so the
effective resistance is computed here from ``ac``, ``m``, ``scale``, ``tc1``, ``tc2``, ``temp``,
``dtemp`` and TNOM), a ``.model`` card's own tc1/tc2 are not visible per instance, ``@c[capacitance]``
already includes m and scale, ``@l[inductance]`` does not include m, ``@k[coefficient]`` is the
mutual inductance k·√(L1·L2).
"""

from __future__ import annotations

import bisect
import functools
import math
import re
import time
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any, Protocol

import numpy as np

from crosscheck.errors import CrosscheckError
from crosscheck.model.frequencies import frequency_list
from crosscheck.model.network import GROUND, Element, Network, Port, check_excitation, floating_reference
from crosscheck.spice.deck import analysis_cards, deck_options
from crosscheck.vocabulary import same_frequency

TITLE = "crosscheck reading check: the netlist's own accepted lines"
#: ngspice's reading and its run of the model's deck are the same engine on the same network when the
#: reader is right; a relative difference above this makes the worker read the element values.
TRIGGER_REL = 1e-9
#: An element's value counts as different above this relative difference.
VALUE_REL = 1e-9
#: Our 0 V source joining a port's ground-free part to ground (see ``build_reading_deck``).
REFERENCE_TIE = "v_crosscheck_reference"
#: The element values are read for the elements in netlist order until this many seconds have passed: a read
#: searches the whole circuit (measured on ngspice 39: ~0.1 s for all of 148 elements, 6.8 s for 1,028).
VALUE_BUDGET_S = 2.0

_ALLOWED_DOT_CARDS = frozenset({".subckt", ".ends", ".param", ".func", ".model", ".temp"})
_OPTIONS_TEMP_ONLY = re.compile(r"^\.options?(?:\s+(?:temp|tnom)\s*=\s*[0-9.eE+\-]+)+\s*$", re.IGNORECASE)
_FORBIDDEN = re.compile(r"`|\.(?:control|endc|include|inc|lib)\b|[\x00-\x08\x0b-\x1f\x7f]", re.IGNORECASE)
#: Element names passed to the vector interface: the reader's name characters without brackets and spaces.
VECTOR_NAME = re.compile(r"^[a-z0-9_.:#+\-<>!/]+$")
_ERROR_ON_LINE = re.compile(r"error on line (\d+)", re.IGNORECASE)
_TNOM = re.compile(r"TNOM\s*=\s*([0-9.eE+\-]+)")


#: A sweep's reading check runs at this many of its frequencies at most (its first, its last and between).
MAX_READING_FREQS = 8


def reading_groups(groups: Sequence[Sequence[float]]) -> list[list[float]]:
    """The frequency groups the reading check runs: each group cut to ``MAX_READING_FREQS`` spread evenly.

    A misread value moves V_th at almost every frequency, so eight frequencies across a sweep find it as
    surely as all of them, and a long sweep's reading check then costs far less than the open-circuit run
    of the model's deck (0 Hz keeps its own group: a capacitor's value shows only away from it)."""
    out = []
    for group in groups:
        if len(group) <= MAX_READING_FREQS:
            out.append(list(group))
            continue
        picks = sorted({round(i * (len(group) - 1) / (MAX_READING_FREQS - 1)) for i in range(MAX_READING_FREQS)})
        out.append([group[i] for i in picks])
    return out


class UnsafeLineError(CrosscheckError, ValueError):
    """A stored line that must never reach ngspice (a reader bug); ``index`` is its position in the lines."""

    def __init__(self, message: str, index: int, line: str):
        self.index = index
        self.line = line
        super().__init__(message)


@dataclass(frozen=True)
class ReadingDeck:
    """The reading check's deck: its text, the distinct frequencies, and the vectors of V(a) and V(b)."""

    text: str
    freqs: tuple[float, ...]
    plus: str | None  # None when a is ground
    minus: str | None
    first_line: int = 2  # the deck line (1-based) of source_lines[0]: after our title
    operating_point: bool = False  # ``.op`` (DC excitation): its plot has one row and no frequency, read as 0 Hz


@dataclass(frozen=True)
class ElementDifference:
    """An element whose value ngspice reads otherwise than the model (``line``: the user's file line)."""

    name: str
    line: int | None
    quantity: str  # "resistance", "capacitance", "inductance", "gain", "coupling", "ac phasor"
    model: complex
    ngspice: complex


@dataclass(frozen=True)
class ReadingAnswer:
    """ngspice's V(a) − V(b) from the user's own lines, per requested frequency (None where it gave none).

    ``failure``: ngspice did not accept the lines (its words, with the line); ``refused``: our own check
    refused a line, which was then never sent. ``differences`` are filled only when ``values_read``.
    """

    freqs_hz: tuple[float, ...]
    vth: tuple[complex | None, ...]
    failure: str = ""
    failure_line: str = ""  # where: "file:line" when known, else the accepted line's text
    refused: str = ""
    missing_nodes: tuple[str, ...] = ()  # port nodes that are not nodes of ngspice's reading
    values_read: bool = False
    differences: tuple[ElementDifference, ...] = ()
    notes: tuple[str, ...] = ()
    deck: str = field(default="", repr=False)


class ReadingEngine(Protocol):
    """What the check needs of ``engine.Engine`` (kept a protocol: ``engine`` imports this module)."""

    def run(self, deck: Any, while_loaded: Callable[[dict[str, dict[str, np.ndarray]]], None] | None = None) -> Any: ...

    def instance_parameter(self, name: str, parameter: str) -> float | None: ...

    @property
    def last_lines(self) -> tuple[str, ...]: ...


# --------------------------------------------------------------------------- the deck


def unsafe_line(line: str) -> str | None:
    """Why ``line`` must not reach ngspice, or None when it may (see the module docstring)."""
    if _FORBIDDEN.search(line):
        return "it holds a backtick, a control character or .control/.endc/.include/.lib"
    text = line.strip()
    if not text:
        return None
    if text.startswith("."):
        card = text.split(None, 1)[0].lower()
        if card in _ALLOWED_DOT_CARDS or _OPTIONS_TEMP_ONLY.match(text):
            return None
        return f"{card} is not a card the reading check sends (only {', '.join(sorted(_ALLOWED_DOT_CARDS))})"
    if text[0] == "+" or text[0].isascii() and text[0].isalpha():
        return None
    return "it starts with neither a letter, '+' nor '.'"


def build_reading_deck(
    network: Network, port: Port, freqs: Sequence[float], *, save: bool = True, klu: bool = False
) -> ReadingDeck:
    """The deck: our title, the accepted lines verbatim, our options, ``.save`` and ``.ac`` cards, ``.end``.

    Under DC excitation (``network.excitation == "dc"``, 0 Hz only) the analysis card is ``.op``: the user's
    lines carry their own DC values (and transient functions' time-zero values), which ``.op`` reads."""
    for index, line in enumerate(network.source_lines):
        why = unsafe_line(line)
        if why:
            raise UnsafeLineError(
                f"the reading check refused accepted line {index + 1} ({line[:80]!r}) and sent nothing to ngspice: "
                f"{why}. This is a bug in the reader; please report it",
                index,
                line,
            )
    operating_point = network.excitation == "dc"
    if operating_point:
        check_excitation("dc", freqs, "the reading check")
    tie = floating_reference(network, port)
    # A part with no ground holds the whole port (a transformer's secondary): its b node stands in for ground,
    # as in the model's deck; one 0 V source of ours joins it to ground, which carries no current.
    ours = [f"{REFERENCE_TIE} {tie} 0 DC 0"] if tie is not None else []
    lines = [
        TITLE,
        *network.source_lines,
        *ours,
        deck_options(klu=klu, sweep=not operating_point and len(freqs) > 1),
        *(_save_card(port) if save else []),
        *((".op",) if operating_point else analysis_cards(freqs)),
        ".end",
    ]
    return ReadingDeck(
        text="\n".join(lines) + "\n",
        freqs=frequency_list(freqs, where="frequencies"),
        plus=None if port.a == GROUND else port.a,
        minus=None if port.b == GROUND else port.b,
        operating_point=operating_point,
    )


def _save_card(port: Port) -> list[str]:
    """``.save`` of the port's nodes alone: ngspice then keeps two vectors, not every node's (measured on a
    1,000-node ladder at 30 frequencies, the reading check 84 → 15 ms). The names passed the reader's whitelist; a name with a
    parenthesis (``net-(r1-pad2)``) would be cut by ``v(...)``, so then every node is kept, as without the card."""
    nodes = [n for n in port if n != GROUND]
    if not nodes or any(c in n for n in nodes for c in "()"):
        return []
    return [".save " + " ".join(f"v({n})" for n in nodes)]


# --------------------------------------------------------------------------- running it


def check_reading(
    engine: ReadingEngine,
    network: Network,
    port: Port,
    groups: Sequence[Sequence[float]],
    requested: Sequence[float],
    reference: Mapping[float, complex | None],
) -> ReadingAnswer | None:
    """Run the reading deck per frequency group (0 Hz alone, as ``engine.solve`` does; a long group at
    ``MAX_READING_FREQS`` of its frequencies, the others None); None without lines.

    ``reference``: ngspice's V_th from the model's deck per frequency; where the reading differs from it,
    the element values are read while the deck is loaded.
    """
    if not network.source_lines:
        return None
    requested = tuple(requested)
    nothing = (None,) * len(requested)
    tie = floating_reference(network, port)
    if tie is not None and (
        "." in tie or not VECTOR_NAME.match(tie) or any(e.name == REFERENCE_TIE for e in network.elements)
    ):
        note = (
            "reading check not made: the port's part of the network has no ground and its node b "
            f"({tie!r}) cannot be tied to ground from outside the netlist's lines"
        )
        return ReadingAnswer(requested, nothing, notes=(note,))
    run = _ReadingRun(engine, network, reference)
    for group in reading_groups(groups):
        try:
            deck = build_reading_deck(network, port, group, klu=bool(getattr(engine, "klu", False)))
        except UnsafeLineError as exc:
            return ReadingAnswer(requested, nothing, refused=str(exc))
        run.decks.append(deck.text)
        try:
            try:
                engine.run(deck, functools.partial(run.loaded, deck))
            except CrosscheckError:  # ngspice aborts a run whose .save names a node it lacks: keep every node
                if not _save_card(port):
                    raise
                deck = build_reading_deck(network, port, group, save=False, klu=bool(getattr(engine, "klu", False)))
                run.decks[-1] = deck.text
                engine.run(deck, functools.partial(run.loaded, deck))
        except CrosscheckError as exc:
            if getattr(exc, "singular", False):
                run.notes.append(
                    f"reading check: ngspice finds the network singular at {', '.join(map(repr, group))} Hz"
                )
                continue
            lines = tuple(getattr(exc, "lines", ())) or (str(exc),)
            where, finding = refusal_finding(network, lines, deck.first_line)
            return ReadingAnswer(requested, nothing, failure=finding, failure_line=where, deck=deck.text)
    return ReadingAnswer(
        requested,
        tuple(run.got.get(f) for f in requested),
        values_read=run.differences is not None,
        missing_nodes=tuple(sorted(run.lost)),
        differences=tuple(run.differences or ()),
        notes=tuple(run.notes),
        deck="".join(run.decks),
    )


class _ReadingRun:
    """What the reading decks of one case gave: values, lost port nodes, element differences, notes."""

    def __init__(self, engine: ReadingEngine, network: Network, reference: Mapping[float, complex | None]):
        self.engine, self.network, self.reference = engine, network, reference
        self.got: dict[float, complex] = {}
        self.lost: set[str] = set()  # port nodes that ngspice's reading does not have
        self.differences: list[ElementDifference] | None = None  # None: the values were not read
        self.notes: list[str] = []
        self.decks: list[str] = []

    def loaded(self, deck: ReadingDeck, plots: dict[str, dict[str, np.ndarray]]) -> None:
        """Read V(a) − V(b); where it differs from the model's deck, the element values (deck still loaded)."""
        values = _values(deck, plots)
        self.lost.update(
            n for n in (deck.plus, deck.minus) if n and not any(_node_vector(v, n) is not None for v in plots.values())
        )
        self.got.update(values)
        if self.differences is None and _differs(values, self.reference, deck.freqs):
            tnom = _tnom(self.engine.last_lines)
            self.differences, read = element_differences(self.network, self.engine.instance_parameter, tnom)
            total = len(self.network.elements)
            if read < total:
                self.notes.append(
                    f"reading check: element values compared for the first {read} of {total} elements "
                    f"(a {VALUE_BUDGET_S:g} s budget)"
                )


def _values(deck: ReadingDeck, plots: Mapping[str, Mapping[str, np.ndarray]]) -> dict[float, complex]:
    """V(a) − V(b) at each of the deck's frequencies that a plot row matches."""
    out: dict[float, complex] = {}
    wanted = deck.freqs
    for vectors in plots.values():
        freq = vectors.get("frequency")
        if freq is None and deck.operating_point:  # the operating point: one row, at 0 Hz
            freq = np.zeros(1)
        if freq is None:
            continue
        plus, minus = (_node_vector(vectors, n) if n else np.zeros(len(freq)) for n in (deck.plus, deck.minus))
        if plus is None or minus is None:
            continue  # the port node is not a node of ngspice's circuit: no value (judged as missing)
        for row, at in enumerate(freq.real.tolist()):
            i = bisect.bisect_left(wanted, at)
            match = [f for f in wanted[max(i - 1, 0) : i + 1] if same_frequency(f, at)]
            if len(match) == 1:
                out[match[0]] = complex(plus[row]) - complex(minus[row])
    return out


def _node_vector(vectors: Mapping[str, np.ndarray], node: str) -> np.ndarray | None:
    """A node's voltage vector: ngspice names it after the node, ``v(3)`` when the name starts with a digit, and
    drops the final ')' of a schematic editor's ``net-(r1-pad2)`` (measured with ngspice 39)."""
    for name in (node, f"v({node})", node[:-1] if node.endswith(")") else None):
        found = vectors.get(name) if name else None
        if found is not None:
            return found
    return None


def _differs(
    values: Mapping[float, complex], reference: Mapping[float, complex | None], freqs: Sequence[float]
) -> bool:
    """True when the reading differs from ngspice's model-deck V_th, or lacks a value that one has."""
    peak = max((abs(v) for v in reference.values() if v is not None), default=0.0)
    for f in freqs:
        ref, v = reference.get(f), values.get(f)
        if ref is None:
            continue
        if v is None or abs(v - ref) > TRIGGER_REL * max(abs(ref), abs(v), peak):
            return True
    return False


def _tnom(lines: Sequence[str]) -> float:
    for line in lines:
        found = _TNOM.search(line)
        if found:
            return float(found.group(1))
    return 27.0  # ngspice's default nominal temperature (ngspice manual, .options TNOM; from memory)


def refusal_finding(network: Network, lines: Sequence[str], first_line: int) -> tuple[str, str]:
    """Where ngspice stopped and the finding in words: "ngspice does not accept line N: …"."""
    said = "; ".join(line for line in lines if line)[:600] or "ngspice printed nothing"
    source = network.source_lines
    index: int | None = None
    for line in lines:
        found = _ERROR_ON_LINE.search(line)
        if found and 0 <= int(found.group(1)) - first_line < len(source):
            index = int(found.group(1)) - first_line
            break
    if index is None:  # ngspice quotes the line: the longest accepted line its words contain
        said_lower = [line.strip().lower() for line in lines]
        quoted = [
            (len(t), i) for i, t in enumerate(s.strip().lower() for s in source) if any(t in x for x in said_lower)
        ]
        index = max(quoted)[1] if quoted else None
    if index is None:
        return "", f"ngspice does not accept the netlist's lines: {said}"
    text = source[index].strip()
    where = _file_line(network, text)
    line = where or f"{index + 1} of the lines crosscheck accepted"
    return where, f"ngspice does not accept line {line}: {text[:120]!r}: {said}"


def _file_line(network: Network, text: str) -> str:
    """The user's file and line of the card that starts with ``text``'s first word, when it is an element."""
    name = text.split(None, 1)[0].lower() if text else ""
    element = next((e for e in network.elements if e.name == name), None)
    return str(element.where) if element is not None and element.where is not None else ""


# --------------------------------------------------------------------------- element values


def element_differences(
    network: Network, read: Callable[[str, str], float | None], tnom: float = 27.0, budget_s: float = VALUE_BUDGET_S
) -> tuple[list[ElementDifference], int]:
    """Elements whose effective value in ngspice differs from the model's, and how many were compared.

    Elements are taken in netlist order until ``budget_s`` seconds have passed.
    """
    out: list[ElementDifference] = []
    deadline = time.monotonic() + budget_s
    for count, element in enumerate(network.elements):
        if time.monotonic() > deadline:
            return out, count
        if not VECTOR_NAME.match(element.name) or element.is_short:
            continue
        got = ngspice_value(element, read, tnom)
        if got is None:
            continue
        quantity, theirs = got
        ours = element.phasor if element.kind in "VI" else complex(element.value)
        if abs(theirs - ours) > VALUE_REL * max(abs(ours), abs(theirs)):
            line = element.where.line if element.where is not None else None
            out.append(ElementDifference(element.name, line, quantity, ours, theirs))
    return out, len(network.elements)


def ngspice_value(
    element: Element, read: Callable[[str, str], float | None], tnom: float
) -> tuple[str, complex] | None:
    """The element's effective value in ngspice (see the module docstring), or None when it cannot be read."""

    def get(parameter: str, default: float | None = None) -> float | None:
        value = read(element.name, parameter)
        return default if value is None else value

    kind = element.kind
    if kind == "R":
        return _resistance(get, tnom)
    if kind == "C":
        c = get("capacitance")
        return None if c is None else ("capacitance", complex(c))
    if kind == "L":
        inductance, m = get("inductance"), get("m", 1.0)
        return None if inductance is None or not m else ("inductance", complex(inductance / m))
    if kind in "VI":
        mag, phase = get("acmag"), get("acphase", 0.0)
        if mag is None or phase is None:
            return None
        return "ac phasor", mag * complex(math.cos(math.radians(phase)), math.sin(math.radians(phase)))
    if kind in "EGFH":
        gain = get("gain")
        return None if gain is None else ("gain", complex(gain))
    if kind == "K" and element.coupled is not None:
        mutual = get("coefficient")
        l1, l2 = (read(name, "inductance") for name in element.coupled)
        if mutual is None or not l1 or not l2 or l1 * l2 <= 0:
            return None
        return "coupling", complex(mutual / math.sqrt(l1 * l2))
    return None


def _resistance(get: Callable[[str, float | None], float | None], tnom: float) -> tuple[str, complex] | None:
    nominal, ac = get("resistance", None), get("ac", 0.0)
    base = ac if ac else nominal
    m, scale = get("m", 1.0), get("scale", 1.0)
    tc1, tc2 = get("tc1", 0.0) or 0.0, get("tc2", 0.0) or 0.0
    temp, dtemp = get("temp", tnom), get("dtemp", 0.0) or 0.0
    if base is None or not m or scale is None or temp is None:
        return None
    delta = temp + dtemp - tnom
    return "resistance", complex(base * scale * (1 + tc1 * delta + tc2 * delta * delta) / m)
