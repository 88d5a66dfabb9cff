"""Plain arithmetic for ``.param`` and ``{expr}`` values, evaluated without ``eval``.

Netlists come from strangers, so an expression is first split into tokens
we understand (engineering numbers, parameter names, ``+ - * / ** ^`` and
parentheses), rebuilt as Python text from those tokens alone, parsed with
``ast`` and walked by a whitelist. Nothing in the text can name a Python
object: names are looked up in the parameter table, numbers are read by
``values.parse_number`` (so ``2.2k`` means 2200 here too).
"""

from __future__ import annotations

import ast
import math
import operator
import re
from collections.abc import Callable, Mapping

from crosscheck.errors import ValueSyntaxError
from crosscheck.model.values import parse_number

#: Longer expressions are refused: no netlist value needs more, and the parser's cost grows with it.
MAX_EXPRESSION_CHARS = 10_000

_TOKEN = re.compile(
    r"""\s*(?:
        (?P<num>(?:\d+\.?\d*|\.\d+)(?:e[+-]?\d+)?[a-zµ0-9_]*)
      | (?P<name>[a-z_][a-z0-9_]*)
      | (?P<op>\*\*|[-+*/()^])
      | (?P<bad>\S)
    )""",
    re.VERBOSE,
)

_ASSIGN = re.compile(r"([a-z_][a-z0-9_]*)\s*=(?!=)", re.IGNORECASE)
_BINARY: dict[type[ast.operator], Callable[[float, float], float]] = {
    ast.Add: operator.add,
    ast.Sub: operator.sub,
    ast.Mult: operator.mul,
    ast.Div: operator.truediv,
    ast.Pow: operator.pow,
}
_UNARY: dict[type[ast.unaryop], Callable[[float], float]] = {ast.USub: operator.neg, ast.UAdd: operator.pos}

_ALLOWED = "numbers, parameter names, + - * / ** (or ^) and parentheses"


def evaluate(text: str, env: Mapping[str, float]) -> float:
    """The value of ``text`` with parameter names from ``env`` (lower-case keys).

    >>> evaluate("2 * r0 + 1k", {"r0": 50.0})
    1100.0
    """
    expr = text.strip().lower()
    if not expr:
        raise ValueSyntaxError("empty expression; write a number or arithmetic such as {2*rload}")
    if len(expr) > MAX_EXPRESSION_CHARS:
        raise ValueSyntaxError(
            f"expression of {len(expr)} characters is longer than the limit "
            f"({MAX_EXPRESSION_CHARS}); define parts of it with .param"
        )
    source, names = _to_python(expr, text)
    try:
        tree = ast.parse(source, mode="eval")
    except (SyntaxError, RecursionError, MemoryError, ValueError):
        raise ValueSyntaxError(f"cannot read the expression {_show(text)}; use {_ALLOWED}") from None
    try:
        value = _walk(tree.body, names, env, text)
    except RecursionError:
        raise ValueSyntaxError(f"expression {_show(text)} is nested too deeply; split it with .param") from None
    except ZeroDivisionError:
        raise ValueSyntaxError(f"expression {_show(text)} divides by zero; check the parameter values") from None
    except OverflowError:
        raise ValueSyntaxError(f"expression {_show(text)} overflows a double; check the exponents") from None
    if isinstance(value, complex) or not math.isfinite(value):
        raise ValueSyntaxError(
            f"expression {_show(text)} evaluates to {value}, not a finite real number; "
            "check the parameter values (a negative number to a fractional power is complex)"
        )
    return float(value)


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
        expr = text[m.end() : nxt.start() if nxt else len(text)].strip()
        if len(expr) >= 2 and (expr[0], expr[-1]) in (("{", "}"), ("'", "'"), ('"', '"')):
            expr = expr[1:-1]
        out.append((m.group(1).lower(), expr, m.start()))
    return out


def _to_python(expr: str, original: str) -> tuple[str, dict[str, str]]:
    """Rebuild the expression from recognised tokens only; parameter names become ``_p0``, ``_p1``, ..."""
    out: list[str] = []
    names: dict[str, str] = {}
    for m in _TOKEN.finditer(expr):
        if m.group("num") is not None:
            number = parse_number(m.group("num"))  # ValueSyntaxError names the bad number
            if not math.isfinite(number):
                raise ValueSyntaxError(f"number {m.group('num')!r} in {_show(original)} is too large for a double")
            out.append(repr(number))
        elif m.group("name") is not None:
            name = m.group("name")
            safe = names.setdefault(name, f"_p{len(names)}")
            out.append(safe)
        elif m.group("op") is not None:
            out.append("**" if m.group("op") == "^" else m.group("op"))
        elif m.group("bad") is not None:
            raise ValueSyntaxError(f"unexpected {m.group('bad')!r} in the expression {_show(original)}; use {_ALLOWED}")
    return " ".join(out), {safe: name for name, safe in names.items()}


def _walk(node: ast.AST, names: dict[str, str], env: Mapping[str, float], text: str) -> float:
    if isinstance(node, ast.Constant) and type(node.value) is float:
        return node.value
    if isinstance(node, ast.Name) and node.id in names:
        name = names[node.id]
        if name not in env:
            known = ", ".join(sorted(env)[:12]) or "none"
            raise ValueSyntaxError(
                f"unknown parameter {name!r} in {_show(text)} (defined so far: {known}); "
                "define it with .param before it is used"
            )
        return env[name]
    if isinstance(node, ast.BinOp) and type(node.op) in _BINARY:
        return _BINARY[type(node.op)](_walk(node.left, names, env, text), _walk(node.right, names, env, text))
    if isinstance(node, ast.UnaryOp) and type(node.op) in _UNARY:
        return _UNARY[type(node.op)](_walk(node.operand, names, env, text))
    if isinstance(node, ast.Call):
        raise ValueSyntaxError(f"function calls are not supported in {_show(text)}; use {_ALLOWED}")
    raise ValueSyntaxError(f"cannot evaluate {_show(text)}; use {_ALLOWED}")


def _show(text: str, limit: int = 60) -> str:
    return repr(text if len(text) <= limit else text[:limit] + "…")
