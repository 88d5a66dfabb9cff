"""ngspice's parameter expressions (``.param``, ``.func``, ``{expr}`` and ``'expr'``), evaluated without ``eval``.

Netlists come from strangers, so an expression is split into tokens we understand (engineering
numbers, names, operators, parentheses and commas), parsed by the small precedence parser below
into ``ast`` nodes of a few whitelisted types, and walked by a whitelist. Nothing in the text can
name a Python object: a name is a parameter, a ``.func`` argument, a ``.func`` or one of the
built-in functions in ``BUILTINS``; numbers are read by ``values.parse_number`` (``2.2k`` is 2200).

The operators follow ngspice as measured with ngspice's own ``.ac`` in ``tests/test_reader_params.py``:
``^`` and ``**`` are left-associative (``2^3^2`` is 64) and bind tighter than unary minus
(``-2^2`` is -4); comparisons give 1 or 0; ``&&`` binds tighter than ``||``; ``c ? a : b`` is lowest.
Parameters are looked up lazily with a cycle check, so ``.param a={b*2}`` before ``.param b=3``
reads as ngspice reads it (6). Work is bounded: expression length and depth, and a step budget
shared by one reading, so calls of ``.func`` inside ``.func`` cannot run for ever.
"""

from __future__ import annotations

import ast
import math
import operator
import re
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from functools import lru_cache

from crosscheck.errors import ValueSyntaxError
from crosscheck.model.values import parse_number

#: Longer expressions are refused: no netlist value needs more, and the parser's cost grows with it.
MAX_EXPRESSION_CHARS = 10_000
#: Deeper expressions (parentheses, operator chains) are refused before the walker's recursion runs out.
MAX_EXPRESSION_DEPTH = 150
#: Evaluation steps (expression nodes visited) one reading may take, across all instances and calls.
MAX_EVALUATION_STEPS = 5_000_000


def _nint(x: float) -> float:
    return float(round(x))  # half to even: ngspice gives nint(2.5) = 2, nint(3.5) = 4, nint(-2.5) = -2


#: name -> (number of arguments, function); meanings measured with ngspice (see the module docstring).
BUILTINS: dict[str, tuple[int, Callable[..., float]]] = {
    "sqrt": (1, math.sqrt),
    "abs": (1, abs),
    "exp": (1, math.exp),
    "ln": (1, math.log),
    "log": (1, math.log),  # natural logarithm in ngspice: log(100) = 4.605...
    "log10": (1, math.log10),
    "pow": (2, math.pow),
    "pwr": (2, lambda x, y: math.pow(abs(x), y)),  # ngspice: pwr(-2, 3) = 8
    "sin": (1, math.sin),
    "cos": (1, math.cos),
    "tan": (1, math.tan),
    "atan": (1, math.atan),
    **{name: (1, getattr(math, name)) for name in ("asin", "acos", "sinh", "cosh", "tanh", "asinh", "acosh", "atanh")},
    "min": (2, min),
    "max": (2, max),
    "floor": (1, math.floor),
    "ceil": (1, math.ceil),
    "int": (1, math.trunc),  # towards zero: int(-2.7) = -2
    "nint": (1, _nint),
    "sgn": (1, lambda x: float((x > 0) - (x < 0))),
}

