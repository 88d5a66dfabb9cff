"""ngspice at given part values: the reference route's answers for a spread (corners, samples, differences).

Each value set is the network with some varied parts moved (``model.vary.apply_values`` replaces the
elements' fields with ``dataclasses.replace``), sent through the same sandboxed pool and the same decks as
any case: nothing new reaches ngspice. All sets are submitted at once, so the pool's workers share them.

Central differences (the check of the own route's adjoint sensitivities). For a part p with nominal p0
the step is relative, p = p0·(1 ± h) and p0·(1 ± 2h), with ``STEP_REL`` h = 1e-3. The normalised
sensitivity of |q| (percent of |q| per percent of p) is

    D(h) = (|q(p0(1+h))| − |q(p0(1−h))|) / (2h·|q(p0)|),

and of the phase (degrees per percent of p) ∠(q₊/q₋) / (2h·100). Why h = 1e-3 and not the textbook
cbrt(ε) ≈ 6e-6: that rule assumes each answer is good to ε, but ngspice's answers are good only to
about δ = 1e3·κ·ε (threshold pivoting, see ``judge.compare``), so the rounding error of D is δ/h; and the
truncation error is h²·p0³·q'''/(6q), small unless the part sits on a sharp resonance of quality Q,
where it grows like (hQ)². h = 1e-3 puts rounding near 1e-10 (κ = 1e3) and truncation near 1e-7 for
Q ≤ 1, both far below the 1e-2 relative slips a wrong sensitivity makes.

The tolerance of the comparison is measured, not assumed: D(2h) − D(h) ≈ 3·c·h² estimates the
truncation of D(h) as |D(2h) − D(h)|/3, and Richardson's extrapolation D* = (4·D(h) − D(2h))/3 removes
that h² term, leaving O(h⁴). The own sensitivity is compared with D*; ``difference_tolerance`` allows
four times the truncation estimate of D(h) (a generous bound on D*'s error, itself first-order) plus twice
the rounding bound δ/h (D* carries at most 1.5 times D(h)'s), plus 1e-6 of |D| and 1e-9. A part on a sharp
resonance thus gets a wide tolerance, which every report states (``allowed``), not a false fail.

δ is measured too, where it can be: 1e3·κ·ε is a normwise bound, and an unscaled κ (picofarads beside
megohms) makes it absurd for one port quantity (a 1e11 κ gave an allowance of 31 for a sensitivity of 1,
a check that could not fail). ngspice's own error in that quantity at nominal values, |q_spice − q_own| /
|q_own|, is a direct measurement of the error each answer carries; δ is ten times that (a margin for the
four moved runs), at least 1e-12, and never more than the normwise bound.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from functools import cached_property
from typing import TYPE_CHECKING

from crosscheck.errors import CrosscheckError
from crosscheck.model.network import Network, Port
from crosscheck.model.vary import OwnSpread, VariedPart, apply_values
from crosscheck.spice.results import SpicePoint, SpiceResult

if TYPE_CHECKING:  # the pool is only passed through: importing it here would start no worker, but costs start-up time
    from crosscheck.spice.workers import SpicePool

#: The relative step of the central differences (see the module docstring for why 1e-3).
STEP_REL = 1e-3
#: Parts whose sensitivities ngspice checks by central differences: the most sensitive ones (4 runs each).
DEFAULT_CHECKED_PARTS = 8
#: Distinct worst-case corners ngspice re-runs at most (the limits' corners first); the rest are noted.
DEFAULT_MAX_CORNERS = 64
_QUANTITIES = ("vth", "zth", "in")
_EPS = 2.220446049250313e-16
_GROWTH = 1e3  # ngspice's threshold pivoting may grow the error by 1/pivrel (see judge.compare)


@dataclass(frozen=True)
class ValueSet:
    """Part values (``VariedPart.name`` -> value) ngspice solves at; ``label`` says what the set is for."""

    label: str
    values: Mapping[str, float]


@dataclass(frozen=True)
class ValueSetAnswer:
    """ngspice's answer at one value set: its result, or why there is none."""

    value_set: ValueSet
    result: SpiceResult | None
    error: str = ""

    def point(self, freq_index: int) -> SpicePoint | None:
        """The answer at the i-th requested frequency, or None when ngspice gave none."""
        if self.result is None or freq_index >= len(self.result.points):
            return None
        return self.result.points[freq_index]


@dataclass(frozen=True)
class Difference:
    """ngspice's central-difference sensitivity of one quantity to one part at one frequency.

    ``abs_pct`` (% of |q| per % of the part) and ``phase_deg`` (degrees per %) are Richardson's D* from
    the steps h and 2h;
    ``abs_trunc``/``phase_trunc`` estimate their truncation error, ``rounding`` their rounding bound
    (in % per %; for phase, in degrees per %: ``phase_rounding``).
    """

    part: str
    freq_hz: float
    quantity: str
    abs_pct: float
    phase_deg: float
    abs_trunc: float
    phase_trunc: float
    rounding: float
    phase_rounding: float
    step_rel: float


