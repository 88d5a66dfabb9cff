"""The baseline file: its records, a strict reader with size and depth caps, an atomic writer, a lock.

A baseline is untrusted input like every other file crosscheck reads (it is committed beside the
corpus and may be edited, merged badly or truncated). The reader therefore refuses, with the file,
the place in it and the way out, anything the writer would not have written: invalid JSON, a wrong
structure, integers longer than any double needs, nesting deeper than the format has, non-finite
or malformed numbers, a file over ``MAX_BYTES``. A refused file is ``BaselineCorrupt`` (exit 3), and
its message names the command that repairs it: ``--update-baseline --replace-corrupt`` rewrites it
from that run and keeps the refused file beside it as ``BASELINE.corrupt``. A non-finite stored
value is refused rather than compared, because ``inf`` and ``nan`` make every tolerance test pass
or fail meaninglessly.

Why writing is safe. ``write_baseline`` writes a uniquely named temporary file in the baseline's own
folder (``mkstemp``: no two writers share a name), ``fsync``\\ s it, renames it over the baseline with
``os.replace`` (atomic on one file system: a reader sees the old file or the new one, never half of
either) and ``fsync``\\ s the folder so the rename survives a crash. ``locked`` holds an exclusive
``flock`` on ``BASELINE.lock`` beside the file for a whole read-modify-write, so two runs updating
different cases both land instead of the last writer winning. The lock file is never removed
(removing it would let a second process lock a new file while the first still holds the old one).
A process that dies while holding the lock loses it with its file descriptor: the kernel releases
an ``flock`` when the last descriptor closes, so a crash never leaves the baseline locked. Readers
that only compare take no lock; the atomic rename is enough for them.

The only paths opened here are the baseline named on the command line (or by the API's caller) and
names made from it by appending ``.lock``, ``.corrupt`` or a ``mkstemp`` suffix in the same folder.
Case keys inside the file are only ever dictionary keys: nothing read from a baseline names a file.
"""

from __future__ import annotations

import bisect
import contextlib
import fcntl
import json
import math
import os
import re
import tempfile
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from crosscheck.errors import CrosscheckError
from crosscheck.model.netlist import read_netlist
from crosscheck.model.network import Element, Port
from crosscheck.model.tolerance import BASELINE, Tolerance
from crosscheck.vocabulary import COMPARED, phasor_json, same_frequency

FORMAT = "crosscheck baseline"
FORMAT_VERSION = 1
#: What a baseline stores of each point: the compared quantities.
STORED = COMPARED
#: The largest baseline read (about a million points at ~200 bytes each); bigger is refused unread.
MAX_BYTES = 256 * 2**20
#: The deepest nesting read: the format itself nests 6 deep (document, cases, case, points, point, value).
MAX_DEPTH = 16
#: The longest integer accepted: a frequency written as an integer needs far fewer digits.
MAX_INT_DIGITS = 30

_STRING = re.compile(rb'"[^"]*"')
_NOT_STRUCTURE = bytes(b for b in range(256) if b not in b'"[]{}')
_OPENING = np.frombuffer(b"[{", dtype=np.uint8)


class BaselineError(CrosscheckError, ValueError):
    """The baseline file is missing or malformed: the message names the file and what to do."""


class BaselineCorrupt(BaselineError):
    """The baseline file exists but cannot be trusted; the message gives the command that repairs it."""

    def __init__(self, path: str | Path, problem: str, cases: str = "CASES") -> None:
        self.path = Path(path)
        self.problem = problem
        self.cases = cases
        super().__init__(
            f"{path}: {problem}. Repair it from a run: crosscheck verify {cases} --baseline {path} "
            f"--update-baseline --replace-corrupt (rewrites it from that run's cases and keeps this file "
            f"as {corrupt_name(path)})"
        )

    def __reduce__(self) -> tuple[Any, ...]:
        return (type(self), (self.path, self.problem, self.cases))


