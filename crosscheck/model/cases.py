"""Case files (TOML): which network, which port, which frequencies, and what to expect.

A case file names its netlist (a file inside its own folder tree, or inline
text), the port, the frequencies or a sweep, the source convention, the
solver-vs-SPICE tolerance, hand-calculated expectations and design limits.
Errors name the file and the key at fault.
"""

from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from crosscheck.errors import CaseFileError, CrosscheckError
from crosscheck.model.frequencies import FrequencyError, frequency_list
from crosscheck.model.tolerance import HAND_CALCULATION, SOLVER_VS_SPICE, Tolerance
from crosscheck.model.values import parse_number, parse_phasor
from crosscheck.vocabulary import PHASORS, QUANTITIES, same_frequency

#: Untrusted input may not ask for more than this many frequency points in one case.
MAX_POINTS = 10_000

#: The series-model keys of an expectation and the element each stands for ("series_r" -> "R").
SERIES_KEYS = {key: key.rsplit("_", 1)[1].upper() for key, q in QUANTITIES.items() if not q.phasor}
LIMIT_FUNCTIONS = ("abs", "phase", "re", "im", "db")


@dataclass(frozen=True)
class Expectation:
    """A hand-calculated value at one frequency, with the tolerance it was worked to."""

    at_hz: float
    values: dict[str, complex]  # vth / zth / in / yn phasors, series_r / series_l / series_c reals
    tolerance: Tolerance
    how: str = ""
    index: int = 0


@dataclass(frozen=True)
class Limit:
    """A design requirement: ``function(quantity)`` within [min, max] over a band of frequencies."""

    function: str
    quantity: str
    minimum: float | None
    maximum: float | None
    band: tuple[float, float] | None
    text: str
    index: int = 0
    why: str = ""


@dataclass(frozen=True)
class Case:
    """One case, ready to run: everything a runner needs, nothing left as user text but the netlist."""

    path: Path
    title: str
    netlist_text: str
    netlist_file: str
    port: tuple[str, str]
    freqs_hz: tuple[float, ...]
    sources: str = "peak"
    tolerance: Tolerance = SOLVER_VS_SPICE
    expectations: tuple[Expectation, ...] = ()
    limits: tuple[Limit, ...] = ()
    allow_negative: bool = False
    tags: tuple[str, ...] = field(default=())

    @property
    def name(self) -> str:
        return str(self.path)


def _err(path: Path, key: str, message: str) -> CaseFileError:
    return CaseFileError(f"{path}: key '{key}': {message}")


def _number(path: Path, key: str, raw: Any) -> float:
    try:
        value = parse_number(raw if isinstance(raw, str) else raw)
    except CrosscheckError as exc:
        raise _err(path, key, str(exc)) from None
    if not math.isfinite(value):
        raise _err(path, key, f"{raw!r} is not a finite number")
    return value


def _phasor(path: Path, key: str, raw: Any) -> complex:
    try:
        return parse_phasor(raw)
    except CrosscheckError as exc:
        raise _err(path, key, str(exc)) from None


def sweep_frequencies(path: Path, sweep: dict[str, Any]) -> list[float]:
    """``{start, stop, per_decade}`` (log) or ``{start, stop, points}`` (linear), inclusive of both ends."""
    unknown = set(sweep) - {"start", "stop", "per_decade", "points"}
    if unknown:
        raise _err(path, "sweep", f"unknown key(s) {sorted(unknown)}; use start, stop and per_decade or points")
    try:
        start = _number(path, "sweep.start", sweep["start"])
        stop = _number(path, "sweep.stop", sweep["stop"])
    except KeyError as missing:
        raise _err(path, "sweep", f"needs {missing.args[0]!r}") from None
    if not 0 <= start <= stop:
        raise _err(path, "sweep", f"needs 0 <= start <= stop (got {start:g} .. {stop:g})")
    if ("per_decade" in sweep) == ("points" in sweep):
        raise _err(path, "sweep", "give exactly one of per_decade (log sweep) or points (linear sweep)")
    if "per_decade" in sweep:
        per = sweep["per_decade"]
        if not isinstance(per, int) or per < 1:
            raise _err(path, "sweep.per_decade", f"must be a whole number >= 1 (got {per!r})")
        if start <= 0:
            raise _err(path, "sweep.start", "a per-decade sweep needs start > 0")
        count = int(math.floor(per * math.log10(stop / start) + 1e-9)) + 1
        _check_count(path, "sweep", count)
        return [float(f) for f in start * 10.0 ** (np.arange(count) / per)]
    points = sweep["points"]
    if not isinstance(points, int) or points < 1:
        raise _err(path, "sweep.points", f"must be a whole number >= 1 (got {points!r})")
    _check_count(path, "sweep", points)
    return [float(f) for f in np.linspace(start, stop, points)]


