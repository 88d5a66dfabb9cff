""".func definitions: reading one, and refusing functions that call themselves.

A ``.func`` body is an expression of ``model.params``' grammar (parsed there, walked by its whitelist);
this module only splits the card into name, arguments and body, and checks the call graph. Nothing in a
body can name anything but parameters, arguments and functions.
"""

from __future__ import annotations

import ast
import re
from collections.abc import Mapping

from crosscheck.errors import ValueSyntaxError
from crosscheck.model.params import BUILTINS, Expression, parse, unwrap

_FUNC = re.compile(r"^\s*([a-z_][a-z0-9_]*)\s*\(([^()]*)\)\s*(?:=\s*)?(.*?)\s*$", re.IGNORECASE | re.DOTALL)
_ARG = re.compile(r"^[a-z_][a-z0-9_]*$")


def function_definition(text: str) -> tuple[str, tuple[str, ...], Expression]:
    """The body of a ``.func`` card: its name, its argument names and its parsed expression.

    ngspice takes ``.func f(a,b) {a*b}``, ``= a*b``, ``'a*b'`` and the bare ``a*b`` alike (measured).

    >>> name, args, body = function_definition(" half(x) = {x/2}")
    >>> (name, args, body.text)
    ('half', ('x',), 'x/2')
    """
    usage = "write .func name(a, b) {expression}"
    m = _FUNC.match(text)
    if m is None or not m.group(3):
        raise ValueSyntaxError(f"cannot read the function definition {_shown(text.strip())}; {usage}")
    name = m.group(1).lower()
    if name in BUILTINS:
        raise ValueSyntaxError(f".func {name} would hide the built-in function {name}(); choose another name")
    args = tuple(a.strip().lower() for a in m.group(2).split(",")) if m.group(2).strip() else ()
    for a in args:
        if not _ARG.match(a):
            raise ValueSyntaxError(f".func {name}: argument {_shown(a)} is not a name; {usage}")
    if len(set(args)) != len(args):
        raise ValueSyntaxError(f".func {name}: an argument name is repeated in ({m.group(2)}); {usage}")
    return name, args, parse(unwrap(m.group(3)))


def recursive_chain(bodies: Mapping[str, Expression]) -> list[str] | None:
    """A chain of functions that calls back to its first (``f -> g -> f``), None if they do not recurse.

    Checked when the functions are defined, called or not: ngspice itself crashes (segmentation fault,
    measured) on a netlist holding a recursive ``.func``, even an unused one.
    """
    calls = {
        name: sorted({n.func.id for n in ast.walk(body.tree) if isinstance(n, ast.Call) and isinstance(n.func, ast.Name)}
        & bodies.keys())
        for name, body in bodies.items()
    }  # fmt: skip
    done: set[str] = set()
    for start in calls:
        path, pending = [start], [iter(calls[start])]
        while pending:
            callee = next(pending[-1], None)
            if callee is None:
                done.add(path.pop())
                pending.pop()
            elif callee in path:
                return [*path[path.index(callee) :], callee]
            elif callee not in done:
                path.append(callee)
                pending.append(iter(calls[callee]))
    return None


def _shown(text: str, limit: int = 60) -> str:
    return repr(text if len(text) <= limit else text[:limit] + "…")