_TOKEN = re.compile(
    r"""\s*(?:
        (?P<num>(?:\d+\.?\d*|\.\d+)(?:e[+-]?\d+)?[a-zµ0-9_]*)
      | (?P<name>[a-z_][a-z0-9_]*)
      | (?P<op>\*\*|==|!=|<=|>=|&&|\|\||[-+*/()^,?:<>!])
      | (?P<bad>\S)
    )""",
    re.VERBOSE,
)
_ASSIGN = re.compile(r"([a-z_][a-z0-9_]*)\s*=(?!=)", re.IGNORECASE)
_BINARY: dict[type[ast.operator], Callable[[float, float], float]] = {
    ast.Add: operator.add, ast.Sub: operator.sub, ast.Mult: operator.mul, ast.Div: operator.truediv, ast.Pow: math.pow
}  # fmt: skip
_COMPARE: dict[str, tuple[type[ast.cmpop], Callable[[float, float], bool]]] = {
    "==": (ast.Eq, operator.eq), "!=": (ast.NotEq, operator.ne), "<": (ast.Lt, operator.lt),
    "<=": (ast.LtE, operator.le), ">": (ast.Gt, operator.gt), ">=": (ast.GtE, operator.ge),
}  # fmt: skip
_COMPARE_FN = dict(_COMPARE.values())
_ARITH = {"+": ast.Add, "-": ast.Sub, "*": ast.Mult, "/": ast.Div, "^": ast.Pow, "**": ast.Pow}
#: binary operator levels, loosest first (the ternary is below them, unary and powers above).
_LEVELS: tuple[tuple[str, ...], ...] = (("||",), ("&&",), ("==", "!="), ("<", "<=", ">", ">="), ("+", "-"), ("*", "/"))

_ALLOWED = (
    "numbers, parameter names, + - * / ^ **, comparisons (== != < <= > >=), && || !, c ? a : b, "
    f"parentheses and the functions {' '.join(BUILTINS)} or a .func"
)


class ParameterError(ValueSyntaxError):
    """An expression error found while evaluating a parameter defined on ``line`` (None: on the card at hand)."""

    def __init__(self, message: str, line: int | None = None):
        super().__init__(message)
        self.line = line


@dataclass(frozen=True)
class Expression:
    """One parsed expression: the user's text (for messages) and its tree of whitelisted ``ast`` nodes."""

    text: str
    tree: ast.expr


@dataclass
class Function:
    """A ``.func name(args) body``: evaluated in the scope it was defined in, with its arguments on top."""

    name: str
    args: tuple[str, ...]
    body: Expression
    line: int
    scope: Scope


@dataclass
class _Budget:
    steps: int = 0


@dataclass
class Scope:
    """The names an expression sees: this level's parameters and functions, then the parent's, outward.

    The top level is the netlist's ``.param`` cards; a subcircuit instance adds its overrides, its
    defaults and its own ``.param`` cards, with the calling instance as parent (ngspice lets a nested
    instance see its caller's parameters). ``values`` may be a caller's mapping, used without copying.
    """

    parent: Scope | None = None
    values: Mapping[str, float] = field(default_factory=dict)
    definitions: dict[str, tuple[Expression, int]] = field(default_factory=dict)
    functions: dict[str, Function] = field(default_factory=dict)
    budget: _Budget = field(default_factory=_Budget)
    _done: dict[str, float] = field(default_factory=dict)
    _busy: list[str] = field(default_factory=list)

    def child(self, values: Mapping[str, float]) -> Scope:
        return Scope(parent=self, values=values, budget=self.budget)

    def find(self, name: str) -> float | None:
        """The value of ``name`` here or outward, evaluating a definition once (None: unknown)."""
        scope: Scope | None = self
        while scope is not None:
            if name in scope.values:
                return scope.values[name]
            if name in scope.definitions:
                return scope._evaluate(name)
            scope = scope.parent
        return None

    def function(self, name: str) -> Function | None:
        scope: Scope | None = self
        while scope is not None:
            if name in scope.functions:
                return scope.functions[name]
            scope = scope.parent
        return None

    def known(self) -> list[str]:
        names: set[str] = set()
        scope: Scope | None = self
        while scope is not None:
            names.update(scope.values, scope.definitions)
            scope = scope.parent
        return sorted(names)

    def _evaluate(self, name: str) -> float:
        if name in self._done:
            return self._done[name]
        expr, line = self.definitions[name]
        if name in self._busy:
            chain = " -> ".join((*self._busy[self._busy.index(name) :], name))
            raise ParameterError(
                f"parameters refer to each other in a circle ({chain}); define one of them with a number", line
            )
        self._busy.append(name)
        try:
            value = evaluate_expression(expr, self)
        except ParameterError as exc:
            if exc.line is None:
                exc.line = line
            raise
        except ValueSyntaxError as exc:
            raise ParameterError(f"parameter {name}: {exc}", line) from None
        finally:
            self._busy.pop()
        self._done[name] = value
        return value


