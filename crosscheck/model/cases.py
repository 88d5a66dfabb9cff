"""Case files (TOML): which network, which port, which frequencies, and what to expect.

A case file names its netlist (a file inside its own folder tree, or inline
text), the port, the frequencies or a sweep, the source convention, the
solver-vs-SPICE tolerance, hand-calculated expectations, design limits and a ``caution`` (free text
that every report shows near its top, for what the numbers leave out).
Errors name the file and the key at fault. ``model.case_file`` reads the file and checks its
structure (size, kind of file, nesting, string lengths, key types) before anything here looks at it;
the limits on values are documented there and here (``MAX_POINTS``, ``MAX_FREQUENCY_HZ``).
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from crosscheck.errors import CaseFileError, CrosscheckError
from crosscheck.model.case_file import boolean, entries, read_table, string, table
from crosscheck.model.case_file import err as _err
from crosscheck.model.case_values import frequency as _frequency
from crosscheck.model.case_values import limit_tables
from crosscheck.model.case_values import number as _number
from crosscheck.model.case_values import tolerance as _tolerance
from crosscheck.model.files import InputFileError, check_path_text, read_regular
from crosscheck.model.frequencies import FrequencyError, frequency_list
from crosscheck.model.netlist import decode_netlist_bytes
from crosscheck.model.netlist_cards import MAX_NAME_CHARS
from crosscheck.model.port_spec import MultiportSpec, multiport_from_case
from crosscheck.model.read_limits import ReadLimits, limits_from_case
from crosscheck.model.reading import WARNING_CODES
from crosscheck.model.requirements import Expectation, Limit
from crosscheck.model.tolerance import HAND_CALCULATION, SOLVER_VS_SPICE, Tolerance
from crosscheck.model.values import parse_phasor
from crosscheck.model.vary import MAX_SAMPLES, SpreadSpec, vary_from_case
from crosscheck.vocabulary import PHASORS, QUANTITIES

#: Untrusted input may not ask for more than this many frequency points in one case.
MAX_POINTS = 10_000

#: The series-model keys of an expectation and the element each stands for ("series_r" -> "R").
SERIES_KEYS = {key: key.rsplit("_", 1)[1].upper() for key, q in QUANTITIES.items() if not q.phasor}
LIMIT_FUNCTIONS = ("abs", "phase", "re", "im", "db")


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
    #: "ac" (the sources' AC values, at the frequencies) or "dc" (their DC values, at 0 Hz only).
    excitation: str = "ac"
    tolerance: Tolerance = SOLVER_VS_SPICE
    expectations: tuple[Expectation, ...] = ()
    limits: tuple[Limit, ...] = ()
    allow_negative: bool = False
    tags: tuple[str, ...] = field(default=())
    caution: str = ""  # the case file's own caution, free text (user text: reports make it inert)
    #: Reading-warning codes (``model.reading.WARNING_CODES``) the author has acknowledged: reports keep them
    #: silent (JSON lists them as accepted) and ``--strict`` does not make them errors.
    accept_warnings: tuple[str, ...] = ()
    #: Several ports (``ports = [...]``, ``model.port_spec``): the matrices, their hand values and limits; ``port``
    #: is then the first port. None: the usual one-port case.
    multiport: MultiportSpec | None = None
    #: Component spread (``[[vary]]`` tables with ``samples``, ``seed``, ``spice_samples``); None: nominal only.
    spread: SpreadSpec | None = None
    #: How large a netlist the reader accepts (defaults for untrusted input; ``--max-elements``, ``max_elements``).
    read_limits: ReadLimits = ReadLimits()

    @property
    def name(self) -> str:
        return str(self.path)


def _whole(path: Path, key: str, raw: Any, most: int) -> int:
    """A whole number from 1 to ``most`` (true/false and text are refused)."""
    if not isinstance(raw, int) or isinstance(raw, bool) or not 1 <= raw <= most:
        raise _err(path, key, f"must be a whole number from 1 to {most} (got {str(raw)[:40]!r})")
    return raw


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
        start = _frequency(path, "sweep.start", sweep["start"])
        stop = _frequency(path, "sweep.stop", sweep["stop"])
    except KeyError as missing:
        raise _err(path, "sweep", f"needs {missing.args[0]!r}") from None
    if not 0 <= start <= stop:
        raise _err(path, "sweep", f"needs 0 <= start <= stop (got {start:g} .. {stop:g})")
    if ("per_decade" in sweep) == ("points" in sweep):
        raise _err(path, "sweep", "give exactly one of per_decade (log sweep) or points (linear sweep)")
    if "per_decade" in sweep:
        per = _whole(path, "sweep.per_decade", sweep["per_decade"], MAX_POINTS)
        if start <= 0:
            raise _err(path, "sweep.start", "a per-decade sweep needs start > 0")
        count = int(math.floor(per * (math.log10(stop) - math.log10(start)) + 1e-9)) + 1
        _check_count(path, "sweep", count)
        return [float(f) for f in start * 10.0 ** (np.arange(count) / per)]
    points = _whole(path, "sweep.points", sweep["points"], MAX_POINTS)
    return [float(f) for f in np.linspace(start, stop, points)]


def _check_count(path: Path, key: str, count: int) -> None:
    if count > MAX_POINTS:
        raise _err(path, key, f"asks for {count} frequency points; at most {MAX_POINTS} per case")


def _netlist(path: Path, data: dict[str, Any], allow_outside: bool, limits: ReadLimits) -> tuple[str, str]:
    """The netlist text and the name messages use for it: inline text, or a file beside the case file.

    Why the path is safe: the name is checked as text (no NUL or control character, not overlong),
    must resolve inside the case file's folder (unless outside paths are allowed), and is read
    through ``files.read_regular`` (regular files only, never blocking, size-capped).
    """
    raw = data.get("netlist")
    if not isinstance(raw, str) or not raw.strip():
        raise _err(path, "netlist", "give a netlist file name (next to the case file) or inline netlist text")
    if "\n" in raw or "\r" in raw:
        return raw, f"{path} (inline netlist)"
    try:
        check_path_text(raw)
    except InputFileError as exc:
        raise _err(path, "netlist", str(exc)) from None
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
    name = str(path.parent / target)
    if not os.path.lexists(resolved):
        raise _err(path, "netlist", f"file {raw!r} not found next to the case file")
    try:
        content = read_regular(resolved, limits.max_netlist_bytes)
    except InputFileError as exc:
        why = str(exc) if exc.too_large is None else limits.size_refusal(exc.too_large, "bytes")
        raise _err(path, "netlist", f"file {raw!r}: {why}") from None
    return decode_netlist_bytes(content, name), name


def _port(path: Path, data: dict[str, Any]) -> tuple[str, str]:
    port = data.get("port")
    if not (
        isinstance(port, list)
        and len(port) == 2
        and all(
            isinstance(n, (str, int)) and not isinstance(n, bool) and 0 < len(str(n)) <= MAX_NAME_CHARS for n in port
        )
    ):
        raise _err(path, "port", f'must be two node names, like port = ["out", "0"] (got {str(port)[:80]})')
    return str(port[0]), str(port[1])


def _excitation(path: Path, data: dict[str, Any]) -> str:
    """``excitation = "ac"`` (the default: the sources' AC values) or ``"dc"`` (their DC values, at 0 Hz)."""
    excitation = string(path, data, "excitation", "ac").lower()
    if excitation not in ("ac", "dc"):
        raise _err(path, "excitation", f'must be "ac" or "dc" (got {excitation[:40]!r})')
    return excitation


def _dc_frequencies(path: Path, data: dict[str, Any], excitation: str, freqs: list[float]) -> None:
    """Under DC excitation the only frequency is 0 Hz: a sweep or another frequency is refused, naming its key."""
    if excitation != "dc":
        return
    if "sweep" in data:
        raise _err(
            path, "sweep", 'a sweep with excitation = "dc"; a DC network is solved at 0 Hz only: remove the sweep'
        )
    other = [f for f in freqs if f != 0]
    if other:
        raise _err(
            path,
            "frequencies",
            f'{other[0]:g} Hz with excitation = "dc"; a DC network is solved at 0 Hz only: '
            'write frequencies = ["0"] or leave frequencies out (or use excitation = "ac")',
        )


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
        freqs = [_frequency(path, f"frequencies[{i}]", f, negative_later=True) for i, f in enumerate(raw)]
    try:
        return list(frequency_list(freqs, where=f"{path}: key 'frequencies'"))
    except FrequencyError as exc:
        raise CaseFileError(str(exc)) from None


def _expectations(path: Path, data: dict[str, Any], freqs: list[float]) -> list[Expectation]:
    """The ``[[expect]]`` tables; their frequencies join ``freqs`` and count against ``MAX_POINTS``.

    Linear in the number of entries: the joined list is sorted and merged once by ``frequency_list``.
    """
    out = []
    for i, item in enumerate(entries(path, data, "expect"), start=1):
        key = f"expect[{i}]"
        if "at" not in item:
            raise _err(path, key, 'needs at = "<frequency>"')
        at = _frequency(path, f"{key}.at", item["at"])
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
        out.append(Expectation(at, values, tolerance, string(path, item, "how", ""), i))
    if out:
        merged = frequency_list([*freqs, *(e.at_hz for e in out)], where=f"{path}: key 'expect'")
        _check_count(path, "expect", len(merged))
        freqs[:] = [f for f in merged]
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


_TOP_KEYS = {
    "title",
    "netlist",
    "port",
    "ports",
    "frequencies",
    "sweep",
    "sources",
    "excitation",
    "tolerance",
    "expect",
    "limit",
    "allow_negative",
    "tags",
    "about",
    "caution",
    "accept_warnings",
    "vary",
    "samples",
    "seed",
    "spice_samples",
    "max_elements",
    "max_netlist_mib",
}


def load_case(path: str | Path, allow_outside: bool = False, read_limits: ReadLimits | None = None) -> Case:
    """Read and check one case file; every problem raises CaseFileError naming the file and key.

    ``allow_outside``: read a netlist, or a symlinked case file's target, outside the case file's folder.
    ``read_limits``: the command line's netlist size limits, in place of the file's ``max_elements`` and
    ``max_netlist_mib`` (None: the file's, else the defaults for untrusted input).
    """
    path = Path(path)
    data = read_table(path, allow_outside)
    unknown = set(data) - _TOP_KEYS
    if unknown:
        raise _err(path, sorted(unknown)[0], f"unknown key; a case file knows {', '.join(sorted(_TOP_KEYS))}")
    limits = limits_from_case(path, data, read_limits)
    text, netlist_file = _netlist(path, data, allow_outside, limits)
    excitation = _excitation(path, data)
    freqs = [0.0] if excitation == "dc" and not ({"frequencies", "sweep"} & set(data)) else _frequencies(path, data)
    _dc_frequencies(path, data, excitation, freqs)
    multiport = multiport_from_case(path, data, freqs)  # None without ``ports``
    expectations = _expectations(path, data, freqs) if multiport is None else []
    sources = string(path, data, "sources", "peak").lower()
    if sources not in ("peak", "rms"):
        raise _err(path, "sources", f'must be "peak" or "rms" (got {sources[:40]!r})')
    tolerance = _tolerance(path, "tolerance", table(path, data, "tolerance", "{ rel = 1e-6 }"), SOLVER_VS_SPICE)
    return Case(
        path=path,
        title=string(path, data, "title", path.stem),
        netlist_text=text,
        netlist_file=netlist_file,
        port=_port(path, data) if multiport is None else (multiport.ports[0].port.a, multiport.ports[0].port.b),
        freqs_hz=tuple(sorted(freqs)),
        sources=sources,
        excitation=excitation,
        tolerance=tolerance,
        expectations=tuple(expectations),
        limits=tuple(limit_tables(path, data, parse_limit_expression, "abs(zth)")) if multiport is None else (),
        allow_negative=boolean(path, data, "allow_negative", False),
        tags=_tags(path, data),
        caution=string(path, data, "caution", "").strip(),
        accept_warnings=accepted_warnings(data.get("accept_warnings", []), where=f"{path}: key 'accept_warnings'"),
        multiport=multiport,
        spread=_spread(path, data),
        read_limits=limits,
    )


def _spread(path: Path, data: dict[str, Any]) -> SpreadSpec | None:
    """``[[vary]]`` tables (``model.vary.vary_from_case``) with ``samples``, ``seed`` and ``spice_samples``."""
    varies = vary_from_case(path, data)
    if varies and "ports" in data:
        raise _err(
            path, "vary", "spread is computed at one port; with several ports, state [[vary]] in a one-port case"
        )
    counts = {}
    for key, default in (("samples", 0), ("seed", 1), ("spice_samples", 20)):
        raw = data.get(key, default)
        if not isinstance(raw, int) or isinstance(raw, bool) or not 0 <= raw <= MAX_SAMPLES:
            raise _err(path, key, f"must be a whole number from 0 to {MAX_SAMPLES} (got {str(raw)[:40]!r})")
        counts[key] = raw
    if not varies:
        stray = [key for key in counts if key in data]
        if stray:
            raise _err(path, stray[0], "applies only with [[vary]] tables; add one, or remove the key")
        return None
    return SpreadSpec(varies, counts["samples"], counts["seed"], counts["spice_samples"])


def accepted_warnings(raw: Any, *, where: str) -> tuple[str, ...]:
    """``accept_warnings = ["no-ac-source", ...]``: known warning codes, each once, in the order given.

    An unknown code is refused with the list of known ones: a misspelt acknowledgement would
    otherwise silence nothing while looking as if it did.
    """
    known = ", ".join(WARNING_CODES)
    if not isinstance(raw, list) or not all(isinstance(code, str) for code in raw):
        raise CaseFileError(f'{where}: must be a list of warning codes, like ["no-ac-source"]; the codes are {known}')
    for code in raw:
        if code not in WARNING_CODES:
            raise CaseFileError(f"{where}: {code[:60]!r} is not a warning code; write one of {known}")
    return tuple(dict.fromkeys(raw))


def _tags(path: Path, data: dict[str, Any]) -> tuple[str, ...]:
    tags = data.get("tags", [])
    if not isinstance(tags, list) or not all(isinstance(t, str) for t in tags):
        raise _err(path, "tags", f'must be a list of strings, like tags = ["filter"] (got {str(tags)[:40]})')
    return tuple(tags)


def find_case_files(paths: list[Path]) -> list[Path]:
    """Every ``*.toml`` under the given folders (sorted), plus files named directly.

    A subfolder that cannot be listed is not skipped in silence: it is returned as it is, so that
    ``load_case`` refuses it with the reason (reading a folder is refused) and the run reports it.
    Symbolic links to folders are not followed, so the walk stays inside the folders given.
    """
    found: list[Path] = []
    for p in paths:
        if not p.is_dir():
            found.append(p)
            continue
        unreadable: list[OSError] = []
        here: list[Path] = []
        for root, _dirs, files in os.walk(p, onerror=unreadable.append):
            here.extend(Path(root) / f for f in files if f.endswith(".toml"))
        found.extend(sorted(here))
        found.extend(sorted(Path(exc.filename) for exc in unreadable))
    return found
