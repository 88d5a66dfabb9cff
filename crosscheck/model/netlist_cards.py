"""The per-kind readers of element cards, the part of the netlist reader that knows each device.

``CardReader`` turns one element card, already split into fields, into an ``Element`` (or an
``Instance`` of a subcircuit): R L C and K, the E F G H controlled sources, V and I with their
DC/AC/transient forms, and X instances. ``model.netlist`` subclasses it with the file-level work
(lines to cards, fields, ``.param`` and ``.subckt``) so that each module stays about one job.
R L C are read with ngspice's instance parameters and ``.model`` cards (formulas in ``model.device_models``);
``.temp`` and ``.options temp= tnom=`` set the temperatures. Safety: these paths only turn whitelisted
keys and numbers into floats on the model; an RF port's internal node and resistor are named from the
already validated element name (``v1#z0``, ``rv1#z0``), so nothing new from the text reaches a deck.
"""

from __future__ import annotations

import bisect
import math
import re
from dataclasses import dataclass
from typing import NamedTuple

from crosscheck.errors import Location, NetlistError, ValueSyntaxError
from crosscheck.model.device_models import (
    COMMON_KEYS,
    INSTANCE_KEYS,
    INSTANCE_NO_AC_EFFECT,
    KIND_WORDS,
    ModelProblem,
    Temperatures,
    passive_value,
)
from crosscheck.model.netlist_subset import (
    BEHAVIOURAL,
    DEVICES,
    NAME,
    NAME_CHARS,
    PARASITIC_KEYS,
    SUBSET,
    TRANSIENT,
    USAGE,
)
from crosscheck.model.network import Element, make_element
from crosscheck.model.params import Scope, evaluate
from crosscheck.model.subcircuits import Instance
from crosscheck.model.values import parse_number

#: The longest element, node or subcircuit name accepted (a case file's port names share the limit).
MAX_NAME_CHARS = 200

#: Why a source's DC value is unknown: its transient function's value at time 0 is not one we follow.
UNKNOWN_DC = (
    "the DC value ngspice's operating point takes from this transient function (SFFM with phases, AM, "
    "TRNOISE, TRRANDOM, PAT, or arguments that are not plain numbers) is not one crosscheck follows; "
    "write the DC value on the card (DC v) to solve the network under DC excitation"
)

_NUMERIC = re.compile(r"^[+-]?(?:\d|\.\d|\{|')")


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


@dataclass
class DeviceModel:
    """A ``.model`` card of type R, C or L: its parameters as written, evaluated when an element first uses it."""

    name: str
    kind: str
    line: int
    params: dict[str, Tok]  # canonical parameter name -> the value field
    values: dict[str, float] | None = None


class ConsequenceError(NetlistError):
    """A card that cannot be read only because an earlier card was refused: that problem is reported, not this."""

    def __init__(self, message: str, line: int):
        super().__init__(message, Location("<consequence>", line))