def evaluate(text: str, env: Mapping[str, float] | Scope) -> float:
    """The value of ``text`` with names from ``env`` (a mapping with lower-case keys, or a ``Scope``).

    >>> evaluate("2 * r0 + 1k", {"r0": 50.0})
    1100.0
    """
    return evaluate_expression(parse(text), env if isinstance(env, Scope) else Scope(values=env))


def evaluate_expression(expr: Expression, scope: Scope) -> float:
    """The value of a parsed expression in ``scope``: a finite real number, or ValueSyntaxError saying why not."""
    text = expr.text
    try:
        value = _walk(expr.tree, scope, text, ())
    except RecursionError:
        raise ValueSyntaxError(f"expression {_show(text)} is nested too deeply; split it with .param") from None
    except ZeroDivisionError:
        raise ValueSyntaxError(f"expression {_show(text)} divides by zero; check the parameter values") from None
    except OverflowError:
        raise ValueSyntaxError(f"expression {_show(text)} overflows a double; check the exponents") from None
    except (ValueError, TypeError) as exc:
        if isinstance(exc, ValueSyntaxError):
            raise
        raise ValueSyntaxError(
            f"expression {_show(text)} has no real value (a function's argument is outside its domain, such as "
            "sqrt or log of a negative number, or a negative number to a fractional power); check the values"
        ) from None
    if isinstance(value, complex) or not math.isfinite(value):
        raise ValueSyntaxError(f"expression {_show(text)} evaluates to {value}, not a finite real number")
    return float(value)


@lru_cache(maxsize=1 << 16)
def parse(text: str) -> Expression:
    """Parse an expression once (cached: a subcircuit's values are the same text in every instance)."""
    expr = text.strip().lower()
    if not expr:
        raise ValueSyntaxError("empty expression; write a number or arithmetic such as {2*rload}")
    if len(expr) > MAX_EXPRESSION_CHARS:
        raise ValueSyntaxError(
            f"expression of {len(expr)} characters is longer than the limit "
            f"({MAX_EXPRESSION_CHARS}); define parts of it with .param"
        )
    return Expression(text.strip(), _Parser(_tokens(expr, text), text).whole())


def assignments(text: str) -> list[tuple[str, str, int]]:
    """Split the body of a ``.param`` card into ``(name, expression, offset of name)``, names lower-cased.

    >>> assignments(" r = 4.7k  g={2*r}")
    [('r', '4.7k', 1), ('g', '2*r', 11)]
    """
    matches = list(_ASSIGN.finditer(text))
    if not matches or text[: matches[0].start()].strip():
        raise ValueSyntaxError(
            f"expected name=value assignments, got {_show(text.strip())}; write .param rload=4.7k gain={{2*rload}}"
        )
    out = []
    for m, nxt in zip(matches, [*matches[1:], None]):
        out.append((m.group(1).lower(), unwrap(text[m.end() : nxt.start() if nxt else len(text)]), m.start()))
    return out


def unwrap(text: str) -> str:
    """An expression without its ``{...}`` or quotes, as written after ``=`` or as a value."""
    expr = text.strip()
    if len(expr) >= 2 and (expr[0], expr[-1]) in (("{", "}"), ("'", "'"), ('"', '"')):
        return expr[1:-1]
    return expr


def _tokens(expr: str, original: str) -> list[tuple[str, float | str]]:
    """(kind, value) pairs: ('num', float), ('name', str), ('op', str); anything else is refused."""
    out: list[tuple[str, float | str]] = []
    for m in _TOKEN.finditer(expr):
        if m.group("num") is not None:
            number = parse_number(m.group("num"))  # ValueSyntaxError names the bad number
            if not math.isfinite(number):
                raise ValueSyntaxError(f"number {m.group('num')!r} in {_show(original)} is too large for a double")
            out.append(("num", number))
        elif m.group("name") is not None:
            out.append(("name", m.group("name")))
        elif m.group("op") is not None:
            out.append(("op", m.group("op")))
        elif m.group("bad") is not None:
            raise ValueSyntaxError(f"unexpected {m.group('bad')!r} in the expression {_show(original)}; use {_ALLOWED}")
    return out


