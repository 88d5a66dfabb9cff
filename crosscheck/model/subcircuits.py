"""Subcircuit definitions and instances, and their flattening into one list of elements.

Flattening names things the way ngspice does, so a message or a report can name an element as the
user would find it in ngspice's output: R2 inside instance X1 becomes ``r.x1.r2``, node n3 inside it
becomes ``x1.n3``; ground is global.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Any, NamedTuple

from crosscheck.errors import Location, NetlistError
from crosscheck.model.network import GROUND, Element


class Instance(NamedTuple):
    """An ``X`` card: the instance's name, the nodes it connects, the subcircuit it places."""

    name: str
    nodes: tuple[str, ...]
    subckt: str
    where: Location


@dataclass
class Subckt:
    """A ``.subckt`` definition: its terminals, the line it starts on, its cards as the reader split them,
    and (once every definition is known) those cards read into elements and instances."""

    name: str
    ports: tuple[str, ...]
    line: int
    cards: list[tuple[Any, list[Any]]]  # the reader's (card, fields) pairs
    protos: list[Element | Instance] | None = None


def check_local_references(sub: Subckt) -> None:
    """ngspice renames a subcircuit's elements per instance, so F, H and K can only name their own."""
    own = {p.name for p in sub.protos or () if isinstance(p, Element)}
    for p in sub.protos or ():
        if isinstance(p, Element):
            for ref in (p.control,) + (p.coupled or ()):
                if ref is not None and ref not in own:
                    raise NetlistError(
                        f"{p.name} in subcircuit {sub.name!r} refers to {ref!r}, which is not "
                        "defined inside the subcircuit; elements in a subcircuit can only refer "
                        "to elements of the same subcircuit",
                        p.where,
                    )


def flatten(
    protos: list[Element | Instance], subckts: dict[str, Subckt], max_elements: int, max_depth: int
) -> list[Element]:
    """The top level's elements with every instance replaced by its subcircuit's elements, renamed.

    Refuses more than ``max_elements`` elements and instances in all, subcircuits nested deeper than
    ``max_depth``, a subcircuit that contains itself, and an instance with the wrong number of nodes.
    """
    flat = _Flattener(subckts, max_elements, max_depth)
    flat.walk(protos, "", {}, ())
    return flat.out


class _Flattener:
    def __init__(self, subckts: dict[str, Subckt], max_elements: int, max_depth: int):
        self.subckts = subckts
        self.max_elements = max_elements
        self.max_depth = max_depth
        self.count = 0
        self.out: list[Element] = []

    def walk(self, protos: list[Element | Instance], path: str, ports: dict[str, str], stack: tuple[str, ...]) -> None:
        def scoped_node(n: str) -> str:
            return n if not path or n == GROUND else ports.get(n, f"{path}.{n}")

        def scoped(name: str) -> str:
            return f"{name[0]}.{path}.{name}"

        for p in protos:
            self.count += 1
            if self.count > self.max_elements:
                raise NetlistError(
                    f"more than {self.max_elements} elements and subcircuit instances after "
                    "flattening the subcircuits; a network that large is refused",
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
            self.walk(sub.protos or [], inner, actual, stack + (sub.name,))

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
