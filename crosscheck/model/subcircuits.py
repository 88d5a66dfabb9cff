"""Subcircuit definitions and instances, and their flattening into one list of elements.

Flattening names things the way ngspice does, so a message or a report can name an element as the
user would find it in ngspice's output: R2 inside instance X1 becomes ``r.x1.r2``, node n3 inside it
becomes ``x1.n3``; ground is global.

A subcircuit keeps its cards, and each instance reads them again in its own parameter scope (its
overrides, then its ``.param`` cards, then its header's defaults, with its ``.func`` cards, then its
caller's scope outward, as ngspice does: measured in ``tests/test_reader_params.py``). Only the
reader's own evaluator sees the values: nothing here reaches ngspice, the shell or the file system. A card with no expression and no
``key=value`` field reads the same in every scope, so it is read once per subcircuit. The work stays
linear in the flattened size, which ``max_elements`` bounds; the expressions' work is bounded by
``params.MAX_EVALUATION_STEPS``.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field, replace
from typing import Any, NamedTuple

from crosscheck.errors import Location, NetlistError, ValueSyntaxError
from crosscheck.model.network import GROUND, Element
from crosscheck.model.params import Expression, Function, Scope


class Instance(NamedTuple):
    """An ``X`` card: the instance's name, the nodes it connects, the subcircuit it places, and its
    parameter overrides ``(name, value, line)``, already evaluated in the caller's scope."""

    name: str
    nodes: tuple[str, ...]
    subckt: str
    where: Location
    params: tuple[tuple[str, float, int], ...] = ()


@dataclass
class Subckt:
    """A ``.subckt`` definition: its terminals, the line it starts on, its cards as the reader split them,
    its parameters (``defaults`` on the header, ``params`` from its ``.param`` cards, as
    ``(name, expression, line)``) and its ``.func`` definitions ``(name, args, body, line)``."""

    name: str
    ports: tuple[str, ...]
    line: int
    cards: list[tuple[Any, list[Any]]]  # the reader's (card, fields) pairs
    defaults: list[tuple[str, Expression, int]] = field(default_factory=list)
    params: list[tuple[str, Expression, int]] = field(default_factory=list)
    functions: list[tuple[str, tuple[str, ...], Expression, int]] = field(default_factory=list)
    plain: dict[int, tuple[Element | Instance, ...]] = field(
        default_factory=dict
    )  # cards that read alike in every scope
    checked: bool = False

    def parameter_line(self, name: str) -> int | None:
        """The line defining ``name`` in this subcircuit (header default or ``.param``), None if none does."""
        for known, _, line in (*self.defaults, *self.params):
            if known == name:
                return line
        return None


#: Reads one card into its element or instance (an RF port source adds its internal resistor) with names
#: resolved in the given scope (the reader's).
ReadCard = Callable[[Any, list[Any], Scope], "tuple[Element | Instance, ...]"]


def check_local_references(sub: Subckt, protos: list[Element | Instance]) -> None:
    """ngspice renames a subcircuit's elements per instance, so F, H and K can only name their own."""
    own = {p.name for p in protos if isinstance(p, Element)}
    for p in protos:
        if isinstance(p, Element):
            for ref in (p.control,) + (p.coupled or ()):
                if ref is not None and ref not in own:
                    raise NetlistError(
                        f"{p.name} in subcircuit {sub.name!r} refers to {ref!r}, which is not "
                        "defined inside the subcircuit; elements in a subcircuit can only refer "
                        "to elements of the same subcircuit",
                        p.where,
                    )


def instance_scope(sub: Subckt, p: Instance, caller: Scope) -> Scope:
    """The scope of one instance: its overrides, then its own ``.param`` cards, then the header's defaults,
    its ``.func`` cards, then the caller's scope (that order measured with ngspice: an override wins over a
    ``.param`` of the same name, which wins over the default). An override of a parameter the subcircuit
    does not have is refused (ngspice ignores it silently when the subcircuit has other parameters: a typo
    would pass)."""
    for name, _, line in p.params:
        if sub.parameter_line(name) is None:
            declared = " ".join(dict.fromkeys(d[0] for d in (*sub.defaults, *sub.params))) or "none"
            raise NetlistError(
                f"{p.name}: subcircuit {sub.name!r} (line {sub.line}) has no parameter {name!r} to override "
                f"(its parameters: {declared}); fix the name, or declare it on the .subckt line: "
                f".subckt {sub.name} {' '.join(sub.ports)} params: {name}=<default>",
                Location(p.where.file, line),
            )
    scope = caller.child({name: value for name, value, _ in p.params})
    for name, expr, line in (*sub.defaults, *sub.params):
        if name not in scope.values:
            scope.definitions[name] = (expr, line)
    for name, args, body, line in sub.functions:
        scope.functions[name] = Function(name, args, body, line, scope)
    return scope


def _reads_alike(card: Any) -> bool:
    text = card.text
    return "{" not in text and "'" not in text and "=" not in text


