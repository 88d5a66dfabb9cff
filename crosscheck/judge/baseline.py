"""A stored baseline of crosscheck's own equivalents, and the drift of a later run from it.

Solver-vs-SPICE agreement says both engines agree today; a baseline says the
own solver still gives what it gave when the baseline was written (a refactor,
a new numpy, a changed case). It stores V_th, Z_th and I_N per case and
frequency at full double precision (JSON floats round-trip exactly), with the
crosscheck version and a hash of the case file and netlist, so a change can be
told from an intended edit. It is written only on request (``--update-baseline``),
and writing it lists what changed; it is never updated silently. An update changes
only the cases of that run; a case not run is kept unless ``--prune`` is given.
The file itself (strict reading, atomic writes, the lock that keeps concurrent
updates from losing each other's cases) is ``baseline_file``'s job.

Holding a run against a baseline is O(n log n) in points per case: stored points
are indexed by frequency once (``baseline_file.FrequencyIndex``), and so are the
run's own points when looking for stored frequencies no longer computed.

Cases are keyed by their path relative to the baseline file's folder, so the
same baseline works from any working directory.
"""

from __future__ import annotations

import hashlib
import math
import os
from collections.abc import Iterable, Iterator, Mapping, Sequence
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

from crosscheck.judge.baseline_file import (
    FORMAT,
    FORMAT_VERSION,
    MAX_BYTES,
    MAX_DEPTH,
    STORED,
    Baseline,
    BaselineCorrupt,
    BaselineError,
    FrequencyIndex,
    StoredCase,
    StoredPoint,
    baseline_document,
    corrupt_name,
    element_cards,
    keep_corrupt,
    load_baseline,
    locked,
    write_baseline,
)
from crosscheck.judge.records import Cause, DriftCheck
from crosscheck.model.tolerance import BASELINE, Tolerance
from crosscheck.model.values import format_eng, format_rect
from crosscheck.own.equivalent import Equivalent
from crosscheck.version import __version__
from crosscheck.vocabulary import Verdict, quantity_name, quantity_unit, relative_error

__all__ = [
    "FORMAT",
    "FORMAT_VERSION",
    "MAX_BYTES",
    "MAX_DEPTH",
    "STORED",
    "Baseline",
    "BaselineChanges",
    "BaselineCorrupt",
    "BaselineError",
    "Moved",
    "StoredCase",
    "StoredPoint",
    "UpdateReport",
    "baseline_document",
    "case_key",
    "compare_with_baseline",
    "corrupt_name",
    "diff_baselines",
    "element_cards",
    "element_changes",
    "drift_checks",
    "format_changes",
    "load_baseline",
    "update_baseline_file",
    "updated_baseline",
    "write_baseline",
]


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
    """What writing a new baseline changes, case by case, and each quantity moved beyond tolerance."""

    added: tuple[str, ...]
    removed: tuple[str, ...]  # not in this run and --prune given
    kept: tuple[tuple[str, str], ...]  # (case, why): entry kept as it was
    moved: tuple[Moved, ...]
    points_changed: tuple[str, ...]  # cases whose frequency list changed
    changed: tuple[tuple[str, str], ...] = ()  # (case, what changed)
    unchanged: tuple[str, ...] = ()  # ran again, nothing beyond tolerance
    inputs: tuple[tuple[str, str], ...] = ()  # (case, which elements changed in its netlist), where known

    @property
    def empty(self) -> bool:
        return not (self.added or self.removed or self.moved or self.points_changed or self.changed)


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


_ELEMENT_UNITS = {"R": " Ω", "L": " H", "C": " F", "G": " S", "H": " Ω"}
#: At most this many changed elements are named; the rest are counted.
SHOWN_ELEMENTS = 4


def element_changes(before: Mapping[str, str] | None, after: Mapping[str, str] | None) -> str:
    """'R2 1 kΩ → 1.2 kΩ; C5 added' for two sets of element cards; '' when they are equal or unknown."""
    if before is None or after is None:
        return ""
    parts = []
    for name in sorted(before.keys() | after.keys()):
        old, new = before.get(name), after.get(name)
        if old == new:
            continue
        if old is None or new is None:
            parts.append(f"{name} {'added' if old is None else 'removed'}")
            continue
        a, b = old.split(), new.split()
        if len(a) == len(b) and a[:-1] == b[:-1] and a[0] not in "VI":
            unit = _ELEMENT_UNITS.get(a[0], "")
            parts.append(f"{name} {format_eng(float(a[-1]), 4, unit)} → {format_eng(float(b[-1]), 4, unit)}")
        else:
            parts.append(f"{name} '{old}' → '{new}'")
    more = len(parts) - SHOWN_ELEMENTS
    return "; ".join(parts[:SHOWN_ELEMENTS]) + (f"; and {more} more" if more > 0 else "")