def _check_count(path: Path, key: str, count: int) -> None:
    if count > MAX_POINTS:
        raise _err(path, key, f"asks for {count} frequency points; at most {MAX_POINTS} per case")


def _tolerance(path: Path, key: str, table: dict[str, Any], default: Tolerance) -> Tolerance:
    rel = table.get("rel", default.rel)
    abs_ = table.get("abs", default.abs)
    phase = table.get("phase_deg", default.phase_deg)
    try:
        return Tolerance(rel=float(rel), abs=float(abs_), phase_deg=None if phase is None else float(phase))
    except (TypeError, ValueError) as exc:
        raise _err(path, key, str(exc)) from None


def _netlist(path: Path, data: dict[str, Any], allow_outside: bool) -> tuple[str, str]:
    raw = data.get("netlist")
    if not isinstance(raw, str) or not raw.strip():
        raise _err(path, "netlist", "give a netlist file name (next to the case file) or inline netlist text")
    if "\n" in raw:
        return raw, f"{path} (inline netlist)"
    target = Path(raw)
    folder = path.parent.resolve()
    resolved = (folder / target).resolve()
    if not allow_outside and (target.is_absolute() or not resolved.is_relative_to(folder)):
        raise _err(
            path,
            "netlist",
            f"{raw!r} lies outside the case file's folder; keep netlists beside their "
            "case files, or allow it explicitly (--allow-outside-paths)",
        )
    try:
        return resolved.read_bytes().decode("utf-8"), str(path.parent / target)
    except FileNotFoundError:
        raise _err(path, "netlist", f"file {raw!r} not found next to the case file") from None
    except UnicodeDecodeError:
        raise _err(path, "netlist", f"file {raw!r} is not UTF-8 text") from None


def _port(path: Path, data: dict[str, Any]) -> tuple[str, str]:
    port = data.get("port")
    if not (isinstance(port, list) and len(port) == 2 and all(isinstance(n, (str, int)) for n in port)):
        raise _err(path, "port", f'must be two node names, like port = ["out", "0"] (got {port!r})')
    return str(port[0]), str(port[1])


def _frequencies(path: Path, data: dict[str, Any]) -> list[float]:
    has_list, has_sweep = "frequencies" in data, "sweep" in data
    if has_list == has_sweep:
        raise _err(path, "frequencies", "give exactly one of frequencies = [...] or sweep = {...}")
    if has_sweep:
        if not isinstance(data["sweep"], dict):
            raise _err(path, "sweep", 'must be a table like { start = "10", stop = "100k", per_decade = 10 }')
        freqs = sweep_frequencies(path, data["sweep"])
    else:
        raw = data["frequencies"]
        if not isinstance(raw, list) or not raw:
            raise _err(path, "frequencies", 'must be a non-empty list like ["50", "1k"]')
        _check_count(path, "frequencies", len(raw))
        freqs = [_number(path, f"frequencies[{i}]", f) for i, f in enumerate(raw)]
    try:
        return list(frequency_list(freqs, where=f"{path}: key 'frequencies'"))
    except FrequencyError as exc:
        raise CaseFileError(str(exc)) from None


def _expectations(path: Path, data: dict[str, Any], freqs: list[float]) -> list[Expectation]:
    out = []
    for i, item in enumerate(data.get("expect", []), start=1):
        key = f"expect[{i}]"
        if not isinstance(item, dict):
            raise _err(path, key, "each [[expect]] must be a table")
        if "at" not in item:
            raise _err(path, key, 'needs at = "<frequency>"')
        at = _number(path, f"{key}.at", item["at"])
        values: dict[str, complex] = {}
        for q in PHASORS:
            if q in item:
                values[q] = _phasor(path, f"{key}.{q}", item[q])
        for s in SERIES_KEYS:
            if s in item:
                values[s] = complex(_number(path, f"{key}.{s}", item[s]))
        if not values:
            raise _err(path, key, f"states no value; give any of {', '.join(PHASORS + tuple(SERIES_KEYS))}")
        unknown = set(item) - {"at", "rel", "abs", "phase_deg", "how", *PHASORS, *SERIES_KEYS}
        if unknown:
            raise _err(path, key, f"unknown key(s) {sorted(unknown)}")
        tolerance = _tolerance(path, key, item, HAND_CALCULATION)
        out.append(Expectation(at, values, tolerance, str(item.get("how", "")), i))
        if not any(same_frequency(at, f) for f in freqs):
            freqs.append(at)
    return out


