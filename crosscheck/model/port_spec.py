"""Several ports in a case file or on the command line, and what a multi-port case expects and limits.

Case-file form (either, one per port, in matrix order)::

    ports = [["a", "0"], ["b", "0"]]                          # named 1, 2
    ports = [{name = "phase_a", nodes = ["a", "n"]}, ...]     # named as given

``[[expect]]`` of a multi-port case states ``z11``, ``z21``, ... (``z<i><j>``; ``z<i>_<j>`` from ten ports),
``y11``..., ``voc1``..., ``isc1``... and the mode quantities ``zdiff``, ``zcomm`` (two ports) and ``z0``,
``z1``, ``z2`` (three ports); ``[[limit]]`` takes ``abs(...)``, ``phase``, ``re``, ``im`` or ``db`` of any of
them. Errors name the file and the key, as every case-file error does.
"""

from __future__ import annotations

import re
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from crosscheck.errors import CrosscheckError, NetworkError
from crosscheck.model.case_file import entries, string
from crosscheck.model.case_file import err as _err
from crosscheck.model.case_values import frequency as _frequency
from crosscheck.model.case_values import limit_tables
from crosscheck.model.case_values import tolerance as _tolerance
from crosscheck.model.frequencies import frequency_list
from crosscheck.model.netlist_cards import MAX_NAME_CHARS
from crosscheck.model.network import Network, Port, check_port
from crosscheck.model.port_matrices import PortList, port_list
from crosscheck.model.requirements import Expectation, Limit
from crosscheck.model.tolerance import HAND_CALCULATION
from crosscheck.model.validation import validate
from crosscheck.model.values import parse_phasor

#: More ports than this in one case is refused: the matrices grow as the square, the SPICE route by N+2 runs.
MAX_PORTS = 64
LIMIT_FUNCTIONS = ("abs", "phase", "re", "im", "db")
#: Mode quantities and the number of ports each needs (common practice: differential pair, Fortescue).
MODE_QUANTITIES = {"zdiff": 2, "zcomm": 2, "z0": 3, "z1": 3, "z2": 3}
_ELEMENT = re.compile(r"^(z|y)(?:(\d)(\d)|(\d+)_(\d+))$")
_VECTOR = re.compile(r"^(voc|isc)(\d+)$")


@dataclass(frozen=True)
class MultiportSpec:
    """The ports of a multi-port case and what it expects of their matrices."""

    ports: PortList
    expectations: tuple[Expectation, ...] = ()
    limits: tuple[Limit, ...] = ()


def quantity_index(quantity: str, ports: int) -> tuple[str, int, int] | None:
    """``z21`` -> ("z", 1, 0); ``voc2`` -> ("voc", 1, -1); a mode quantity -> (name, -1, -1); None if unknown
    or out of range for ``ports``."""
    if quantity in MODE_QUANTITIES:
        return (quantity, -1, -1) if MODE_QUANTITIES[quantity] == ports else None
    m = _ELEMENT.match(quantity)
    if m:
        i, j = (int(m.group(2)), int(m.group(3))) if m.group(2) else (int(m.group(4)), int(m.group(5)))
        return (m.group(1), i - 1, j - 1) if 1 <= i <= ports and 1 <= j <= ports else None
    m = _VECTOR.match(quantity)
    if m:
        k = int(m.group(2))
        return (m.group(1), k - 1, -1) if 1 <= k <= ports else None
    return None


def validating_port(network: Network, ports: Sequence[Port]) -> Port:
    """The first of ``ports`` with which ``network`` validates, every port's nodes checked.

    A part of the network with no ground is accepted when it holds the port validated with (a transformer
    secondary across port 2, say); the multi-port routes refer each such part to a port's b node. Two such
    parts in one network are refused as they are for one port (the first port's error is raised).
    """
    first: NetworkError | None = None
    for port in ports:
        try:
            validate(network, port)
        except NetworkError as exc:
            first = first or exc
            continue
        for other in ports:
            check_port(network, other)
        return port
    assert first is not None, "at least one port is given"
    raise first


def _known_words(ports: int) -> str:
    modes = [q for q, n in MODE_QUANTITIES.items() if n == ports]
    return f"z11 .. z{ports}{ports}, y11 .., voc1 .. voc{ports}, isc1 ..{', ' + ', '.join(modes) if modes else ''}"


def ports_from_pairs(pairs: list[list[str]] | list[tuple[str, str]], names: list[str | None] | None = None) -> PortList:
    """``--port A B`` given several times: the ports in order, named 1, 2, ... unless ``names`` says."""
    return port_list([(str(a), str(b)) for a, b in pairs], names)