class _Parser:
    """Precedence climbing over the tokens into ``ast`` nodes; each node records its depth, which is bounded."""

    def __init__(self, tokens: list[tuple[str, float | str]], text: str):
        self.tokens, self.text, self.pos = tokens, text, 0

    def whole(self) -> ast.expr:
        node = self.ternary(0)
        if self.pos < len(self.tokens):
            raise self.error(f"unexpected {self.tokens[self.pos][1]!r}")
        return node

    def error(self, what: str) -> ValueSyntaxError:
        return ValueSyntaxError(f"cannot read the expression {_show(self.text)}: {what}; use {_ALLOWED}")

    def peek(self) -> float | str | None:
        return self.tokens[self.pos][1] if self.pos < len(self.tokens) and self.tokens[self.pos][0] == "op" else None

    def expect(self, op: str) -> None:
        if self.peek() != op:
            raise self.error(f"expected {op!r}")
        self.pos += 1

    def deeper(self, depth: int) -> int:
        if depth >= MAX_EXPRESSION_DEPTH:
            raise ValueSyntaxError(
                f"expression {_show(self.text)} is nested more than {MAX_EXPRESSION_DEPTH} levels deep; "
                "split it with .param"
            )
        return depth + 1

    def ternary(self, depth: int) -> ast.expr:
        depth = self.deeper(depth)
        test = self.binary(0, depth)
        if self.peek() != "?":
            return test
        self.pos += 1
        body = self.ternary(depth)
        self.expect(":")
        return ast.IfExp(test=test, body=body, orelse=self.ternary(depth))

    def binary(self, level: int, depth: int) -> ast.expr:
        if level == len(_LEVELS):
            return self.unary(depth)
        left = self.binary(level + 1, depth)
        while (op := self.peek()) in _LEVELS[level]:
            depth = self.deeper(depth)
            self.pos += 1
            right = self.binary(level + 1, depth)
            left = _combine(str(op), left, right)
        return left

    def unary(self, depth: int) -> ast.expr:
        op = self.peek()
        if op in ("-", "+", "!"):
            self.pos += 1
            kind = {"-": ast.USub, "+": ast.UAdd, "!": ast.Not}[str(op)]
            return ast.UnaryOp(op=kind(), operand=self.unary(self.deeper(depth)))
        return self.power(depth)

    def power(self, depth: int) -> ast.expr:
        left = self.primary(depth)
        while self.peek() in ("^", "**"):
            depth = self.deeper(depth)
            self.pos += 1
            right = self.primary(depth) if self.peek() not in ("-", "+", "!") else self.unary(depth)
            left = ast.BinOp(left=left, op=ast.Pow(), right=right)
        return left

    def primary(self, depth: int) -> ast.expr:
        if self.pos >= len(self.tokens):
            raise self.error("it ends too early")
        kind, value = self.tokens[self.pos]
        self.pos += 1
        if kind == "num":
            return ast.Constant(value=float(value))
        if kind == "name":
            if self.peek() != "(":
                return ast.Name(id=str(value))
            self.pos += 1
            args = [] if self.peek() == ")" else [self.ternary(self.deeper(depth))]
            while self.peek() == ",":
                self.pos += 1
                args.append(self.ternary(self.deeper(depth)))
            self.expect(")")
            return ast.Call(func=ast.Name(id=str(value)), args=args, keywords=[])
        if value == "(":
            node = self.ternary(self.deeper(depth))
            self.expect(")")
            return node
        raise self.error(f"unexpected {value!r}")


def _combine(op: str, left: ast.expr, right: ast.expr) -> ast.expr:
    if op in _ARITH:
        return ast.BinOp(left=left, op=_ARITH[op](), right=right)
    if op in _COMPARE:
        return ast.Compare(left=left, ops=[_COMPARE[op][0]()], comparators=[right])
    return ast.BoolOp(op=ast.And() if op == "&&" else ast.Or(), values=[left, right])