def corrupt_name(path: str | Path) -> Path:
    """Where a refused baseline is kept by ``--replace-corrupt``."""
    return Path(path).with_name(Path(path).name + ".corrupt")


# --------------------------------------------------------------------------- records


class FrequencyIndex:
    """Frequencies sorted once, so finding ``same_frequency`` among n points costs O(log n).

    The nearest stored frequency below and above a query bound every candidate: ``same_frequency``
    (``math.isclose`` relative to the larger of the two) holds for a farther point on one side only if
    it holds for the nearer one, so the two neighbours are the only ones tested. Of equal frequencies
    the first in the original order is found, as a linear scan would.
    """

    def __init__(self, freqs: list[float] | tuple[float, ...]) -> None:
        order = sorted(range(len(freqs)), key=lambda i: (freqs[i], i))
        self._freqs = [freqs[i] for i in order]
        self._order = order

    def find(self, freq_hz: float) -> int | None:
        """The original position of a frequency the same as ``freq_hz``, or None."""
        at = bisect.bisect_left(self._freqs, freq_hz)
        best: tuple[float, int] | None = None
        for j in (at - 1, at):
            if 0 <= j < len(self._freqs) and same_frequency(self._freqs[j], freq_hz):
                distance = abs(self._freqs[j] - freq_hz)
                if best is None or distance < best[0]:
                    best = (distance, j)
        return None if best is None else self._order[best[1]]


@dataclass(frozen=True)
class StoredPoint:
    freq_hz: float
    values: dict[str, complex | None]


@dataclass(frozen=True)
class StoredCase:
    """One case as the baseline holds it; its points are indexed by frequency for O(log n) lookup."""

    case_sha256: str | None
    netlist_sha256: str | None
    port: tuple[str, str]
    points: tuple[StoredPoint, ...]
    #: Element name -> its card as the netlist reader understood it (``baseline.element_cards``), so a drift
    #: report can name what changed; None in entries written before cards were stored (still read).
    elements: dict[str, str] | None = None
    #: What drove the network when it was stored: "ac" or "dc" (written only when "dc"; absent reads as "ac").
    excitation: str = "ac"
    index: FrequencyIndex = field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        object.__setattr__(self, "index", FrequencyIndex([p.freq_hz for p in self.points]))

    def point(self, freq_hz: float) -> StoredPoint | None:
        at = self.index.find(freq_hz)
        return None if at is None else self.points[at]

    def first_non_finite(self) -> str | None:
        """Where this entry holds inf or nan (which no baseline may store), or None."""
        for p in self.points:
            for q, z in p.values.items():
                if z is not None and not (math.isfinite(z.real) and math.isfinite(z.imag)):
                    return f"{q} = {z!r} at {p.freq_hz!r} Hz"
        return None


@dataclass
class Baseline:
    """Stored cases by key; ``path`` is the file it was read from (keys are relative to its folder)."""

    crosscheck_version: str
    cases: dict[str, StoredCase] = field(default_factory=dict)
    path: Path | None = None


# --------------------------------------------------------------------------- reading


def load_baseline(path: str | Path) -> Baseline:
    """Read a baseline file; a missing one raises BaselineError saying how to write one, a refused one
    BaselineCorrupt saying how to repair it."""
    path = Path(path)
    data = _read_capped(path)
    _check_depth(path, data)
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise BaselineCorrupt(path, f"not UTF-8 text ({exc})") from None
    try:
        doc = json.loads(text, parse_int=lambda s: _integer(path, s), parse_constant=lambda s: _constant(path, s))
    except json.JSONDecodeError as exc:
        raise BaselineCorrupt(path, f"not valid JSON ({exc})") from None
    except RecursionError:
        raise BaselineCorrupt(path, f"nested deeper than {MAX_DEPTH} levels") from None
    return _document(path, doc)