def _input_change(stored: StoredCase, case: Any) -> str:
    """What changed in the case's inputs since ``stored`` was written, in words ('' for nothing)."""
    case_hash, netlist_hash = case_hashes(case)
    netlist = stored.netlist_sha256 is not None and netlist_hash is not None and stored.netlist_sha256 != netlist_hash
    case_file = stored.case_sha256 is not None and case_hash is not None and stored.case_sha256 != case_hash
    if not (netlist or case_file):
        return ""
    since = "changed since the baseline was written"
    if not netlist:
        return f"the case file {since} (the netlist did not)"
    named = element_changes(stored.elements, element_cards(case))
    if named:
        return f"the netlist {since} ({named})"
    if stored.elements is None:
        return f"the netlist {since} (this baseline predates per-element records; --update-baseline adds them)"
    return f"the netlist {since} (same elements and values: comments, order or spacing)"


# --------------------------------------------------------------------------- updating

#: Why a case's previous entry is kept as it was.
NOT_RUN = "not in this run; previous entry kept (--prune removes it)"
NO_EQUIVALENTS = "did not run this time (error); previous entry kept"


def stored_case(result: Any) -> StoredCase:
    """A run's own equivalents as the baseline stores them."""
    case_hash, netlist_hash = case_hashes(result.case)
    points = tuple(StoredPoint(eq.freq_hz, {"vth": eq.vth, "zth": eq.zth, "in": eq.in_}) for eq in result.own)
    excitation = getattr(result, "excitation", "ac")
    return StoredCase(case_hash, netlist_hash, tuple(result.port), points, element_cards(result.case), excitation)


def updated_baseline(
    results: Sequence[Any], path: str | Path, previous: Baseline | None = None, *, prune: bool = False
) -> tuple[Baseline, dict[str, str]]:
    """The baseline this run would write, and the cases whose previous entry is kept, with why.

    Only the cases of this run change. A case that ran without equivalents (an error) or with a
    non-finite value (which a baseline cannot hold) keeps its previous entry; a case of the previous
    baseline that is not in this run is kept too, unless ``prune``: then it is dropped.
    """
    new = Baseline(__version__, path=Path(path))
    kept: dict[str, str] = {}
    ran: set[str] = set()
    for r in results:
        key = case_key(r.name, Path(path))
        ran.add(key)
        entry = stored_case(r) if r.own is not None else None
        bad = None if entry is None else entry.first_non_finite()
        if entry is not None and bad is None:
            new.cases[key] = entry
        elif previous is not None and key in previous.cases:
            new.cases[key] = previous.cases[key]
            kept[key] = (
                NO_EQUIVALENTS if bad is None else f"holds {bad}, which a baseline cannot store; previous entry kept"
            )
    if previous is not None and not prune:
        for key in previous.cases.keys() - ran:
            new.cases[key] = previous.cases[key]
            kept[key] = NOT_RUN
    return new, kept


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


def _percent(rel: float) -> str:
    return f"{rel * 100:.3g} %"


def drift_checks(
    own: Sequence[Equivalent], stored: StoredCase, tolerance: Tolerance = BASELINE, changed_input: bool | str = False
) -> tuple[list[DriftCheck], list[str]]:
    """Each stored quantity against this run, and notes (frequencies only one side has, what changed).

    Drifted records come first, worst first, then the rest in frequency order: a case's headline (its
    first record with the drift verdict) is then its worst change. Only that record says why (the inputs
    changed, naming the elements, or did not); the others say where and how much, once each.
    ``changed_input``: what changed in the case's inputs, in words (``True``: something did).
    """
    what = (
        "the case file or netlist changed since the baseline was written"
        if changed_input is True
        else (changed_input or "")
    )
    checks: list[DriftCheck] = []
    new_freqs = []
    for eq in own:
        point = stored.point(eq.freq_hz)
        if point is None:
            new_freqs.append(eq.freq_hz)
            continue
        for q, obtained in (("vth", eq.vth), ("zth", eq.zth), ("in", eq.in_)):
            old = point.values.get(q)
            rel, ok = _judge(old, obtained, tolerance)
            text = "" if ok else _moved_text(q, eq.freq_hz, old, obtained, rel)
            verdict, cause = (Verdict.PASS, Cause.AGREES) if ok else (Verdict.DRIFT, Cause.OUT_OF_TOLERANCE)
            checks.append(DriftCheck(eq.freq_hz, q, old, obtained, rel, verdict, text, cause))
    drifted = sorted((c for c in checks if c.verdict == "drift"), key=lambda c: -c.rel_err)
    if drifted:
        why = (
            f"{what}, so the change may be intended"
            if what
            else "the case is unchanged, so the solver's answer itself moved"
        )
        count = f"worst of {len(drifted)} moved beyond tolerance {tolerance.rel:.3g}"
        drifted[0] = replace(drifted[0], explanation=f"{drifted[0].explanation}, {count}; {why}")
    checks = drifted + [c for c in checks if c.verdict != "drift"]
    return checks, _drift_notes(own, stored, new_freqs, what, drifted)


