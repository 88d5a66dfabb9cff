"""A stored baseline of crosscheck's own equivalents, and the drift of a later run from it.

Solver-vs-SPICE agreement says both engines agree today; a baseline says the
own solver still gives what it gave when the baseline was written (a refactor,
a new numpy, a changed case). It stores V_th, Z_th and I_N per case and
frequency at full double precision (JSON floats round-trip exactly), with the
crosscheck version and a hash of the case file and netlist, so a change can be
told from an intended edit. It is written only on request (``--update-baseline``),
and writing it lists what changed; it is never updated silently.

Cases are keyed by their path relative to the baseline file's folder, so the
same baseline works from any working directory.
"""

from __future__ import annotations

import hashlib
import json
import math
import os
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from crosscheck.errors import CrosscheckError
from crosscheck.judge.records import Cause, DriftCheck
from crosscheck.model.tolerance import BASELINE, Tolerance
from crosscheck.model.values import format_eng, format_rect
from crosscheck.own.equivalent import Equivalent
from crosscheck.version import __version__
from crosscheck.vocabulary import (
    COMPARED,
    Verdict,
    phasor_json,
    quantity_name,
    quantity_unit,
    relative_error,
    same_frequency,
)

FORMAT = "crosscheck baseline"
FORMAT_VERSION = 1
#: What a baseline stores of each point: the compared quantities.
STORED = COMPARED


class BaselineError(CrosscheckError, ValueError):
    """The baseline file is missing or malformed: the message names the file and what to do."""


@dataclass(frozen=True)
class StoredPoint:
    freq_hz: float
    values: dict[str, complex | None]


@dataclass(frozen=True)
class StoredCase:
    """One case as the baseline holds it."""

    case_sha256: str | None
    netlist_sha256: str | None
    port: tuple[str, str]
    points: tuple[StoredPoint, ...]

    def point(self, freq_hz: float) -> StoredPoint | None:
        return next((p for p in self.points if same_frequency(p.freq_hz, freq_hz)), None)


@dataclass
class Baseline:
    """Stored cases by key; ``path`` is the file it was read from (keys are relative to its folder)."""

    crosscheck_version: str
    cases: dict[str, StoredCase] = field(default_factory=dict)
    path: Path | None = None


@dataclass(frozen=True)
class Moved:
    case: str
    freq_hz: float
    quantity: str
    old: complex | None
    new: complex | None
    rel_err: float


@dataclass(frozen=True)
class BaselineChanges:
    """What writing a new baseline changes: cases added and removed, quantities moved beyond tolerance."""

    added: tuple[str, ...]
    removed: tuple[str, ...]
    kept: tuple[str, ...]  # did not run this time (error), old entry kept
    moved: tuple[Moved, ...]
    points_changed: tuple[str, ...]  # cases whose frequency list changed

    @property
    def empty(self) -> bool:
        return not (self.added or self.removed or self.moved or self.points_changed)


# --------------------------------------------------------------------------- keys and hashes


def case_key(name: str, baseline_path: Path) -> str:
    """The case's path relative to the baseline's folder, with forward slashes."""
    try:
        rel = os.path.relpath(Path(name).resolve(), Path(baseline_path).resolve().parent)
    except ValueError:  # another drive on Windows
        rel = str(Path(name).resolve())
    return Path(rel).as_posix()


def _sha256(data: bytes | None) -> str | None:
    return None if data is None else hashlib.sha256(data).hexdigest()


def case_hashes(case: Any) -> tuple[str | None, str | None]:
    """sha256 of the case file's bytes (None when it cannot be read) and of the netlist text."""
    if case is None:
        return None, None
    try:
        data = Path(case.path).read_bytes()
    except OSError:
        data = None
    return _sha256(data), _sha256(case.netlist_text.encode("utf-8"))


# --------------------------------------------------------------------------- reading and writing


def _decode(path: Path, where: str, raw: Any) -> complex | None:
    if raw is None:
        return None
    try:
        return complex(float(raw["re"]), float(raw["im"]))
    except (TypeError, KeyError, ValueError):
        raise BaselineError(
            f'{path}: {where} must be {{"re": …, "im": …}} or null (got {raw!r}); '
            "rewrite the baseline with --update-baseline"
        ) from None