@dataclass(frozen=True)
class SpiceSpread:
    """ngspice's answers for one case's spread: nominal, corners, samples, and the central differences."""

    nominal: ValueSetAnswer
    corners: tuple[ValueSetAnswer, ...]
    samples: tuple[ValueSetAnswer, ...]
    differences: tuple[Difference, ...]
    checked_parts: tuple[str, ...]
    notes: tuple[str, ...] = ()

    @cached_property
    def _by_corner(self) -> dict[tuple[tuple[str, float], ...], ValueSetAnswer]:
        return {_key(c.value_set.values): c for c in self.corners}

    def corner_answer(self, values: Mapping[str, float]) -> ValueSetAnswer | None:
        """The answer at a corner (matched by its part values), or None when it was not run."""
        return self._by_corner.get(_key(values))


def _key(values: Mapping[str, float]) -> tuple[tuple[str, float], ...]:
    return tuple(sorted((k, float(v)) for k, v in values.items()))


def answers_at(
    pool: SpicePool,
    network: Network,
    port: Port,
    freqs: Sequence[float],
    parts: Sequence[VariedPart],
    sets: Sequence[ValueSet],
) -> tuple[ValueSetAnswer, ...]:
    """ngspice at every value set, all submitted before any is awaited; one set's failure is its own."""
    futures = [pool.submit(apply_values(network, parts, s.values), port, freqs) for s in sets]
    out = []
    for value_set, future in zip(sets, futures):
        try:
            out.append(ValueSetAnswer(value_set, future.result()))
        except CrosscheckError as exc:
            out.append(ValueSetAnswer(value_set, None, str(exc)))
    return tuple(out)


def checked_parts(own: OwnSpread, limit: int = DEFAULT_CHECKED_PARTS) -> tuple[str, ...]:
    """The ``limit`` parts with the largest sensitivity anywhere (|q| in % per %, phase in rad per %)."""
    size: dict[str, float] = {p.name: 0.0 for p in own.parts if p.nominal != 0.0}
    for point in own.points:
        for q in (point.vth, point.zth, point.in_):
            if q is None:
                continue
            for part, (s_abs, s_phase) in q.sensitivities.items():
                if part in size:
                    size[part] = max(size[part], abs(s_abs), abs(math.radians(s_phase)) * 100.0)
    ranked = sorted(size, key=lambda name: -size[name])
    return tuple(ranked[:limit])


def difference_sets(parts: Sequence[VariedPart], names: Iterable[str], step_rel: float = STEP_REL) -> list[ValueSet]:
    """Four sets per part, p0·(1 ± h) and p0·(1 ± 2h), labelled ``d:<part>:<multiple of h>``."""
    by_name = {p.name: p for p in parts}
    sets = []
    for name in names:
        p0 = by_name[name].nominal
        for k in (1, -1, 2, -2):
            sets.append(ValueSet(f"d:{name}:{k}", {name: p0 * (1.0 + k * step_rel)}))
    return sets


def corner_sets(own: OwnSpread, limit: int = DEFAULT_MAX_CORNERS) -> tuple[list[ValueSet], int]:
    """Distinct corners of the limits' extremes first, then of every worst case; and how many were left out."""
    found: dict[tuple[tuple[str, float], ...], Mapping[str, float]] = {}
    for lim in own.limits:
        for corner in (lim.lowest_corner, lim.highest_corner, lim.failing_corner):
            if corner:
                found.setdefault(_key(corner), corner)
    for point in own.points:
        for q in (point.vth, point.zth, point.in_):
            for extreme in q.worst_case.values() if q is not None else ():
                for corner in (extreme.min_corner, extreme.max_corner):
                    if corner:
                        found.setdefault(_key(corner), corner)
    corners = list(found.values())
    return [ValueSet(f"corner {i + 1}", c) for i, c in enumerate(corners[:limit])], max(0, len(corners) - limit)


def _phase_deg(a: complex, b: complex) -> float:
    """∠(a/b) in degrees, wrapped to (−180, 180]."""
    if a == 0 or b == 0:
        return 0.0
    return math.degrees(math.atan2((a / b).imag, (a / b).real))


