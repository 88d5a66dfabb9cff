"""The parameter side of the netlist reader: ``.param``, ``.func``, ``.subckt`` headers with their defaults.

``model.netlist``'s reader inherits these. Expressions are parsed when their card is read and evaluated
when first needed (``model.params.Scope``), so, as in ngspice, a parameter may use one defined further
down; inside a subcircuit, ``.param`` and ``.func`` are scoped to each instance.
"""

from __future__ import annotations

from crosscheck.errors import ValueSyntaxError
from crosscheck.model.functions import function_definition, recursive_chain
from crosscheck.model.netlist_cards import Card, Tok, show
from crosscheck.model.netlist_models import ModelCardReader
from crosscheck.model.network import GROUND
from crosscheck.model.params import Expression, Function, Scope, assignments, parse, unwrap
from crosscheck.model.subcircuits import Subckt


class ParamReader(ModelCardReader):
    """``.param``, ``.func`` and ``.subckt`` header cards."""

    def __init__(self, file: str):
        super().__init__(file)
        self.param_lines: dict[str, int] = {}
        self.subckts: dict[str, Subckt] = {}
        self._globals = Scope()

    def global_scope(self) -> Scope:
        """The top level's parameters and functions."""
        return self._globals

    def refuse_recursion(self, functions: dict[str, tuple[Expression, int]]) -> None:
        """A .func that calls itself, directly or through others, is refused even if unused (ngspice crashes on it)."""
        chain = recursive_chain({name: body for name, (body, _) in functions.items()})
        if chain:
            raise self.err(
                f".func {chain[0]} calls itself ({' -> '.join(chain)}); recursion is not supported: "
                "write the arithmetic out",
                functions[chain[0]][1],
            )

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