def _read_capped(path: Path) -> bytes:
    try:
        with open(path, "rb") as handle:
            size = os.fstat(handle.fileno()).st_size
            data = handle.read(MAX_BYTES + 1) if size <= MAX_BYTES else b""
    except FileNotFoundError:
        raise BaselineError(
            f"{path}: no baseline file here; write one with crosscheck verify CASES --baseline {path} --update-baseline"
        ) from None
    except IsADirectoryError:
        raise BaselineError(f"{path}: is a folder, not a baseline file; name the baseline's JSON file") from None
    if size > MAX_BYTES or len(data) > MAX_BYTES:
        raise BaselineCorrupt(
            path, f"{max(size, len(data))} bytes, over the {MAX_BYTES // 2**20} MiB a baseline may be read at"
        )
    return data


def _check_depth(path: Path, data: bytes) -> None:
    """Refuse nesting deeper than MAX_DEPTH before parsing (brackets inside strings do not count)."""
    # Escaped backslashes, then escaped quotes, go first; then all but quotes and brackets; then strings.
    skeleton = data.replace(b"\\\\", b"").replace(b'\\"', b"").translate(None, _NOT_STRUCTURE)
    brackets = np.frombuffer(_STRING.sub(b"", skeleton).replace(b'"', b""), dtype=np.uint8)
    if brackets.size and int(np.cumsum(np.where(np.isin(brackets, _OPENING), 1, -1)).max()) > MAX_DEPTH:
        raise BaselineCorrupt(path, f"nested deeper than {MAX_DEPTH} levels (the format nests 6)")


def _integer(path: Path, text: str) -> int:
    if len(text.lstrip("-")) > MAX_INT_DIGITS:
        raise BaselineCorrupt(path, f"an integer of {len(text)} digits ({text[:20]}…); no stored number needs it")
    return int(text)


def _constant(path: Path, text: str) -> float:
    raise BaselineCorrupt(path, f"holds the non-finite number {text}; a baseline stores finite numbers only")


def _where(key: str, i: int | None = None, q: str | None = None) -> str:
    at = f"cases[{key!r}]"
    if i is not None:
        at += f".points[{i}]"
    return at + (f".{q}" if q else "")


def _document(path: Path, doc: Any) -> Baseline:
    if not isinstance(doc, dict) or doc.get("format") != FORMAT:
        raise BaselineCorrupt(
            path, f'not a crosscheck baseline (no "format": "{FORMAT}"); if it is another file, name the right one'
        )
    version = doc.get("format_version")
    if type(version) is not int or version != FORMAT_VERSION:
        raise BaselineCorrupt(path, f"baseline format version {version!r}, this crosscheck reads {FORMAT_VERSION}")
    raw_cases = doc.get("cases")
    if not isinstance(raw_cases, dict):
        raise BaselineCorrupt(path, '"cases" must be an object keyed by case path')
    cases = {key: _case(path, key, entry) for key, entry in raw_cases.items()}
    version_text = doc.get("crosscheck_version", "?")
    return Baseline(version_text if isinstance(version_text, str) else "?", cases, path)


def _case(path: Path, key: str, entry: Any) -> StoredCase:
    if not isinstance(entry, dict) or not isinstance(entry.get("points"), list):
        raise BaselineCorrupt(path, f"case {key!r} is malformed (needs an object with a list of points)")
    hashes = [entry.get("case_sha256"), entry.get("netlist_sha256")]
    if any(h is not None and not (isinstance(h, str) and re.fullmatch("[0-9a-f]{64}", h)) for h in hashes):
        raise BaselineCorrupt(path, f"{_where(key)}: a sha256 must be 64 hex digits or null (got {hashes!r:.120})")
    port = entry.get("port", ["?", "?"])
    if not (isinstance(port, list) and len(port) == 2 and all(isinstance(n, str) for n in port)):
        raise BaselineCorrupt(path, f"{_where(key)}.port must be two node names (got {port!r:.80})")
    points = tuple(_point(path, key, i, p) for i, p in enumerate(entry["points"]))
    excitation = entry.get("excitation", "ac")
    if excitation not in ("ac", "dc"):
        raise BaselineCorrupt(path, f'{_where(key)}.excitation must be "ac" or "dc" (got {excitation!r:.40})')
    elements = _elements(path, key, entry.get("elements"))
    return StoredCase(hashes[0], hashes[1], (port[0], port[1]), points, elements, excitation)