def central_differences(
    nominal: ValueSetAnswer,
    answers: Sequence[ValueSetAnswer],
    freqs: Sequence[float],
    conditions: Sequence[float],
    step_rel: float = STEP_REL,
    own: OwnSpread | None = None,
) -> list[Difference]:
    """The sensitivities from ``difference_sets``' answers; ``conditions`` (the own route's κ per frequency)
    bound the rounding, and ``own``'s nominal values measure it (module docstring). A part or frequency
    without all five answers is left out."""
    by_label = {a.value_set.label: a for a in answers}
    names = dict.fromkeys(a.value_set.label.split(":")[1] for a in answers if a.value_set.label.startswith("d:"))
    out = []
    for name in names:
        runs = [by_label.get(f"d:{name}:{k}") for k in (1, -1, 2, -2)]
        for i, f in enumerate(freqs):
            points = [nominal.point(i)] + [r.point(i) if r is not None else None for r in runs]
            bound = _GROWTH * conditions[i] * _EPS if math.isfinite(conditions[i]) else math.inf
            for q in _QUANTITIES:
                values = [getattr(p, "isc" if q == "in" else q) if p is not None else None for p in points]
                first = values[0]
                if first is None or first == 0 or any(v is None or not _finite(v) for v in values):
                    continue
                delta = min(bound, _measured_error(own, i, q, first))
                out.append(_difference(name, f, q, values, step_rel, delta))
    return out


def _measured_error(own: OwnSpread | None, index: int, q: str, spice_nominal: complex) -> float:
    """Ten times ngspice's relative error in ``q`` at nominal values against the own route's, at least 1e-12;
    infinite (no measurement: the normwise bound stands) without the own route's nominal value."""
    if own is None or index >= len(own.points):
        return math.inf
    spread = getattr(own.points[index], "in_" if q == "in" else q)
    if spread is None or spread.nominal == 0 or not _finite(spread.nominal):
        return math.inf
    return max(10.0 * abs(spice_nominal - spread.nominal) / abs(spread.nominal), 1e-12)


def _finite(z: complex) -> bool:
    return math.isfinite(z.real) and math.isfinite(z.imag)


def _difference(name: str, f: float, q: str, values: list, h: float, delta: float) -> Difference:
    """D* = (4·D(h) − D(2h))/3 for |q| and phase, with D(h)'s truncation estimate |D(2h) − D(h)|/3."""
    q0, qp, qm, qp2, qm2 = values
    abs_h = (abs(qp) - abs(qm)) / (2 * h * abs(q0))
    abs_2h = (abs(qp2) - abs(qm2)) / (4 * h * abs(q0))
    ph_h = _phase_deg(qp, qm) / (2 * h * 100.0)
    ph_2h = _phase_deg(qp2, qm2) / (4 * h * 100.0)
    rounding = delta / h
    return Difference(
        name,
        f,
        q,
        (4.0 * abs_h - abs_2h) / 3.0,
        (4.0 * ph_h - ph_2h) / 3.0,
        abs(abs_2h - abs_h) / 3.0,
        abs(ph_2h - ph_h) / 3.0,
        rounding,
        math.degrees(rounding) / 100.0,
        h,
    )


def difference_tolerance(value: float, truncation: float, rounding: float) -> float:
    """What a sensitivity may differ from ngspice's central difference by (module docstring: why)."""
    return 4.0 * truncation + 2.0 * rounding + 1e-6 * abs(value) + 1e-9


def spice_spread(
    pool: SpicePool,
    network: Network,
    port: Port,
    freqs: Sequence[float],
    own: OwnSpread,
    conditions: Sequence[float],
    *,
    spice_samples: int = 20,
    parts_limit: int = DEFAULT_CHECKED_PARTS,
    corner_limit: int = DEFAULT_MAX_CORNERS,
) -> SpiceSpread:
    """ngspice at nominal, at the worst-case corners, at the first ``spice_samples`` Monte Carlo samples and
    at the central-difference steps of the most sensitive parts, in one batch through ``pool``."""
    names = checked_parts(own, parts_limit)
    corners, left_out = corner_sets(own, corner_limit)
    samples = [ValueSet(f"sample {i + 1}", v) for i, v in enumerate(own.sample_values[:spice_samples])]
    diffs = difference_sets(own.parts, names)
    everything = [ValueSet("nominal", {}), *corners, *samples, *diffs]
    answers = answers_at(pool, network, port, freqs, own.parts, everything)
    nominal = answers[0]
    corner_answers = answers[1 : 1 + len(corners)]
    sample_answers = answers[1 + len(corners) : 1 + len(corners) + len(samples)]
    diff_answers = answers[1 + len(corners) + len(samples) :]
    notes = []
    if left_out:
        notes.append(f"{left_out} further worst-case corner(s) were not re-run by ngspice (at most {corner_limit})")
    unchecked = len([p for p in own.parts if p.name not in names])
    if unchecked:
        notes.append(
            f"ngspice checked the sensitivities of the {len(names)} most sensitive part(s); {unchecked} other(s) "
            "were not checked by central differences"
        )
    differences = central_differences(nominal, diff_answers, freqs, conditions, own=own) if nominal.result else []
    return SpiceSpread(nominal, tuple(corner_answers), tuple(sample_answers), tuple(differences), names, tuple(notes))
