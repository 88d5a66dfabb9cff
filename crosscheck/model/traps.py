"""Traps: netlists that read without error but whose answer is probably not what the author meant.

Each trap is a ``ReadWarning`` with a code of ``reading.WARNING_CODES``; a case file can acknowledge
a code, and ``--strict`` turns unacknowledged ones into errors. The reader (``model.netlist``) calls
``find_traps`` once per netlist with the title, the value text of each card as the user wrote it
(``ValueText``) and the network it read. The rules, one per code:

- ``title-is-element``: line 1 looks like an element card (``R1 a b 1k``); SPICE reads it as the title.
- ``no-ac-source``: no independent V or I source has a non-zero AC magnitude (or there is none), so
  the open-circuit voltage V_th is zero at every frequency by construction.
- ``suffix-milli``: a number written with ``M`` or ``m`` followed by ``Hz`` (``1MHz``) in an R, L or C
  value, a ``.param``/``.func`` card or a subcircuit's parameters: SPICE reads ``M`` as milli and
  ignores the letters after a scale suffix, so ``1MHz`` is 0.001. (Transient source arguments are
  not checked: they do not enter an AC answer.)
- ``suffix-femto``: a capacitor value of a number followed by ``F`` or ``f`` alone (``1F``, ``10f``):
  ``F`` is the femto suffix, so ``1F`` is 1e-15 farad. ``100uF`` is fine (``u`` is the scale and
  the ``F`` after it is ignored), as is ``10fF``.
- ``suffix-mega-mixed``: a resistor value with the milli suffix (``1M``, ``2.2m``, ``1mohm``; not
  ``1meg`` or ``1mil``) while the median of the netlist's other resistor values is at least 1 kΩ and
  there is at least one other: ``1M`` among kilohms was probably meant as ``1meg``.
"""

from __future__ import annotations

import re
import statistics
from collections.abc import Iterable, Sequence
from typing import NamedTuple

from crosscheck.errors import Location
from crosscheck.model.netlist_cards import Tok
from crosscheck.model.netlist_subset import VALUE_KEYS
from crosscheck.model.network import Element, Network
from crosscheck.model.reading import ReadWarning
from crosscheck.model.subcircuits import Instance

__all__ = ["ValueText", "value_text", "find_traps", "title_warning", "TITLE_LIKE_ELEMENT"]

#: A title that looks like an R L C V I card: name, two nodes, then a number, {expr}, DC or AC.
TITLE_LIKE_ELEMENT = re.compile(r"^[rlcvi][a-z_]*\d\w*(\s+\S+){2}\s+([0-9.{']|dc|ac)", re.IGNORECASE)
_NUMBER = r"[+-]?(?:\d+\.?\d*|\.\d+)(?:e[+-]?\d+)?"
_MEGAHERTZ = re.compile(rf"(?<![\w.]){_NUMBER}m(?=hz)", re.IGNORECASE)
_FEMTO = re.compile(rf"^{_NUMBER}f$", re.IGNORECASE)
_MILLI = re.compile(rf"^({_NUMBER})m(?!eg|il)[a-z]*$", re.IGNORECASE)
_KILO = 1e3


class ValueText(NamedTuple):
    """A card's value as the user wrote it: ``kind`` is the element letter (``r l c``) or ``text`` for a
    whole card scanned for ``MHz`` only; ``value`` is the number read, when there is one."""

    kind: str
    name: str
    text: str
    line: int
    value: float | None = None


def find_traps(title: str, values: Sequence[ValueText], network: Network, file: str) -> tuple[ReadWarning, ...]:
    """Every trap in one netlist, in line order (the title's first)."""
    found = [w for w in (title_warning(title, file), _source_warning(network, file)) if w is not None]
    found += [w for w in (_dc_source_warning(network, file),) if w is not None]
    found += _suffix_warnings(values, file)
    return tuple(sorted(found, key=lambda w: w.location.line or 0))


def title_warning(title: str, file: str) -> ReadWarning | None:
    """``title-is-element`` when line 1 looks like an element card."""
    if not TITLE_LIKE_ELEMENT.match(title):
        return None
    shown = title if len(title) <= 60 else title[:60] + "…"
    return ReadWarning(
        "title-is-element",
        f"the first line {shown!r} is read as the title, as SPICE does; if it is an element, add a title line above it",
        Location(file, 1),
    )


def _source_warning(network: Network, file: str) -> ReadWarning | None:
    """``no-ac-source`` when no independent source drives the AC analysis."""
    sources = network.by_kind("VI")
    if any(e.ac_mag != 0 for e in sources):
        return None
    if not sources:
        where = network.elements[0].where if network.elements else None
        return ReadWarning(
            "no-ac-source",
            "the network has no independent source, so V_th is zero at every frequency by construction "
            "(Z_th is still meaningful); to drive it, add a source with an AC value, e.g. V1 in 0 AC 1",
            where or Location(file),
        )
    first = sources[0]
    names = ", ".join(e.name for e in sources[:5]) + (" ..." if len(sources) > 5 else "")
    return ReadWarning(
        "no-ac-source",
        f"no independent source has an AC value ({names}: DC or transient values only, or AC 0), so V_th is "
        "zero at every frequency by construction: AC analysis sees only AC values; add AC and the "
        f"magnitude to the source that drives the network, e.g. {first.name} ... DC 5 AC 1",
        first.where or Location(file),
    )


