"""Design limits: ``function(quantity)`` within [min, max] at every computed frequency of a band.

A limit is a requirement, not a measurement: it has no tolerance. It is judged
only at the frequencies the case computes (its list or sweep), so a band with
no computed frequency cannot be judged and says so. The worst point is the one
with the least margin, the distance inside (+) or outside (−) the nearest bound
in the function's own unit (the quantity's unit, degrees for phase, dB for db).
"""

from __future__ import annotations

import cmath
import math
from collections.abc import Sequence

from crosscheck.judge.records import Cause, LimitCheck
from crosscheck.model.cases import Case, Limit
from crosscheck.model.values import format_eng
from crosscheck.own.equivalent import Equivalent
from crosscheck.vocabulary import Verdict, phasor_of, quantity_unit, same_frequency


def evaluate(function: str, value: complex) -> float:
    """abs and re/im in the quantity's unit, phase in degrees in (−180, 180], db = 20·log10|q|."""
    if function == "abs":
        return abs(value)
    if function == "re":
        return value.real
    if function == "im":
        return value.imag
    if function == "phase":
        angle = math.degrees(cmath.phase(value)) if value != 0 else 0.0
        return 180.0 if angle == -180.0 else angle
    if function == "db":
        return 20.0 * math.log10(abs(value)) if value != 0 else -math.inf
    raise ValueError(f"unknown limit function {function!r}; use abs, phase, re, im or db")


def unit(function: str, quantity: str) -> str:
    """The unit of ``function(quantity)``: degrees for phase, dB for db, else the quantity's own."""
    return {"phase": "°", "db": "dB"}.get(function) or quantity_unit(quantity)


def margin(value: float, minimum: float | None, maximum: float | None) -> float:
    """Distance to the nearest bound: positive inside, negative outside."""
    gaps = []
    if minimum is not None:
        gaps.append(value - minimum)
    if maximum is not None:
        gaps.append(maximum - value)
    return min(gaps)


def _bounds(limit: Limit, u: str) -> str:
    lo = "" if limit.minimum is None else f"{format_eng(limit.minimum, 4, ' ' + u)} <= "
    hi = "" if limit.maximum is None else f" <= {format_eng(limit.maximum, 4, ' ' + u)}"
    return f"{lo}{limit.text}{hi}"


def _in_band(f: float, band: tuple[float, float] | None) -> bool:
    if band is None:
        return True
    low, high = band
    return low <= f <= high or same_frequency(f, low) or same_frequency(f, high)


def check_limit(limit: Limit, own_equivalents: Sequence[Equivalent]) -> LimitCheck:
    """One limit over its band: pass, fail (with the worst point and how far out), or unavailable (why)."""
    u = unit(limit.function, limit.quantity)
    head = f"{_bounds(limit, u)} over {_band_text(limit.band)}"
    if limit.band is not None and limit.band[0] > limit.band[1]:
        return _record(
            limit, Verdict.UNAVAILABLE, why=f"{head}: the band's low edge is above its high edge; write [low, high]"
        )
    points = [eq for eq in own_equivalents if _in_band(eq.freq_hz, limit.band)]
    if not points:
        return _record(
            limit,
            Verdict.UNAVAILABLE,
            why=f"{head}: no computed frequency lies in the band; add frequencies (or a sweep) that cover it",
        )
    values, missing = _evaluate_points(limit, points)
    if not values:
        f, why = missing[0]
        return _record(
            limit,
            Verdict.UNAVAILABLE,
            why=f"{head}: {limit.quantity} does not exist at any frequency of the band "
            f"(at {format_eng(f, 4, ' Hz')}: {why})",
        )
    return _judge_values(limit, head, u, values, missing)


def _band_text(band: tuple[float, float] | None) -> str:
    """The band as the explanation names it."""
    if band is None:
        return "every computed frequency"
    return f"{format_eng(band[0], 4, ' Hz')} to {format_eng(band[1], 4, ' Hz')}"


def _evaluate_points(
    limit: Limit, points: Sequence[Equivalent]
) -> tuple[list[tuple[float, float]], list[tuple[float, str]]]:
    """``function(quantity)`` at each point of the band, and the points where the quantity does not exist (why)."""
    values: list[tuple[float, float]] = []
    missing: list[tuple[float, str]] = []
    for eq in points:
        q = phasor_of(eq, limit.quantity)
        if q is None:
            missing.append((eq.freq_hz, eq.note or f"no {limit.quantity} at this port"))
        else:
            values.append((eq.freq_hz, evaluate(limit.function, q)))
    return values, missing


def _judge_values(
    limit: Limit, head: str, u: str, values: list[tuple[float, float]], missing: list[tuple[float, str]]
) -> LimitCheck:
    """The verdict from the point with the least margin: broken, met only where the quantity exists, or met.

    A NaN margin counts as broken, so a value that cannot be compared never passes.
    """
    worst_f, worst_v = min(values, key=lambda fv: margin(fv[1], limit.minimum, limit.maximum))
    m = margin(worst_v, limit.minimum, limit.maximum)
    where = f"worst at {format_eng(worst_f, 4, ' Hz')}: {format_eng(worst_v, 5, ' ' + u)}"
    if m < 0 or math.isnan(m):
        outside = sum(1 for _, v in values if not margin(v, limit.minimum, limit.maximum) >= 0)
        why = (
            f"{head}: not met at {outside} of {len(values)} frequencies; {where}, "
            f"{format_eng(-m, 4, ' ' + u)} outside the bound"
        )
        return _record(limit, Verdict.FAIL, worst_f, worst_v, m, why, values)
    if missing:
        f, reason = missing[0]
        why = (
            f"{head}: met where it exists ({where}, margin {format_eng(m, 4, ' ' + u)}), but "
            f"{limit.quantity} does not exist at {len(missing)} frequency(ies) of the band "
            f"(at {format_eng(f, 4, ' Hz')}: {reason})"
        )
        return _record(limit, Verdict.UNAVAILABLE, worst_f, worst_v, m, why, values)
    why = f"{head}: met; {where}, margin {format_eng(m, 4, ' ' + u)}"
    return _record(limit, Verdict.PASS, worst_f, worst_v, m, why, values)


def _record(
    limit: Limit,
    verdict: Verdict,
    worst_f: float | None = None,
    worst_v: float | None = None,
    m: float | None = None,
    why: str = "",
    values: Sequence[tuple[float, float]] = (),
) -> LimitCheck:
    """The limit's record; the cause follows from the verdict (an unavailable limit has no value to judge)."""
    cause = {Verdict.PASS: Cause.LIMIT_HOLDS, Verdict.FAIL: Cause.LIMIT_BROKEN}.get(verdict, Cause.NO_VALUE)
    return LimitCheck(
        limit.index,
        limit.text,
        limit.function,
        limit.quantity,
        limit.minimum,
        limit.maximum,
        limit.band,
        worst_f,
        worst_v,
        m,
        verdict,
        why,
        tuple(values),
        cause,
    )


def check_limits(case: Case, own_equivalents: Sequence[Equivalent]) -> list[LimitCheck]:
    """Every [[limit]] of the case, in file order."""
    return [check_limit(limit, own_equivalents) for limit in case.limits]