def _node(raw: Any) -> bool:
    return isinstance(raw, (str, int)) and not isinstance(raw, bool) and 0 < len(str(raw)) <= MAX_NAME_CHARS


def ports_from_case(path: Path, data: dict[str, Any]) -> PortList:
    """``ports = [...]`` (module docstring): at least two ports, each two distinct node names, names unique."""
    raw = data["ports"]
    example = 'ports = [["a", "0"], ["b", "0"]] or ports = [{name = "phase_a", nodes = ["a", "n"]}, ...]'
    if not isinstance(raw, list) or not 2 <= len(raw) <= MAX_PORTS:
        raise _err(path, "ports", f"must list 2 to {MAX_PORTS} ports, like {example} (got {str(raw)[:80]})")
    pairs: list[tuple[str, str]] = []
    names: list[str | None] = []
    for k, item in enumerate(raw, start=1):
        key = f"ports[{k}]"
        name: str | None = None
        if isinstance(item, dict):
            unknown = set(item) - {"name", "nodes"}
            if unknown or "nodes" not in item:
                raise _err(path, key, f"needs nodes = [A, B] and may have a name (got keys {sorted(item)})")
            name = string(path, item, "name", "") or None
            if name is not None and len(name) > MAX_NAME_CHARS:
                raise _err(path, f"{key}.name", f"is longer than {MAX_NAME_CHARS} characters")
            item = item["nodes"]
        if not (isinstance(item, list) and len(item) == 2 and all(_node(n) for n in item)):
            raise _err(path, key, f"must be two node names, like {example} (got {str(item)[:80]})")
        if str(item[0]).lower() == str(item[1]).lower():
            raise _err(path, key, f"names the node {item[0]!r} twice; a port is two different nodes")
        pairs.append((str(item[0]), str(item[1])))
        names.append(name)
    ports = port_list(pairs, names)
    seen = [p.name for p in ports]
    if len(set(seen)) != len(seen):
        raise _err(path, "ports", f"port names repeat ({', '.join(seen)}); give each port its own name")
    return ports


def multiport_from_case(path: Path, data: dict[str, Any], freqs: list[float]) -> MultiportSpec | None:
    """The case's multi-port part (None without ``ports``); [[expect]] frequencies join ``freqs``."""
    if "ports" not in data:
        return None
    if "port" in data:
        raise _err(path, "port", "a case file gives either port (one port) or ports (several), not both")
    ports = ports_from_case(path, data)
    expectations = _expectations(path, data, len(ports))
    if expectations:
        merged = frequency_list([*freqs, *(e.at_hz for e in expectations)], where=f"{path}: key 'expect'")
        freqs[:] = list(merged)
    return MultiportSpec(
        ports,
        expectations,
        tuple(limit_tables(path, data, lambda p, k, t: parse_matrix_limit(p, k, t, len(ports)), "abs(z21)")),
    )


def _expectations(path: Path, data: dict[str, Any], ports: int) -> tuple[Expectation, ...]:
    out = []
    for i, item in enumerate(entries(path, data, "expect"), start=1):
        key = f"expect[{i}]"
        if "at" not in item:
            raise _err(path, key, 'needs at = "<frequency>"')
        values: dict[str, complex] = {}
        for name, raw in item.items():
            if name in ("at", "rel", "abs", "phase_deg", "how"):
                continue
            if quantity_index(name, ports) is None:
                raise _err(
                    path, f"{key}.{name}", f"is not a quantity of this {ports}-port case; write {_known_words(ports)}"
                )
            try:
                values[name] = parse_phasor(raw)
            except CrosscheckError as exc:
                raise _err(path, f"{key}.{name}", str(exc)) from None
        if not values:
            raise _err(path, key, f"states no value; give any of {_known_words(ports)}")
        at = _frequency(path, f"{key}.at", item["at"])
        out.append(
            Expectation(at, values, _tolerance(path, key, item, HAND_CALCULATION), string(path, item, "how", ""), i)
        )
    return tuple(out)


def parse_matrix_limit(path: Path, key: str, text: str, ports: int) -> tuple[str, str]:
    """``abs(z21)`` -> ("abs", "z21"); a bare quantity means its magnitude."""
    t = text.strip().lower().replace(" ", "")
    fn, q = "abs", t
    for name in LIMIT_FUNCTIONS:
        if t.startswith(name + "(") and t.endswith(")"):
            fn, q = name, t[len(name) + 1 : -1]
    if quantity_index(q, ports) is None:
        raise _err(path, key, f"cannot read {text[:60]!r}; write abs(z21), db(zdiff)... with {_known_words(ports)}")
    return fn, q