class CardReader:
    """Element cards to elements; errors and notes name the file and the card's line."""

    def __init__(self, file: str):
        self.file = file
        self.notes: list[tuple[int, str]] = []
        self.params: dict[str, float] = {}
        self.models: dict[str, DeviceModel] = {}  # .model cards by name, read before any element
        self.refused_models: set[str] = set()
        self.temps = Temperatures()  # .temp and .options temp= tnom=
        self.temp_lines: dict[str, int] = {}
        self.port_resistors: dict[int, Element] = {}  # a port source's internal resistor, by its card's line

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
        if letter in "rlc":
            return self.passive(name, card, toks, where)
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
        """E F G H and K: nodes (or coupled inductors), a controlling source, one value; m= on G and F."""
        letter, usage = name[0], USAGE[name[0]]
        positional = [t for t in toks if t.value is None]
        multiplier = 1.0
        for t in (t for t in toks if t.value is not None):
            if t.text.lower() == "m" and letter in "gf":
                multiplier = self.value(t.value, name, "multiplier m")  # type: ignore[arg-type]
            elif t.text.lower() == "m" and letter in "eh":
                raise self.err(f"{name}: ngspice does not take m= on an {letter.upper()} source; remove it", t.line)
            else:
                raise self.err(f"{name}: the parameter {t.text}= is not supported; write {usage}", t.line)
        expected = {"e": 6, "g": 6, "f": 5, "h": 5, "k": 4}[letter]
        if len(positional) < expected:
            raise self.err(f"{name}: too few fields; write {usage}", card.line)
        if len(positional) > expected:
            extra = positional[expected]
            if letter == "k" and not _NUMERIC.match(positional[3].text):  # K1 L1 L2 L3 k: blame L3
                extra = positional[3]
                raise self.err(
                    f"{name}: couples a third inductor {show(extra.text)}; a K card couples two inductors "
                    f"in ngspice: write one K card per pair ({usage})",
                    extra.line,
                )
            raise self.err(f"{name}: unexpected field {show(extra.text)}; write {usage}", extra.line)
        value = self.value(positional[-1], name, usage.rsplit(" ", 1)[1]) * multiplier
        if letter == "k":
            coupled = (self.name(positional[1], f"{name}: inductor"), self.name(positional[2], f"{name}: inductor"))
            return make_element(name, "K", (), value, coupled=coupled, where=where)
        nodes = tuple(self.name(t, f"{name}: node") for t in positional[1 : (5 if letter in "eg" else 3)])
        control = self.name(positional[3], f"{name}: controlling source") if letter in "fh" else None
        return make_element(name, None, nodes, value, control=control, where=where)

    def source(self, name: str, card: Card, toks: list[Tok], where: Location) -> Element:
        """V and I: the AC phasor and the DC value; transient and distortion fields are checked and noted, m=
        scales an I source, and ``portnum N z0 Z`` gives a V source an internal resistance (see ``port_resistor``).

        The DC value (``Element.dc_value``, the excitation under ``excitation = "dc"``) is ``DC v``, ``dc=v`` or a
        leading bare value; with none of them and a transient function, ngspice's operating point takes the
        function's value at time 0 (``time_zero_value``); with neither, 0 (as ngspice: "DC 0 assumed")."""
        usage = USAGE[name[0]]
        if len(toks) < 3 or any(t.value is not None for t in toks[:3]):
            raise self.err(f"{name}: too few fields; write {usage}", card.line)
        nodes = [self.name(t, f"{name}: node") for t in toks[1:3]]
        rest: list[Tok] = []  # dc=v, ac=v, portnum=n, z0=z and a leading bare value become keyword forms
        multiplier = 1.0
        for t in toks[3:]:
            key = t.text.lower() if t.value is not None else None
            if key == "m" and name[0] == "i" and t.value is not None:
                multiplier = self.value(t.value, name, "multiplier m")
            elif key == "m":
                raise self.err(f"{name}: ngspice does not take m= on a V source; remove it", t.line)
            else:
                keyword = key in ("dc", "ac", "portnum", "z0")
                rest += [Tok(t.text, t.line), t.value] if keyword and t.value else [t]
        if self.is_value(rest, 0):
            rest.insert(0, Tok("DC", rest[0].line))
        found = self.source_fields(name, rest)
        mag, phase = found.get("ac", (0.0, 0.0))
        if "portnum" in found or "z0" in found:
            self.port_resistor(name, card, found, nodes, where)
        dc, unknown = found.get("dc", (0.0, 0.0))[0], None
        if "dc" not in found and "time zero" in found:
            dc = found["time zero"][0]
            unknown = None if math.isfinite(dc) else UNKNOWN_DC
            dc = dc if math.isfinite(dc) else 0.0
        return make_element(
            name,
            None,
            nodes,
            0.0,
            ac_mag=mag * multiplier,
            ac_phase_deg=phase,
            where=where,
            dc_value=dc * multiplier,
            dc_unknown=unknown,
        )

    @staticmethod
    def is_value(rest: list[Tok], k: int) -> bool:
        return k < len(rest) and rest[k].value is None and _NUMERIC.match(rest[k].text) is not None

    def source_fields(self, name: str, rest: list[Tok]) -> dict[str, tuple[float, float]]:
        """The keyword fields of a V or I card after its nodes: ``ac`` (magnitude, phase), ``portnum``, ``z0``."""
        usage, found, k = USAGE[name[0]], {}, 0
        seen: set[str] = set()
        while k < len(rest):
            t, word = rest[k], rest[k].text.lower()
            if word in seen:
                raise self.err(f"{name}: {word.upper()} is given twice; write {usage}", t.line)
            seen.add(word)
            k += 1
            if word == "dc" and self.is_value(rest, k):
                found["dc"] = (self.value(rest[k], name, "DC value"), 0.0)
                k += 1
            elif word == "ac":
                mag, phase = 1.0, 0.0
                if self.is_value(rest, k):
                    mag, k = self.value(rest[k], name, "AC magnitude"), k + 1
                    if self.is_value(rest, k):
                        phase, k = self.value(rest[k], name, "AC phase"), k + 1
                found["ac"] = (mag, phase)
            elif word in ("portnum", "z0") and name[0] == "v" and self.is_value(rest, k):
                found[word] = (self.value(rest[k], name, word), 0.0)
                k += 1
            elif word in TRANSIENT or word in ("distof1", "distof2"):
                start, k = k, self.skip_function(name, rest, k)
                if word in TRANSIENT:
                    found["time zero"] = (self.time_zero_value(name, word, rest[start:k]), 0.0)
            elif word in PARASITIC_KEYS:
                raise self.err(f"{name}: {t.text}= is not an ngspice parameter; it is {PARASITIC_KEYS[word]}", t.line)
            else:
                raise self.err(f"{name}: unexpected field {show(t.text)}; write {usage}", t.line)
        return found

    def skip_function(self, name: str, rest: list[Tok], k: int) -> int:
        """A transient function or DISTOF1/2 input and its arguments (in parentheses or bare): noted, skipped."""
        t, distortion = rest[k - 1], rest[k - 1].text.lower().startswith("distof")
        if k < len(rest) and rest[k].text.startswith("("):
            k += 1
        else:
            limit = k + (2 if distortion else len(rest))
            while k < limit and self.is_value(rest, k):
                self.value(rest[k], name, f"{t.text.upper()} argument")
                k += 1
        word = t.text.upper()
        what = f"{word} (a distortion-analysis input)" if distortion else f"transient function {word}(...)"
        self.note(f"{name}: {what} ignored: it has no effect on AC analysis", t.line)
        return k

    def time_zero_value(self, name: str, word: str, args: list[Tok]) -> float:
        """The value ngspice's operating point takes from a transient function when no DC value is written.

        Measured with ngspice's ``.op`` on ``V1 a 0 <function>`` into 1 kΩ (this project, ngspice 39+):
        SIN(1 2 1k) → 1 (VO), SIN(1 2 1k 0 0 90) → 3 (VO + VA·sin(phase)), PULSE(3 5 ...) → 3 (V1),
        EXP(2 5) → 2 (V1), PWL(1m 4 2m 6) → 4 and PWL(0 4) → 4 (the first value, also before its time),
        SFFM(1.5 2 1k 1 1) → 1.5 (VO); an I source alike (PULSE(2m 5m) → 2 mA). SFFM with its phase
        arguments gave 3.3387 for SFFM(1.5 2 1k 1 1 30 40), which we do not follow; AM, TRNOISE, TRRANDOM
        and PAT are not followed either. For those (and arguments we cannot read as numbers) the result is
        NaN and the element's ``dc_unknown`` says so (``UNKNOWN_DC``): a DC run refuses the source (``model.network.dc_view``), an AC run
        never looks at it. A written DC value always wins (ngspice notes "dc value used for op").
        """
        values: list[float] = []
        fields = args[0].text[1:-1].replace(",", " ").split() if args and args[0].text.startswith("(") else None
        texts = fields if fields is not None else [t.text for t in args]
        line = args[0].line if args else 0
        try:
            values = [self.value(Tok(text, line), name, f"{word.upper()} argument") for text in texts[:6]]
        except (NetlistError, ValueSyntaxError):
            values = []
        known = {"sin": 1, "pulse": 1, "exp": 1, "pwl": 2, "sffm": 1}
        if word in known and len(values) >= known[word] and not (word == "sffm" and len(texts) > 5):
            if word == "pwl":
                return values[1]
            if word == "sin" and len(values) >= 6:
                return values[0] + values[1] * math.sin(math.radians(values[5]))
            return values[0]
        return math.nan

    def port_resistor(
        self, name: str, card: Card, found: dict[str, tuple[float, float]], nodes: list[str], where: Location
    ) -> None:
        """``V n+ n- ... portnum N z0 Z``: ngspice's RF port, a source with the resistance z0 in series.

        Measured with ngspice 39 (two ports driving each other through resistors, and a port into an
        open circuit): z0 is in series with the source and the AC magnitude is not halved. The source
        moves to an internal node ``<name>#z0`` and the resistor ``r<name>#z0`` joins n+ to it; the V
        element keeps its name, so F and H controlled by it see the same current. ngspice 39 crashed
        (segmentation fault) on a port with no z0, so z0 must be written.
        """
        if "portnum" not in found or "z0" not in found:
            missing = "z0 Z (the port's internal resistance)" if "z0" not in found else "portnum N"
            raise self.err(f"{name}: an RF port source needs both portnum and z0; add {missing}", card.line)
        inner = f"{name}#z0"
        self.port_resistors[card.line] = make_element(
            f"r{name}#z0", "R", (nodes[0], inner), found["z0"][0], where=where
        )
        nodes[0] = inner

    # ---- R, L and C with their parameters and models (formulas in ``model.device_models``)

    def passive(self, name: str, card: Card, toks: list[Tok], where: Location) -> Element:
        """R L C: nodes, a value and/or a model name, and the instance parameters ngspice applies."""
        kind, usage = name[0].upper(), USAGE[name[0]]
        if len(toks) == 4 and toks[3].value is None and _NUMERIC.match(toks[3].text):  # the plain card, most of all
            plain = (self.name(toks[1], f"{name}: node"), self.name(toks[2], f"{name}: node"))
            return make_element(name, None, plain, self.value(toks[3], name, usage.rsplit(" ", 1)[1]), where=where)
        given, bare = self.instance_fields(name, toks)
        if len(bare) < 2:
            raise self.err(f"{name}: too few fields; write {usage}", card.line)
        value_tok, model_tok = given.pop("value", None), None
        for t in bare[2:]:
            if _NUMERIC.match(t.text) and value_tok is None:
                value_tok = t
            elif not _NUMERIC.match(t.text) and model_tok is None and (value_tok is None or kind == "R"):
                model_tok = t
            elif model_tok is None and not _NUMERIC.match(t.text):
                raise self.err(
                    f"{name}: the model name {show(t.text)} comes after the value; ngspice reads a "
                    f"{KIND_WORDS[kind]}'s model before its value: write {name.upper()} n+ n- {t.text} value",
                    t.line,
                )
            else:
                raise self.err(f"{name}: unexpected field {show(t.text)}; write {usage} [key=value ...]", t.line)
        model = self.model_values(name, kind, model_tok) if model_tok is not None else {}
        inst = {key: self.value(t, name, f"{key}=") for key, t in given.items()}
        value = self.value(value_tok, name, usage.rsplit(" ", 1)[1]) if value_tok is not None else None
        if "temp" in inst and "dtemp" in inst:
            self.note(f"{name}: dtemp= ignored because temp= is given, as ngspice does", given["dtemp"].line)
        try:
            result = passive_value(kind, value, inst, model, self.temps)
        except ModelProblem as exc:
            raise self.err(f"{name}: {exc}", given[exc.key].line if exc.key in given else card.line) from None
        nodes = tuple(self.name(t, f"{name}: node") for t in bare[:2])
        return make_element(name, None, nodes, result, where=where)

    def instance_fields(self, name: str, toks: list[Tok]) -> tuple[dict[str, Tok], list[Tok]]:
        """An R, L or C card's key=value fields by canonical name, and its bare fields (nodes, value, model)."""
        letter, usage = name[0], USAGE[name[0]]
        keys = {**COMMON_KEYS, **INSTANCE_KEYS[letter]}
        given: dict[str, Tok] = {}
        bare: list[Tok] = []
        for previous, t in zip(toks, toks[1:]):
            if t.value is None:
                if (
                    letter == "r"
                    and previous.value is not None
                    and previous.text.lower() == "tc"
                    and _NUMERIC.match(t.text)
                ):
                    given.setdefault("tc2", t)  # ngspice reads "tc=a b" as tc1=a tc2=b
                else:
                    bare.append(t)
                continue
            key = t.text.lower()
            if key in INSTANCE_NO_AC_EFFECT and (key != "ic" or letter in "lc"):
                self.note(f"{name}: {t.text}= ignored: {INSTANCE_NO_AC_EFFECT[key]}", t.line)
                continue
            if key in PARASITIC_KEYS:
                raise self.err(f"{name}: {t.text}= is not an ngspice parameter; it is {PARASITIC_KEYS[key]}", t.line)
            if key not in keys:
                hint = (
                    "; ngspice computes it only when no inductance is given: give the inductance" if key == "nt" else ""
                )
                raise self.err(
                    f"{name}: the parameter {t.text}= is not supported{hint}; write {usage} [key=value ...]", t.line
                )
            if keys[key] in given:
                raise self.err(f"{name}: {t.text}= is given twice (or with another spelling); keep one", t.line)
            given[keys[key]] = t.value
        return given, bare

    def model_values(self, name: str, kind: str, tok: Tok) -> dict[str, float]:
        """The parameters of the ``.model`` an element names, evaluated once (errors name the .model line)."""
        model = self.models.get(tok.text.lower())
        if model is None and tok.text.lower() in self.refused_models:
            raise ConsequenceError(f"{name}: its .model card {show(tok.text)} was refused", tok.line)
        if model is None:
            hint = f" (to use the parameter, write {{{tok.text}}})" if tok.text.lower() in self.params else ""
            raise self.err(
                f"{name}: no .model card named {show(tok.text)}{hint}; give the value, or define "
                f".model {tok.text} {kind} (...)",
                tok.line,
            )
        if model.kind != kind:
            raise self.err(
                f"{name}: model {model.name!r} (line {model.line}) is a {KIND_WORDS[model.kind]} model; "
                f"a {KIND_WORDS[kind]} needs a .model of type {kind}",
                tok.line,
            )
        if model.values is None:
            model.values = {key: self.value(t, f".model {model.name}", f"{key}=") for key, t in model.params.items()}
        return model.values
