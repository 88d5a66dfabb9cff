"""Judge a spread: ngspice's answers at corners, samples and difference steps against the own route's, and the
design limits over the spread.

Every confirmation is a ``SpreadCheck`` with a verdict, like any comparison of the two routes:

* ``sample``: the own route's phasor at a Monte Carlo sample against ngspice's at the same part values, by
  ``judge.compare.compare_quantity`` with the case's tolerance (the same rule as the nominal points);
* ``corner``: a worst-case extreme (|q|, phase, Re or Im) against that function of ngspice's answer at the
  extreme's corner; allowed: the case's tolerance taken on |q| (``_corner_allowed``);
* ``limit-corner``: a design limit's lowest and highest value over the spread against ngspice at that corner;
* ``sensitivity``: an adjoint sensitivity against ngspice's central difference, within the tolerance
  ``spice.spread.difference_tolerance`` measures from two step sizes.

A design limit over the spread (``SpreadLimitCheck``) holds when its function's extremes over the tolerance
box stay within its bounds at every frequency of its band, and fails at the corner that breaks it, named
with its part values; a limit that holds at nominal values but fails at a corner is a failure.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

from crosscheck.judge.compare import compare_quantity
from crosscheck.judge.limits import evaluate
from crosscheck.judge.records import Cause, LimitCheck
from crosscheck.model.cases import Limit
from crosscheck.model.tolerance import Tolerance
from crosscheck.model.values import format_eng
from crosscheck.model.vary import LimitSpread, OwnSpread, PointSpread, QuantitySpread
from crosscheck.own.equivalent import Equivalent
from crosscheck.spice.spread import Difference, SpiceSpread, ValueSetAnswer, difference_tolerance
from crosscheck.vocabulary import Verdict, quantity_unit, same_frequency, worst

_EPS = 2.220446049250313e-16
_GROWTH = 1e3  # as judge.compare: ngspice's threshold pivoting
_FUNCTION = {"abs": "abs", "phase_deg": "phase", "re": "re", "im": "im"}


@dataclass(frozen=True)
class SpreadCheck:
    """One confirmation of the spread by ngspice.

    ``kind``: "sample", "corner", "limit-corner" or "sensitivity"; ``function``: "phasor" (a sample), "abs", "phase_deg",
    "re", "im" (a corner's extreme, or the sensitivity of |q| or of the phase); ``subject``: the sample's
    label, "min"/"max" of a corner, or the part of a sensitivity; ``corner``: the part values ngspice ran.
    ``difference`` is |own − ngspice| in the function's unit (a relative error for samples), ``allowed`` its bound.
    """

    kind: str
    freq_hz: float
    quantity: str
    function: str
    subject: str
    own: complex | float
    spice: complex | float | None
    difference: float
    allowed: float
    verdict: Verdict
    explanation: str
    cause: Cause = Cause.AGREES
    corner: Mapping[str, float] | None = None


@dataclass(frozen=True)
class SpreadLimitCheck:
    """A design limit over the spread: "holds over spread" or "fails at corner …", and the own route's numbers."""

    index: int
    text: str
    verdict: Verdict
    explanation: str
    spread: LimitSpread
    nominal_verdict: Verdict | None
    cause: Cause = Cause.LIMIT_HOLDS


@dataclass(frozen=True)
class SampleValues:
    """Every Monte Carlo sample of V_th and Z_th at one frequency, for the report's histograms (I_N = V_th/Z_th)."""

    freq_hz: float
    vth: tuple[complex, ...]
    zth: tuple[complex, ...]


@dataclass(frozen=True)
class SpreadResult:
    """Everything known about a case's spread: the own route's answer, ngspice's confirmations, the limits."""

    own: OwnSpread
    checks: tuple[SpreadCheck, ...] = ()
    limits: tuple[SpreadLimitCheck, ...] = ()
    spice_note: str = ""  # why ngspice did not confirm (not run, failed), or ""
    notes: tuple[str, ...] = ()
    checked_parts: tuple[str, ...] = ()
    elapsed_own_s: float = 0.0
    elapsed_spice_s: float = 0.0
    histogram: SampleValues | None = None  # the samples at the frequency the report's figure shows

    @property
    def points(self) -> tuple[PointSpread, ...]:
        return self.own.points

    @property
    def verdicts(self) -> list[Verdict]:
        """Every verdict the spread adds to its case (the checks' and the limits')."""
        return [c.verdict for c in self.checks] + [lim.verdict for lim in self.limits]

    @property
    def verdict(self) -> Verdict:
        return worst(self.verdicts)

    def checks_at(self, freq_hz: float, quantity: str | None = None) -> list[SpreadCheck]:
        """The checks at one frequency (of one quantity when given)."""
        return [
            c
            for c in self.checks
            if same_frequency(c.freq_hz, freq_hz) and (quantity is None or c.quantity == quantity)
        ]


def corner_text(corner: Mapping[str, float] | None) -> str:
    """``R1 = 1.01 kΩ, C1 = 9.9 nF`` style, for explanations; a long corner is cut after six parts."""
    if not corner:
        return "nominal values"
    items = [f"{name} = {format_eng(value, 5)}" for name, value in corner.items()]
    return ", ".join(items[:6]) + (f" and {len(items) - 6} more" if len(items) > 6 else "")


def quantity_of(q: str, point: PointSpread) -> QuantitySpread | None:
    return point.in_ if q == "in" else getattr(point, q)


def _spice_value(answer: ValueSetAnswer | None, i: int, q: str) -> complex | None:
    p = answer.point(i) if answer is not None else None
    if p is None:
        return None
    value = p.isc if q == "in" else getattr(p, q)
    return value if value is None else complex(value)


def _roundoff(eq: Equivalent | None, magnitude: float) -> float:
    """1e3·κ·ε·|q|: what the condition allows on a value of this size (as ``judge.compare``)."""
    if eq is None or not math.isfinite(eq.condition):
        return 0.0
    return _GROWTH * eq.condition * _EPS * magnitude


def _scale(eq: Equivalent | None, q: str, value: complex) -> float:
    """The solution's size the quantity was read from, at nominal values (as ``judge.compare``); a sample
    stays within its tolerance of nominal, so the nominal solve's largest entry sizes its roundoff too."""
    if eq is None:
        return abs(value)
    if q == "vth":
        return max(eq.vth_scale, abs(value))
    if q == "zth":
        return max(eq.zth_scale, abs(value))
    if eq.zth and math.isfinite(eq.zth_scale):
        return max((eq.vth_scale + abs(value) * eq.zth_scale) / abs(eq.zth), abs(value))
    return abs(value)


def _corner_allowed(function: str, spice: complex, tol: Tolerance, eq: Equivalent | None) -> float:
    """|q|, Re, Im: max(rel·|q|, abs, roundoff) (a component near zero is held normwise); phase: that bound
    seen as an angle, or the tolerance's phase when it states one."""
    bound = max(tol.rel * abs(spice), tol.abs, _roundoff(eq, abs(spice)))
    if function != "phase_deg":
        return bound
    angle = math.degrees(bound / abs(spice)) if spice != 0 else 180.0
    return max(angle, tol.phase_deg or 0.0)


def _check(
    kind: str,
    f: float,
    q: str,
    function: str,
    subject: str,
    own: float,
    spice: float | None,
    allowed: float,
    corner: Mapping[str, float] | None,
    what: str,
) -> SpreadCheck:
    """A real-valued confirmation: pass within ``allowed``, fail beyond, unavailable without ngspice's value."""
    if spice is None or not math.isfinite(spice):
        why = f"{what}: ngspice gave no value"
        return SpreadCheck(
            kind,
            f,
            q,
            function,
            subject,
            own,
            None,
            math.nan,
            allowed,
            Verdict.UNAVAILABLE,
            why,
            Cause.REFERENCE_ABSENT,
            corner,
        )
    diff = abs(own - spice)
    if function in ("phase_deg", "phase"):
        diff = abs((own - spice + 180.0) % 360.0 - 180.0)
    if diff <= allowed:
        return SpreadCheck(
            kind, f, q, function, subject, own, spice, diff, allowed, Verdict.PASS, "", Cause.AGREES, corner
        )
    why = f"{what}: crosscheck {own:.6g}, ngspice {spice:.6g}, differ by {diff:.3g} (allowed {allowed:.3g})"
    return SpreadCheck(
        kind, f, q, function, subject, own, spice, diff, allowed, Verdict.FAIL, why, Cause.MODEL_DIFFERENCE, corner
    )


def _angle(function: str, value: complex) -> float:
    return evaluate(_FUNCTION[function], value)


def corner_checks(own: OwnSpread, spice: SpiceSpread, tol: Tolerance, eqs: Sequence[Equivalent | None]) -> list:
    """Each worst-case extreme against ngspice at its corner (one check per extreme that has a corner)."""
    out = []
    for i, point in enumerate(own.points):
        for q in ("vth", "zth", "in"):
            qs = quantity_of(q, point)
            for function, extreme in qs.worst_case.items() if qs is not None else ():
                for side, value, corner in (
                    ("min", extreme.minimum, extreme.min_corner),
                    ("max", extreme.maximum, extreme.max_corner),
                ):
                    if not corner or function not in _FUNCTION:
                        continue
                    answer = spice.corner_answer(corner)
                    if answer is None:
                        continue
                    z = _spice_value(answer, i, q)
                    s = _angle(function, z) if z is not None else None
                    allowed = _corner_allowed(function, z, tol, eqs[i]) if z is not None else math.nan
                    what = (
                        f"{side} of {function}({q}) at {format_eng(point.freq_hz, 4, ' Hz')}, {answer.value_set.label}"
                    )
                    out.append(_check("corner", point.freq_hz, q, function, side, value, s, allowed, corner, what))
    return out


def limit_corner_checks(
    own: OwnSpread, spice: SpiceSpread, limits: Sequence[Limit], tol: Tolerance, eqs: Sequence[Equivalent | None]
) -> list:
    """Each limit's lowest and highest value over the spread against ngspice at the same corner and frequency:
    a limit that fails at a corner fails by both engines' numbers. ``db`` is allowed 20·log10(1 + bound/|q|)."""
    by_index = {lim.index: lim for lim in limits}
    freqs = [p.freq_hz for p in own.points]
    out = []
    for ls in own.limits:
        limit = by_index.get(ls.index)
        for side, value, corner, hz in (("lowest", ls.lowest, ls.lowest_corner, ls.lowest_hz),
                                        ("highest", ls.highest, ls.highest_corner, ls.highest_hz)):  # fmt: skip
            i = next((k for k, f in enumerate(freqs) if same_frequency(f, hz)), None)
            answer = spice.corner_answer(corner) if corner else None
            if limit is None or i is None or answer is None:
                continue
            z = _spice_value(answer, i, limit.quantity)
            s = evaluate(limit.function, z) if z is not None else None
            if z is None or limit.function == "db":
                bound = max(tol.rel * abs(z), tol.abs, _roundoff(eqs[i], abs(z))) if z is not None else 0.0
                allowed = 20.0 * math.log10(1.0 + bound / abs(z)) if z else math.nan
            else:
                allowed = _corner_allowed({"phase": "phase_deg"}.get(limit.function, limit.function), z, tol, eqs[i])
            what = f"limit[{ls.index}] {ls.text}, its {side} value at {format_eng(hz, 4, ' Hz')}"
            out.append(
                _check("limit-corner", hz, limit.quantity, limit.function, side, value, s, allowed, corner, what)
            )
    return out


def sample_checks(own: OwnSpread, spice: SpiceSpread, tol: Tolerance, eqs: Sequence[Equivalent | None]) -> list:
    """The own route's phasor at each re-run Monte Carlo sample against ngspice's (``compare_quantity``)."""
    out = []
    for i, point in enumerate(own.points):
        for q in ("vth", "zth", "in"):
            qs = quantity_of(q, point)
            subset = qs.monte_carlo.subset if qs is not None and qs.monte_carlo is not None else ()
            for value, answer in zip(subset, spice.samples):
                z = _spice_value(answer, i, q)
                eq = eqs[i]
                condition = eq.condition if eq is not None else math.nan
                check = compare_quantity(q, value, z, tol, condition, _scale(eq, q, value), ref_note=answer.error)
                label = answer.value_set.label
                why = (
                    f"{label} at {format_eng(point.freq_hz, 4, ' Hz')}: {check.explanation}"
                    if check.explanation
                    else ""
                )
                out.append(
                    SpreadCheck(
                        "sample",
                        point.freq_hz,
                        q,
                        "phasor",
                        label,
                        value,
                        z,
                        check.err,
                        tol.rel,
                        check.verdict,
                        why,
                        check.cause,
                        answer.value_set.values,
                    )
                )
    return out


def sensitivity_checks(
    own: OwnSpread, spice: SpiceSpread, eqs: Sequence[Equivalent | None], notes: list[str] | None = None
) -> list:
    """Each checked part's adjoint sensitivity against ngspice's central difference.

    A quantity that is zero to rounding at nominal values (|q| <= 1e3·κ·ε·‖x‖, as ``judge.compare``) has no
    meaningful relative change: its sensitivities are left out, and ``notes`` (when given) says how many.
    """
    out = []
    at_rounding = 0
    freqs = [p.freq_hz for p in own.points]
    for d in spice.differences:
        i = next((k for k, f in enumerate(freqs) if same_frequency(f, d.freq_hz)), None)
        qs = quantity_of(d.quantity, own.points[i]) if i is not None else None
        if i is None or qs is None or d.part not in qs.sensitivities:
            continue
        if abs(qs.nominal) <= _roundoff(eqs[i], _scale(eqs[i], d.quantity, qs.nominal)):
            at_rounding += 2
            continue
        s_abs, s_phase = qs.sensitivities[d.part]
        out.extend(_sensitivity_pair(d, s_abs, s_phase))
    if at_rounding and notes is not None:
        notes.append(
            f"{at_rounding} sensitivity check(s) left out: the quantity is zero to rounding at nominal values, "
            "so its relative change has no meaning"
        )
    return out


def _sensitivity_pair(d: Difference, s_abs: float, s_phase: float) -> list[SpreadCheck]:
    at = f"{format_eng(d.freq_hz, 4, ' Hz')}"
    step = f"central difference, step ±{d.step_rel:g} and ±{2 * d.step_rel:g} of the part"
    return [
        _check(
            "sensitivity",
            d.freq_hz,
            d.quantity,
            "abs",
            d.part,
            s_abs,
            d.abs_pct,
            difference_tolerance(d.abs_pct, d.abs_trunc, d.rounding),
            None,
            f"sensitivity of |{d.quantity}| to {d.part} at {at} (% per %; {step})",
        ),
        _check(
            "sensitivity",
            d.freq_hz,
            d.quantity,
            "phase_deg",
            d.part,
            s_phase,
            d.phase_deg,
            difference_tolerance(d.phase_deg, d.phase_trunc, d.phase_rounding),
            None,
            f"sensitivity of the phase of {d.quantity} to {d.part} at {at} (° per %; {step})",
        ),
    ]


def limit_checks(own: OwnSpread, limits: Sequence[Limit], nominal: Sequence[LimitCheck]) -> list[SpreadLimitCheck]:
    """Each limit over the spread: holds, or fails at its corner (even where it holds at nominal values)."""
    by_index = {lim.index: lim for lim in limits}
    nominal_by_index = {c.index: c.verdict for c in nominal}
    out = []
    for ls in own.limits:
        limit = by_index.get(ls.index)
        u = "" if limit is None else {"phase": "°", "db": "dB"}.get(limit.function, quantity_unit(limit.quantity))
        nominal_verdict = nominal_by_index.get(ls.index)
        span = (
            f"{format_eng(ls.lowest, 5, ' ' + u)} ({ls.lowest_method}) to "
            f"{format_eng(ls.highest, 5, ' ' + u)} ({ls.highest_method})"
        )
        if ls.holds:
            why = f"{ls.text}: holds over spread; from {span}"
            out.append(SpreadLimitCheck(ls.index, ls.text, Verdict.PASS, why, ls, nominal_verdict))
            continue
        at = format_eng(ls.failing_hz, 4, " Hz") if ls.failing_hz is not None else "?"
        fraction = (
            f"; {100 * ls.violating_fraction:.3g} % of Monte Carlo samples break it"
            if ls.violating_fraction is not None
            else ""
        )
        also = " (it holds at nominal values)" if nominal_verdict == Verdict.PASS else ""
        why = f"{ls.text}: fails at corner {corner_text(ls.failing_corner)} at {at}{also}; spread {span}{fraction}"
        out.append(SpreadLimitCheck(ls.index, ls.text, Verdict.FAIL, why, ls, nominal_verdict, Cause.LIMIT_BROKEN))
    return out


def judge_spread(
    own: OwnSpread,
    spice: SpiceSpread | None,
    tol: Tolerance,
    equivalents: Sequence[Equivalent],
    limits: Sequence[Limit] = (),
    nominal_limits: Sequence[LimitCheck] = (),
    spice_note: str = "",
) -> SpreadResult:
    """The spread's judgement: ngspice's confirmations (when it ran) and the limits over the spread."""
    eqs: list[Equivalent | None] = list(equivalents) + [None] * (len(own.points) - len(equivalents))
    checks: list[SpreadCheck] = []
    notes = list(own.notes)
    names: tuple[str, ...] = ()
    if spice is not None:
        if spice.nominal.result is None:
            spice_note = spice_note or f"ngspice failed at nominal values: {spice.nominal.error}"
        checks = [
            *sensitivity_checks(own, spice, eqs, notes),
            *corner_checks(own, spice, tol, eqs),
            *limit_corner_checks(own, spice, limits, tol, eqs),
            *sample_checks(own, spice, tol, eqs),
        ]
        notes.extend(spice.notes)
        names = spice.checked_parts
    return SpreadResult(
        own, tuple(checks), tuple(limit_checks(own, limits, nominal_limits)), spice_note, tuple(notes), names
    )