def load_baseline(path: str | Path) -> Baseline:
    """Read a baseline file; a missing or malformed file raises BaselineError saying how to write one."""
    path = Path(path)
    try:
        doc = json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise BaselineError(
            f"{path}: no baseline file here; write one with crosscheck verify ... --baseline {path} --update-baseline"
        ) from None
    except (UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise BaselineError(f"{path}: not a JSON baseline ({exc}); rewrite it with --update-baseline") from None
    if not isinstance(doc, dict) or doc.get("format") != FORMAT:
        raise BaselineError(
            f'{path}: not a crosscheck baseline (no "format": "{FORMAT}"); '
            "name the right file, or write one with --update-baseline"
        )
    if doc.get("format_version") != FORMAT_VERSION:
        raise BaselineError(
            f"{path}: baseline format version {doc.get('format_version')!r}, this crosscheck reads "
            f"{FORMAT_VERSION}; rewrite it with --update-baseline"
        )
    cases: dict[str, StoredCase] = {}
    raw_cases = doc.get("cases")
    if not isinstance(raw_cases, dict):
        raise BaselineError(f'{path}: "cases" must be an object keyed by case path')
    for key, entry in raw_cases.items():
        try:
            points = tuple(
                StoredPoint(
                    float(p["freq_hz"]),
                    {q: _decode(path, f"cases[{key!r}] at {p['freq_hz']} Hz: {q}", p.get(q)) for q in STORED},
                )
                for p in entry["points"]
            )
            port = (str(entry.get("port", ("?", "?"))[0]), str(entry.get("port", ("?", "?"))[1]))
        except (TypeError, KeyError, ValueError, AttributeError, IndexError):
            raise BaselineError(
                f"{path}: case {key!r} is malformed (needs points with freq_hz, vth, zth, in); "
                "rewrite the baseline with --update-baseline"
            ) from None
        cases[key] = StoredCase(entry.get("case_sha256"), entry.get("netlist_sha256"), port, points)
    return Baseline(str(doc.get("crosscheck_version", "?")), cases, path)


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
                "points": [
                    {"freq_hz": p.freq_hz, **{q: phasor_json(p.values.get(q)) for q in STORED}} for p in entry.points
                ],
            }
            for key, entry in sorted(baseline.cases.items())
        },
    }


def write_baseline(baseline: Baseline, path: str | Path) -> None:
    """Write atomically (a temporary file renamed over the old one), keys sorted for readable diffs."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    text = json.dumps(baseline_document(baseline), indent=1, ensure_ascii=False, allow_nan=False) + "\n"
    tmp = path.with_name(path.name + ".tmp")
    tmp.write_text(text, encoding="utf-8")
    os.replace(tmp, path)


def stored_case(result: Any) -> StoredCase:
    """A run's own equivalents as the baseline stores them."""
    case_hash, netlist_hash = case_hashes(result.case)
    points = tuple(StoredPoint(eq.freq_hz, {"vth": eq.vth, "zth": eq.zth, "in": eq.in_}) for eq in result.own)
    return StoredCase(case_hash, netlist_hash, tuple(result.port), points)


def updated_baseline(
    results: Sequence[Any], path: str | Path, previous: Baseline | None = None
) -> tuple[Baseline, tuple[str, ...]]:
    """The baseline this run would write, and the cases whose previous entry is kept because they
    produced no equivalents this time (an error)."""
    new = Baseline(__version__, path=Path(path))
    kept = []
    for r in results:
        key = case_key(r.name, Path(path))
        if r.own is not None:
            new.cases[key] = stored_case(r)
        elif previous is not None and key in previous.cases:
            new.cases[key] = previous.cases[key]
            kept.append(key)
    return new, tuple(kept)


# --------------------------------------------------------------------------- drift


def _judge(old: complex | None, new: complex | None, tol: Tolerance) -> tuple[float, bool]:
    """(relative error, within tolerance): |Δ| <= max(rel·|old|, abs); a form appearing or vanishing drifts."""
    if old is None or new is None:
        return (0.0, True) if old is None and new is None else (math.inf, False)
    delta = abs(new - old)
    rel = relative_error(new, old)
    return rel, delta <= max(tol.rel * abs(old), tol.abs)


def _show(q: str, z: complex | None) -> str:
    """Rectangular, 10 significant figures: a drift in either part shows."""
    return "none" if z is None else format_rect(z, 10, quantity_unit(q))