#: An element card as stored: the reader's names (letters, digits, _ . : # + - [ ] < > ! /), spaces and
#: numbers as Python writes them; nothing else, so stored text is inert wherever a report shows it.
_CARD = re.compile(r"[A-Za-z0-9_.:#+\-\[\]<>!/ ]{1,400}")
_ELEMENT_NAME = re.compile(r"[A-Za-z0-9_.:#+\-\[\]<>!/]{1,200}")


def _elements(path: Path, key: str, raw: Any) -> dict[str, str] | None:
    """The optional element cards of a case entry (absent in older files: None)."""
    if raw is None:
        return None
    if not isinstance(raw, dict):
        raise BaselineCorrupt(path, f"{_where(key)}.elements must be an object of element cards (got {raw!r:.80})")
    for name, card in raw.items():
        if not (_ELEMENT_NAME.fullmatch(name) and isinstance(card, str) and _CARD.fullmatch(card)):
            raise BaselineCorrupt(
                path, f"{_where(key)}.elements[{name!r:.60}] is not an element card (got {card!r:.80})"
            )
    return dict(raw)


def _point(path: Path, key: str, i: int, raw: Any) -> StoredPoint:
    if not isinstance(raw, dict):
        raise BaselineCorrupt(path, f"{_where(key, i)} must be an object (got {raw!r:.80})")
    freq = _number(path, raw.get("freq_hz"), key, i, "freq_hz")
    if freq < 0:
        raise BaselineCorrupt(path, f"{_where(key, i, 'freq_hz')} is negative ({freq!r})")
    values: dict[str, complex | None] = {}
    for q in STORED:
        if q not in raw:
            raise BaselineCorrupt(path, f"{_where(key, i, q)} is missing (a phasor or null is stored for each)")
        z = raw[q]
        if z is not None and not (isinstance(z, dict) and set(z) == {"re", "im"}):
            raise BaselineCorrupt(path, f'{_where(key, i, q)} must be {{"re": …, "im": …}} or null (got {z!r:.80})')
        values[q] = (
            None
            if z is None
            else complex(_number(path, z["re"], key, i, q + ".re"), _number(path, z["im"], key, i, q + ".im"))
        )
    return StoredPoint(freq, values)


def _number(path: Path, raw: Any, key: str, i: int, q: str) -> float:
    """A stored number: a JSON number (not a boolean, not text), finite; the place is spelled only on error."""
    if type(raw) is float and math.isfinite(raw):
        return raw
    where = _where(key, i, q)
    if isinstance(raw, bool) or not isinstance(raw, (int, float)):
        kind = (
            "non-finite"
            if isinstance(raw, str) and raw.strip().lower().lstrip("+-") in {"inf", "nan", "infinity"}
            else "malformed"
        )
        raise BaselineCorrupt(path, f"{where} is {kind} ({raw!r:.80}); a baseline stores finite numbers only")
    value = float(raw)
    if not math.isfinite(value):
        raise BaselineCorrupt(path, f"{where} is non-finite ({raw!r:.80}); a baseline stores finite numbers only")
    return value


# --------------------------------------------------------------------------- element cards


def _card(e: Element) -> str:
    """The element as the reader understood it: kind, nodes, then its value (or AC magnitude and phase)."""
    extra = [*(e.coupled or ()), *([e.control] if e.control else [])]
    value = [repr(e.ac_mag), repr(e.ac_phase_deg)] if e.kind in "VI" else [repr(e.value)]
    return " ".join([e.kind, *(() if e.kind == "K" else e.nodes), *extra, *value])