def _dc_source_warning(network: Network, file: str) -> ReadWarning | None:
    """``no-dc-source`` when no independent source has a DC value, so V_th is zero under DC excitation.

    Found for every netlist; the run layer keeps it only for a case run under DC excitation (and drops
    ``no-ac-source`` there), see ``for_excitation``.
    """
    sources = network.by_kind("VI")
    if any(e.dc_value != 0 or e.dc_unknown is not None for e in sources):
        return None
    first = sources[0] if sources else None
    names = ", ".join(e.name for e in sources[:5]) + (" ..." if len(sources) > 5 else "")
    what = (
        f"no independent source has a DC value ({names}: AC values only, or DC 0)"
        if sources
        else ("the network has no independent source")
    )
    example = f"{first.name} ... DC 5" if first is not None else "V1 in 0 DC 5"
    where = (first.where if first is not None else None) or (network.elements[0].where if network.elements else None)
    return ReadWarning(
        "no-dc-source",
        f"{what}, so under DC excitation V_th is zero by construction (Z_th is still meaningful); "
        f"to drive it, give the source that drives the network its DC value, e.g. {example}",
        where or Location(file),
    )


def for_excitation(warnings: Sequence[ReadWarning], excitation: str) -> tuple[ReadWarning, ...]:
    """The reading's warnings that concern a run under ``excitation``: ``no-ac-source`` under "ac" only,
    ``no-dc-source`` under "dc" only."""
    other = "no-dc-source" if excitation == "ac" else "no-ac-source"
    return tuple(w for w in warnings if w.code != other)


def _suffix_warnings(values: Sequence[ValueText], file: str) -> list[ReadWarning]:
    out = []
    for v in values:
        where = Location(file, v.line)
        if v.kind in ("r", "l", "c", "text"):
            for m in _MEGAHERTZ.finditer(v.text):
                out.append(
                    ReadWarning(
                        "suffix-milli",
                        f"{v.name}: {m.group()}Hz is read as {m.group()} = milli (SPICE's M is milli, and the "
                        f"letters after a scale suffix are ignored), not mega; write {m.group()[:-1]}meg for mega",
                        where,
                    )
                )
        if v.kind == "c" and _FEMTO.match(v.text):
            out.append(
                ReadWarning(
                    "suffix-femto",
                    f"{v.name}: {v.text!r} is read as {v.text[:-1]} femtofarads (F alone is SPICE's femto "
                    f"suffix, not farad); write {v.text[:-1]} for farads, or {v.text[:-1]}fF if femto is meant",
                    where,
                )
            )
    out += _mixed_mega(values, file)
    return out


def _mixed_mega(values: Iterable[ValueText], file: str) -> list[ReadWarning]:
    """``suffix-mega-mixed``: milli-suffixed resistors among others whose median is at least 1 kΩ."""
    resistors = [v for v in values if v.kind == "r" and v.value is not None]
    milli = [v for v in resistors if _MILLI.match(v.text) and not _MEGAHERTZ.search(v.text)]
    others = [abs(v.value) for v in resistors if v not in milli and v.value is not None]
    if not milli or not others or statistics.median(others) < _KILO:
        return []
    median = statistics.median(others)
    return [
        ReadWarning(
            "suffix-mega-mixed",
            f"{v.name}: {v.text!r} is read as {v.value:g} ohm (SPICE's M is milli) while the other resistors' "
            f"median is {median:g} ohm; if mega is meant write {_MILLI.match(v.text).group(1)}meg "  # type: ignore[union-attr]
            "(if milliohms are meant, acknowledge this warning)",
            Location(file, v.line),
        )
        for v in milli
    ]


def value_text(toks: Sequence[Tok], proto: Element | Instance, card_text: str, line: int) -> ValueText:
    """The value of an R, L or C card as written (for ``traps``); an X card's whole text; else no text."""
    letter = toks[0].text[0].lower()
    if letter in VALUE_KEYS and isinstance(proto, Element):
        keyed = [t.value for t in toks if t.value is not None and t.text.lower() in VALUE_KEYS[letter]]
        positional = [t for t in toks if t.value is None]
        tok = keyed[0] if keyed else positional[3] if len(positional) > 3 else None
        if tok is not None:
            return ValueText(letter, toks[0].text, tok.text, tok.line, proto.value)
    if letter == "x":
        return ValueText("text", toks[0].text, card_text, line)
    return ValueText(letter, toks[0].text, "", line)