def drift_checks(
    own: Sequence[Equivalent], stored: StoredCase, tolerance: Tolerance = BASELINE, changed_input: bool = False
) -> tuple[list[DriftCheck], list[str]]:
    """Each stored quantity against this run; notes for frequencies only one side has."""
    checks: list[DriftCheck] = []
    notes: list[str] = []
    why = (
        "; the case file or netlist changed since the baseline was written, so the change may be intended"
        if changed_input
        else "; the case is unchanged, so the solver's answer itself moved"
    )
    new_freqs = []
    for eq in own:
        point = stored.point(eq.freq_hz)
        if point is None:
            new_freqs.append(eq.freq_hz)
            continue
        for q, obtained in (("vth", eq.vth), ("zth", eq.zth), ("in", eq.in_)):
            old = point.values.get(q)
            rel, ok = _judge(old, obtained, tolerance)
            text = (
                ""
                if ok
                else (
                    f"{quantity_name(q)} at {format_eng(eq.freq_hz, 6, ' Hz')} moved from {_show(q, old)} to "
                    f"{_show(q, obtained)} (relative change {rel:.3g}, baseline tolerance {tolerance.rel:.3g}){why}"
                )
            )
            checks.append(
                DriftCheck(
                    eq.freq_hz,
                    q,
                    old,
                    obtained,
                    rel,
                    Verdict.PASS if ok else Verdict.DRIFT,
                    text,
                    Cause.AGREES if ok else Cause.OUT_OF_TOLERANCE,
                )
            )
    gone = [p.freq_hz for p in stored.points if not any(same_frequency(p.freq_hz, eq.freq_hz) for eq in own)]
    if new_freqs:
        notes.append(
            f"{len(new_freqs)} frequency(ies) not in the baseline (first {format_eng(new_freqs[0], 6, ' Hz')})"
            "; add them with --update-baseline"
        )
    if gone:
        notes.append(f"{len(gone)} baseline frequency(ies) no longer computed (first {format_eng(gone[0], 6, ' Hz')})")
    if changed_input:
        notes.append("the case file or netlist changed since the baseline was written")
    if any(c.verdict == "drift" for c in checks):
        notes.append(
            "accept the new values with --update-baseline if the change is intended"
            if changed_input
            else "find out why before accepting the new values with --update-baseline"
        )
    return checks, notes


def compare_with_baseline(
    result: Any, baseline: Baseline, tolerance: Tolerance = BASELINE
) -> tuple[list[DriftCheck], str]:
    """Drift records for one case result and a note (a case missing from the baseline is a note only)."""
    if result.own is None:
        return [], ""
    baseline_path = baseline.path if baseline.path is not None else Path("baseline.json")
    key = case_key(result.name, baseline_path)
    stored = baseline.cases.get(key)
    if stored is None:
        return [], f"not in the baseline {baseline_path} (as {key!r}); add it with --update-baseline"
    case_hash, netlist_hash = case_hashes(result.case)
    changed = (stored.case_sha256 is not None and case_hash is not None and stored.case_sha256 != case_hash) or (
        stored.netlist_sha256 is not None and netlist_hash is not None and stored.netlist_sha256 != netlist_hash
    )
    checks, notes = drift_checks(result.own, stored, tolerance, changed)
    return checks, "; ".join(notes)


def diff_baselines(
    old: Baseline | None, new: Baseline, kept: Iterable[str] = (), tolerance: Tolerance = BASELINE
) -> BaselineChanges:
    """What replacing ``old`` by ``new`` changes, quantity by quantity beyond ``tolerance``."""
    old_cases = old.cases if old is not None else {}
    added = tuple(sorted(set(new.cases) - set(old_cases)))
    removed = tuple(sorted(set(old_cases) - set(new.cases)))
    moved: list[Moved] = []
    points_changed: list[str] = []
    for key in sorted(set(new.cases) & set(old_cases)):
        before, after = old_cases[key], new.cases[key]
        if sorted(p.freq_hz for p in before.points) != sorted(p.freq_hz for p in after.points):
            points_changed.append(key)
        for p in after.points:
            q_old = before.point(p.freq_hz)
            if q_old is None:
                continue
            for q in STORED:
                rel, ok = _judge(q_old.values.get(q), p.values.get(q), tolerance)
                if not ok:
                    moved.append(Moved(key, p.freq_hz, q, q_old.values.get(q), p.values.get(q), rel))
    return BaselineChanges(added, removed, tuple(sorted(kept)), tuple(moved), tuple(points_changed))


def format_changes(changes: BaselineChanges, path: str | Path) -> list[str]:
    """Lines for the terminal: what the written baseline changed."""
    lines = [
        f"baseline {path}: "
        + (
            "no changes beyond tolerance"
            if changes.empty
            else f"{len(changes.added)} case(s) added, {len(changes.removed)} removed, "
            f"{len(changes.moved)} quantity(ies) moved, "
            f"{len(changes.points_changed)} frequency list(s) changed"
        )
    ]
    lines += [f"  added    {k}" for k in changes.added]
    lines += [f"  removed  {k}" for k in changes.removed]
    lines += [f"  kept     {k} (did not run this time; previous entry kept)" for k in changes.kept]
    lines += [f"  frequencies changed  {k}" for k in changes.points_changed]
    lines += [
        f"  moved    {m.case} at {format_eng(m.freq_hz, 6, ' Hz')} {quantity_name(m.quantity)}: "
        f"{_show(m.quantity, m.old)} → {_show(m.quantity, m.new)} (relative change {m.rel_err:.3g})"
        for m in changes.moved
    ]
    return lines