def element_cards(case: Any) -> dict[str, str] | None:
    """Element name -> card for the case's netlist, or None when it cannot be read now.

    The text read is the netlist the run itself accepted (``case.netlist_text``), read by the same
    reader, so nothing new reaches a file, a shell or ngspice; the cards hold only the reader's names
    and Python's numbers (``baseline_file`` refuses anything else when it reads them back)."""
    if case is None:
        return None
    try:
        network = read_netlist(
            case.netlist_text,
            allow_negative=case.allow_negative,
            port=Port(*case.port),
            limits=getattr(case, "read_limits", None),
        )
    except (CrosscheckError, TypeError, ValueError):
        return None
    return {e.name: _card(e) for e in network.elements}


# --------------------------------------------------------------------------- writing


def baseline_document(baseline: Baseline, tolerance: Tolerance = BASELINE) -> dict[str, Any]:
    return {
        "format": FORMAT,
        "format_version": FORMAT_VERSION,
        "crosscheck_version": baseline.crosscheck_version,
        "drift_tolerance": {"rel": tolerance.rel, "abs": tolerance.abs},
        "cases": {
            key: {
                "case_sha256": entry.case_sha256,
                "netlist_sha256": entry.netlist_sha256,
                "port": list(entry.port),
                **({} if entry.elements is None else {"elements": dict(sorted(entry.elements.items()))}),
                **({"excitation": entry.excitation} if entry.excitation != "ac" else {}),
                "points": [
                    {"freq_hz": p.freq_hz, **{q: phasor_json(p.values.get(q)) for q in STORED}} for p in entry.points
                ],
            }
            for key, entry in sorted(baseline.cases.items())
        },
    }


def write_baseline(baseline: Baseline, path: str | Path) -> None:
    """Write atomically and durably (see the module's docstring), keys sorted for readable diffs; a
    non-finite value is refused, since it could never be read back."""
    path = Path(path)
    for key, entry in baseline.cases.items():
        bad = entry.first_non_finite()
        if bad is not None:
            raise BaselineError(f"{path}: case {key!r} holds {bad}; a baseline stores finite numbers only")
    text = json.dumps(baseline_document(baseline), indent=1, ensure_ascii=False, allow_nan=False) + "\n"
    atomic_write(path, text.encode("utf-8"))


def atomic_write(path: Path, data: bytes) -> None:
    """``data`` at ``path`` through a unique temporary file in the same folder, fsync, rename, fsync."""
    folder = path.parent
    folder.mkdir(parents=True, exist_ok=True)
    try:
        mode = os.stat(path).st_mode & 0o777
    except FileNotFoundError:
        mode = 0o644
    fd, tmp = tempfile.mkstemp(dir=folder, prefix=f".{path.name}.", suffix=".tmp")
    try:
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
            handle.flush()
            os.fsync(handle.fileno())
        os.chmod(tmp, mode)
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        raise
    _fsync_folder(folder)


def _fsync_folder(folder: Path) -> None:
    """Make a rename in ``folder`` durable; file systems that cannot fsync a folder are let be."""
    fd = os.open(folder, os.O_RDONLY)
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def keep_corrupt(path: Path) -> Path:
    """Move a refused baseline aside as ``BASELINE.corrupt`` (``.corrupt.1``, … when that is taken);
    call with the lock held. Returns where it went."""
    target = corrupt_name(path)
    n = 0
    while target.exists():
        n += 1
        target = corrupt_name(path).with_name(f"{corrupt_name(path).name}.{n}")
    os.replace(path, target)
    _fsync_folder(path.parent)
    return target


@contextlib.contextmanager
def locked(path: str | Path) -> Iterator[None]:
    """Hold an exclusive ``flock`` on ``BASELINE.lock`` (see the module's docstring for why it is safe)."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd = os.open(path.with_name(path.name + ".lock"), os.O_RDWR | os.O_CREAT | os.O_CLOEXEC, 0o644)
    try:
        fcntl.flock(fd, fcntl.LOCK_EX)
        yield
    finally:
        os.close(fd)  # closing the last descriptor releases the lock