def parse_limit_expression(path: Path, key: str, text: str) -> tuple[str, str]:
    """``abs(zth)`` -> ("abs", "zth"); a bare quantity means its magnitude."""
    t = text.strip().lower().replace(" ", "")
    if t in PHASORS:
        return "abs", t
    for fn in LIMIT_FUNCTIONS:
        if t.startswith(fn + "(") and t.endswith(")") and t[len(fn) + 1 : -1] in PHASORS:
            return fn, t[len(fn) + 1 : -1]
    raise _err(
        path,
        key,
        f"cannot read {text!r}; write one of {', '.join(f + '(zth)' for f in LIMIT_FUNCTIONS)} "
        f"with a quantity from {', '.join(PHASORS)}",
    )


def _limits(path: Path, data: dict[str, Any]) -> list[Limit]:
    out = []
    for i, item in enumerate(data.get("limit", []), start=1):
        key = f"limit[{i}]"
        if not isinstance(item, dict) or "quantity" not in item:
            raise _err(path, key, 'each [[limit]] needs quantity = "abs(zth)" and a min and/or max')
        fn, q = parse_limit_expression(path, f"{key}.quantity", str(item["quantity"]))
        lo = _number(path, f"{key}.min", item["min"]) if "min" in item else None
        hi = _number(path, f"{key}.max", item["max"]) if "max" in item else None
        if lo is None and hi is None:
            raise _err(path, key, "give min, max or both")
        band = None
        if "band" in item:
            b = item["band"]
            if not (isinstance(b, list) and len(b) == 2):
                raise _err(path, f"{key}.band", "must be [low, high] in Hz")
            band = (_number(path, f"{key}.band[0]", b[0]), _number(path, f"{key}.band[1]", b[1]))
        unknown = set(item) - {"quantity", "min", "max", "band", "why"}
        if unknown:
            raise _err(path, key, f"unknown key(s) {sorted(unknown)}")
        out.append(Limit(fn, q, lo, hi, band, str(item["quantity"]), i, str(item.get("why", ""))))
    return out


_TOP_KEYS = {
    "title",
    "netlist",
    "port",
    "frequencies",
    "sweep",
    "sources",
    "tolerance",
    "expect",
    "limit",
    "allow_negative",
    "tags",
    "about",
}


def load_case(path: str | Path, allow_outside: bool = False) -> Case:
    """Read and check one case file; every problem raises CaseFileError naming the file and key."""
    path = Path(path)
    try:
        data = tomllib.loads(path.read_bytes().decode("utf-8"))
    except FileNotFoundError:
        raise CaseFileError(f"{path}: no such case file") from None
    except UnicodeDecodeError:
        raise CaseFileError(f"{path}: not UTF-8 text") from None
    except tomllib.TOMLDecodeError as exc:
        raise CaseFileError(f"{path}: not valid TOML: {exc}") from None
    unknown = set(data) - _TOP_KEYS
    if unknown:
        raise _err(path, sorted(unknown)[0], f"unknown key; a case file knows {', '.join(sorted(_TOP_KEYS))}")
    text, netlist_file = _netlist(path, data, allow_outside)
    freqs = _frequencies(path, data)
    expectations = _expectations(path, data, freqs)
    sources = str(data.get("sources", "peak")).lower()
    if sources not in ("peak", "rms"):
        raise _err(path, "sources", f'must be "peak" or "rms" (got {sources!r})')
    tolerance = _tolerance(path, "tolerance", data.get("tolerance", {}), SOLVER_VS_SPICE)
    return Case(
        path=path,
        title=str(data.get("title", path.stem)),
        netlist_text=text,
        netlist_file=netlist_file,
        port=_port(path, data),
        freqs_hz=tuple(sorted(freqs)),
        sources=sources,
        tolerance=tolerance,
        expectations=tuple(expectations),
        limits=tuple(_limits(path, data)),
        allow_negative=bool(data.get("allow_negative", False)),
        tags=tuple(str(t) for t in data.get("tags", [])),
    )


def find_case_files(paths: list[Path]) -> list[Path]:
    """Every ``*.toml`` under the given folders (sorted), plus files named directly."""
    found: list[Path] = []
    for p in paths:
        if p.is_dir():
            found.extend(sorted(q for q in p.rglob("*.toml") if q.is_file()))
        else:
            found.append(p)
    return found