def _moved_text(q: str, freq_hz: float, old: complex | None, new: complex | None, rel: float) -> str:
    return (
        f"{quantity_name(q)} at {format_eng(freq_hz, 6, ' Hz')} moved from {_show(q, old)} to {_show(q, new)} "
        f"(relative change {_percent(rel)})"
    )


def _drift_notes(
    own: Sequence[Equivalent], stored: StoredCase, new_freqs: list[float], what: str, drifted: list[DriftCheck]
) -> list[str]:
    """One line per kind of news: worst drift first, then what changed, then frequencies, then what to do."""
    notes = []
    if drifted:
        w = drifted[0]
        notes.append(
            f"{len(drifted)} value(s) drifted; worst {quantity_name(w.quantity)} at "
            f"{format_eng(w.freq_hz, 6, ' Hz')}, relative change {_percent(w.rel_err)}"
        )
    if what:
        notes.append(what)
    computed = FrequencyIndex([eq.freq_hz for eq in own])
    gone = [p.freq_hz for p in stored.points if computed.find(p.freq_hz) is None]
    if new_freqs:
        notes.append(
            f"{len(new_freqs)} frequency(ies) not in the baseline (first {format_eng(new_freqs[0], 6, ' Hz')})"
            "; add them with --update-baseline"
        )
    if gone:
        notes.append(f"{len(gone)} baseline frequency(ies) no longer computed (first {format_eng(gone[0], 6, ' Hz')})")
    if drifted:
        notes.append(
            "accept the new values with --update-baseline if the change is intended"
            if what
            else "find out why before accepting the new values with --update-baseline"
        )
    return notes


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
    changed = _input_change(stored, result.case)
    excitation = getattr(result, "excitation", "ac")
    if stored.excitation != excitation:  # another excitation is another case: its values may all move
        moved = (
            f"the excitation changed since the baseline was written (baseline {stored.excitation}, now {excitation})"
        )
        changed = f"{moved}; {changed}" if changed else moved
    checks, notes = drift_checks(result.own, stored, tolerance, changed)
    return checks, "; ".join(notes)


def diff_baselines(
    old: Baseline | None,
    new: Baseline,
    kept: Mapping[str, str] | Iterable[str] = (),
    tolerance: Tolerance = BASELINE,
) -> BaselineChanges:
    """What replacing ``old`` by ``new`` changes, case by case; ``kept`` names entries carried over as
    they were (a mapping gives why). O(n log n) in points per case."""
    why = dict(kept) if isinstance(kept, Mapping) else {k: NO_EQUIVALENTS for k in kept}
    old_cases = old.cases if old is not None else {}
    moved: list[Moved] = []
    points_changed: list[str] = []
    changed: list[tuple[str, str]] = []
    unchanged: list[str] = []
    inputs: list[tuple[str, str]] = []
    for key in sorted((set(new.cases) & set(old_cases)) - set(why)):
        before, after = old_cases[key], new.cases[key]
        reasons = []
        if sorted(p.freq_hz for p in before.points) != sorted(p.freq_hz for p in after.points):
            points_changed.append(key)
            reasons.append("frequency list changed")
        case_moved = list(_moved(key, before, after, tolerance))
        if case_moved:
            moved += case_moved
            w = max(case_moved, key=lambda m: m.rel_err)
            reasons.insert(0, f"{len(case_moved)} quantity(ies) moved beyond tolerance, worst {_where(w)}")
        named = element_changes(before.elements, after.elements)
        if named:
            inputs.append((key, named))
            reasons.append(f"netlist: {named}")
        elif (before.case_sha256, before.netlist_sha256) != (after.case_sha256, after.netlist_sha256):
            reasons.append("case file or netlist edited")
        if before.port != after.port:
            reasons.append(f"port {before.port} → {after.port}")
        if reasons:
            changed.append((key, "; ".join(reasons)))
        else:
            unchanged.append(key)
    return BaselineChanges(
        added=tuple(sorted(set(new.cases) - set(old_cases))),
        removed=tuple(sorted(set(old_cases) - set(new.cases))),
        kept=tuple(sorted((k, w) for k, w in why.items() if k in new.cases)),
        moved=tuple(moved),
        points_changed=tuple(points_changed),
        changed=tuple(changed),
        unchanged=tuple(unchanged),
        inputs=tuple(inputs),
    )