def _walk(node: ast.AST, scope: Scope, text: str, calls: tuple[str, ...]) -> float:
    """The whitelist walker: each node type below, and nothing else, has a value."""
    scope.budget.steps += 1
    if scope.budget.steps > MAX_EVALUATION_STEPS:
        raise ValueSyntaxError(
            f"the expressions take more than {MAX_EVALUATION_STEPS} evaluation steps (in {_show(text)}); "
            "functions calling functions or many instances multiply the work: simplify them"
        )
    if isinstance(node, ast.Constant) and type(node.value) is float:
        return node.value
    if isinstance(node, ast.Name):
        value = scope.find(node.id)
        if value is None:
            hint = f"; {node.id} is a function: write {node.id}(...)" if node.id in BUILTINS else ""
            shown = ", ".join(scope.known()[:12]) or "none"
            raise ValueSyntaxError(
                f"unknown parameter {node.id!r} in {_show(text)} (defined: {shown}){hint}; "
                "define it with .param (or as a subcircuit parameter)"
            )
        return value
    if isinstance(node, ast.BinOp) and type(node.op) in _BINARY:
        left = _walk(node.left, scope, text, calls)
        return _BINARY[type(node.op)](left, _walk(node.right, scope, text, calls))
    if isinstance(node, ast.UnaryOp):
        value = _walk(node.operand, scope, text, calls)
        return -value if isinstance(node.op, ast.USub) else float(not value) if isinstance(node.op, ast.Not) else value
    if isinstance(node, ast.Compare):
        left = _walk(node.left, scope, text, calls)
        return float(_COMPARE_FN[type(node.ops[0])](left, _walk(node.comparators[0], scope, text, calls)))
    if isinstance(node, ast.BoolOp):
        first = bool(_walk(node.values[0], scope, text, calls))
        if first == isinstance(node.op, ast.Or):  # short circuit, as C and ngspice do
            return float(first)
        return float(bool(_walk(node.values[1], scope, text, calls)))
    if isinstance(node, ast.IfExp):
        chosen = node.body if _walk(node.test, scope, text, calls) else node.orelse
        return _walk(chosen, scope, text, calls)
    if isinstance(node, ast.Call) and isinstance(node.func, ast.Name):
        return _call(node.func.id, node.args, scope, text, calls)
    raise ValueSyntaxError(f"cannot evaluate {_show(text)}; use {_ALLOWED}")


def _call(name: str, arg_nodes: list[ast.expr], scope: Scope, text: str, calls: tuple[str, ...]) -> float:
    """A built-in function or a ``.func``: arguments counted, a ``.func`` calling itself refused."""
    user = scope.function(name)
    arity = len(user.args) if user is not None else BUILTINS[name][0] if name in BUILTINS else None
    if arity is None:
        raise ValueSyntaxError(
            f"unknown function {name!r} in {_show(text)}; the functions are {' '.join(BUILTINS)} "
            "and those defined with .func name(args) {expression}"
        )
    if len(arg_nodes) != arity:
        raise ValueSyntaxError(
            f"{name}() takes {arity} argument(s), {len(arg_nodes)} given in {_show(text)}; "
            f"write {name}({', '.join(user.args if user else ('x', 'y')[:arity])})"
        )
    args = [_walk(a, scope, text, calls) for a in arg_nodes]
    if user is None:
        return float(BUILTINS[name][1](*args))
    if name in calls:
        chain = " -> ".join((*calls[calls.index(name) :], name))
        raise ParameterError(
            f".func {name} calls itself ({chain}); recursion is not supported: write the arithmetic out",
            user.line,
        )
    inner = Scope(parent=user.scope, values=dict(zip(user.args, args)), budget=scope.budget)
    return _walk(user.body.tree, inner, user.body.text, (*calls, name))


def _show(text: str, limit: int = 60) -> str:
    return repr(text if len(text) <= limit else text[:limit] + "…")