def flatten(
    protos: list[Element | Instance],
    subckts: dict[str, Subckt],
    max_elements: int,
    max_depth: int,
    read: ReadCard | None = None,
    scope: Scope | None = None,
) -> list[Element]:
    """The top level's elements with every instance replaced by its subcircuit's elements, renamed.

    ``read`` reads a subcircuit's card in an instance's scope (``scope`` is the top level's). Refuses
    more than ``max_elements`` elements and instances in all, subcircuits nested deeper than
    ``max_depth``, a subcircuit that contains itself, and an instance with the wrong number of nodes.
    """
    if read is None:
        raise ValueError("flatten needs the reader's read(card, fields, scope) to read subcircuit cards")
    flat = _Flattener(subckts, max_elements, max_depth, read)
    flat.walk(protos, "", {}, (), scope or Scope())
    return flat.out


class _Flattener:
    def __init__(self, subckts: dict[str, Subckt], max_elements: int, max_depth: int, read: ReadCard):
        self.subckts = subckts
        self.max_elements = max_elements
        self.max_depth = max_depth
        self.read = read
        self.count = 0
        self.out: list[Element] = []

    def walk(
        self, protos: list[Element | Instance], path: str, ports: dict[str, str], stack: tuple[str, ...], scope: Scope
    ) -> None:
        def scoped_node(n: str) -> str:
            return n if not path or n == GROUND else ports.get(n, f"{path}.{n}")

        def scoped(name: str) -> str:
            return f"{name[0]}.{path}.{name}"

        for p in protos:
            self.count += 1
            if self.count > self.max_elements:
                raise NetlistError(
                    f"more than {self.max_elements} elements and subcircuit instances after "
                    "flattening the subcircuits; a network that large is refused (a limit for untrusted input): "
                    "if you trust this netlist, raise it with --max-elements N (case file: max_elements = N)",
                    p.where,
                )
            if isinstance(p, Element):
                if path:
                    p = replace(
                        p,
                        name=scoped(p.name),
                        nodes=tuple(scoped_node(n) for n in p.nodes),
                        control=scoped(p.control) if p.control else None,
                        coupled=(scoped(p.coupled[0]), scoped(p.coupled[1])) if p.coupled else None,
                    )
                self.out.append(p)
                continue
            sub = self.definition(p, stack)
            inner = f"{path}.{p.name}" if path else p.name
            actual = dict(zip(sub.ports, (scoped_node(n) for n in p.nodes)))
            child = instance_scope(sub, p, scope)
            self.walk(self.cards_of(sub, child, inner, p), inner, actual, stack + (sub.name,), child)

    def cards_of(self, sub: Subckt, scope: Scope, inner: str, p: Instance) -> list[Element | Instance]:
        """The subcircuit's cards read in this instance's scope; an error names the instance too."""
        # every parameter, used or not: ngspice refuses an unknown name in an unused one (measured); a division
        # by zero there it lets pass, and crosscheck refuses it, as a value that is not a number
        for name, (_, line) in scope.definitions.items():
            try:
                scope.find(name)
            except ValueSyntaxError as exc:
                raise NetlistError(
                    f"parameter {name}: {exc} (in instance {inner} of {sub.name!r}, placed at line {p.where.line})",
                    Location(p.where.file, getattr(exc, "line", None) or line),
                ) from None
        protos: list[Element | Instance] = []
        for index, (card, toks) in enumerate(sub.cards):
            proto = sub.plain.get(index)
            if proto is None:
                try:
                    proto = self.read(card, toks, scope)
                except NetlistError as exc:
                    raise NetlistError(
                        f"{exc.bare_message} (in instance {inner} of {sub.name!r}, placed at line {p.where.line})",
                        exc.location,
                    ) from None
                if _reads_alike(card):
                    sub.plain[index] = proto
            protos.extend(proto)
        if not sub.checked:
            check_local_references(sub, protos)
            sub.checked = True
        return protos

    def definition(self, p: Instance, stack: tuple[str, ...]) -> Subckt:
        """The subcircuit ``p`` places, refusing an unknown one, a recursion, too deep a nesting or a
        wrong node count."""
        sub = self.subckts.get(p.subckt)
        if sub is None:
            known = ", ".join(sorted(self.subckts)) or "none"
            raise NetlistError(
                f"{p.name}: unknown subcircuit {p.subckt!r} (defined: {known}); "
                "define it with .subckt ... .ends in this file",
                p.where,
            )
        if p.subckt in stack:
            chain = " -> ".join((*stack[stack.index(p.subckt) :], p.subckt))
            raise NetlistError(
                f"{p.name}: subcircuit {p.subckt!r} contains itself ({chain}); "
                "a subcircuit cannot instantiate itself, directly or indirectly",
                p.where,
            )
        if len(stack) >= self.max_depth:
            raise NetlistError(f"{p.name}: subcircuits nested deeper than {self.max_depth} levels are refused", p.where)
        if len(p.nodes) != len(sub.ports):
            raise NetlistError(
                f"{p.name} connects {len(p.nodes)} node(s) but subcircuit {sub.name!r} "
                f"(line {sub.line}) has {len(sub.ports)} terminal(s) "
                f"({' '.join(sub.ports) or 'none'}); give one node per terminal",
                p.where,
            )
        return sub