def _moved(key: str, before: StoredCase, after: StoredCase, tolerance: Tolerance) -> Iterator[Moved]:
    for p in after.points:
        q_old = before.point(p.freq_hz)
        if q_old is None:
            continue
        for q in STORED:
            rel, ok = _judge(q_old.values.get(q), p.values.get(q), tolerance)
            if not ok:
                yield Moved(key, p.freq_hz, q, q_old.values.get(q), p.values.get(q), rel)


def _where(m: Moved) -> str:
    return f"{quantity_name(m.quantity)} at {format_eng(m.freq_hz, 6, ' Hz')} ({_percent(m.rel_err)})"


def format_changes(changes: BaselineChanges, path: str | Path) -> list[str]:
    """Lines for the terminal: the worst change first (case, quantity, frequency, relative change, and the
    elements that changed in its netlist), the counts, then one line per case: never one per point."""
    counts = (
        f"{len(changes.added)} added, {len(changes.changed)} changed, {len(changes.unchanged)} unchanged, "
        f"{len(changes.kept)} kept, {len(changes.removed)} removed"
    )
    lines = []
    by_case: dict[str, list[Moved]] = {}
    for m in changes.moved:
        by_case.setdefault(m.case, []).append(m)
    inputs = dict(changes.inputs)
    if changes.moved:
        w = max(changes.moved, key=lambda m: m.rel_err)
        because = f"; netlist: {inputs[w.case]}" if w.case in inputs else ""
        lines.append(
            f"worst change: {w.case} {quantity_name(w.quantity)} at {format_eng(w.freq_hz, 6, ' Hz')}, relative "
            f"change {_percent(w.rel_err)}{because}"
        )
    lines.append(f"baseline {path}: {counts}" + ("; no changes beyond tolerance" if changes.empty else ""))
    lines += [f"  added    {k}" for k in changes.added]
    lines += [f"  changed  {k} ({why})" for k, why in changes.changed]
    lines += [f"  kept     {k} ({why})" for k, why in changes.kept]
    lines += [f"  removed  {k} (not in this run; --prune)" for k in changes.removed]
    for case, moved in by_case.items():
        w = max(moved, key=lambda m: m.rel_err)
        lines.append(
            f"  moved    {case}: {len(moved)} value(s) beyond tolerance; worst {quantity_name(w.quantity)} at "
            f"{format_eng(w.freq_hz, 6, ' Hz')}: {_show(w.quantity, w.old)} → {_show(w.quantity, w.new)} "
            f"(relative change {_percent(w.rel_err)})"
        )
    return lines


@dataclass(frozen=True)
class UpdateReport:
    """What ``update_baseline_file`` did: the changes, and where a refused file was kept (or None)."""

    changes: BaselineChanges
    corrupt_kept_as: Path | None = None

    def lines(self, path: str | Path) -> list[str]:
        out = format_changes(self.changes, path)
        if self.corrupt_kept_as is not None:
            out.insert(
                0,
                f"baseline {path} could not be read; rewritten from this run's cases only, the refused file "
                f"is kept as {self.corrupt_kept_as}",
            )
        return out


def update_baseline_file(
    results: Sequence[Any], path: str | Path, *, prune: bool = False, replace_corrupt: bool = False
) -> UpdateReport:
    """Merge this run into the baseline file under its lock (read, merge, atomic write: see
    ``baseline_file``), so concurrent updates of different cases all land.

    A file that cannot be read stops the update with ``BaselineCorrupt`` unless ``replace_corrupt``:
    then it is moved aside as ``BASELINE.corrupt`` and the baseline is written from this run alone.
    """
    path = Path(path)
    kept_as = None
    with locked(path):
        try:
            old: Baseline | None = load_baseline(path) if path.exists() else None
        except BaselineCorrupt:
            if not replace_corrupt:
                raise
            kept_as, old = keep_corrupt(path), None
        new, kept = updated_baseline(results, path, old, prune=prune)
        changes = diff_baselines(old, new, kept)
        write_baseline(new, path)
    return UpdateReport(changes, kept_as)
