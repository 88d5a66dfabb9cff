"""The spread in JSON: per point ``spread.{vth,zth,in}`` with the full numbers, and per case the parts,
the limits over the spread and what ngspice confirmed.

Per quantity: ``nominal`` (a phasor), ``sensitivities`` (part -> ``{abs, phase_deg}``: % change of |q| and
degrees per % change of the part, ranked by |abs|), ``worst_case`` (``abs``, ``phase_deg``, ``re``, ``im``,
each ``{min, max, min_corner, max_corner, min_method, max_method}``, corners as part -> value),
``monte_carlo`` (``samples``, ``seed``, ``percentiles`` of ``abs`` and ``phase_deg``, the worst sample) and
``spice_checks`` (each ngspice confirmation with its verdict).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

from crosscheck.judge.result import CaseResult
from crosscheck.judge.spread import SpreadCheck, SpreadResult, quantity_of
from crosscheck.model.vary import Extreme, MonteCarlo, QuantitySpread
from crosscheck.report.caution import SPREAD_CAUTION
from crosscheck.vocabulary import phasor_json


def _num(x: Any) -> Any:
    """A real as JSON has it (NaN as null, infinities in words); a complex as a phasor object."""
    if x is None:
        return None
    if isinstance(x, complex):
        return phasor_json(x)
    x = float(x)
    return None if math.isnan(x) else (x if math.isfinite(x) else repr(x))


def _corner(corner: Mapping[str, float] | None) -> dict[str, Any] | None:
    return None if corner is None else {k: _num(v) for k, v in corner.items()}


def _extreme(e: Extreme) -> dict[str, Any]:
    return {
        "min": _num(e.minimum),
        "max": _num(e.maximum),
        "min_corner": _corner(e.min_corner),
        "max_corner": _corner(e.max_corner),
        "min_method": e.min_method,
        "max_method": e.max_method,
        "first_order_min": _num(e.first_order_min),
        "first_order_max": _num(e.first_order_max),
    }


def _monte_carlo(mc: MonteCarlo | None) -> dict[str, Any] | None:
    if mc is None:
        return None
    return {
        "samples": mc.samples,
        "seed": mc.seed,
        "percentiles": {
            "abs": {f"{p:g}": _num(v) for p, v in mc.abs_percentiles.items()},
            "phase_deg": {f"{p:g}": _num(v) for p, v in mc.phase_percentiles.items()},
        },
        "worst_sample": {"index": mc.worst_index, "value": _num(mc.worst_value), "values": _corner(mc.worst_values)},
    }


def check_document(c: SpreadCheck) -> dict[str, Any]:
    """One ngspice confirmation: what was compared, both numbers, the bound and the verdict."""
    return {
        "kind": c.kind,
        "function": c.function,
        "subject": c.subject,
        "own": _num(c.own),
        "spice": _num(c.spice),
        "difference": _num(c.difference),
        "allowed": _num(c.allowed),
        "verdict": c.verdict,
        "explanation": c.explanation or None,
        "corner": _corner(c.corner) if c.kind in ("corner", "limit-corner") else None,
    }


def ranked(sensitivities: Mapping[str, tuple[float, float]]) -> list[tuple[str, float, float]]:
    """(part, % per %, ° per %), largest |% per %| first (ties: largest |° per %|)."""
    return sorted(((p, a, b) for p, (a, b) in sensitivities.items()), key=lambda t: (-abs(t[1]), -abs(t[2])))


def quantity_document(qs: QuantitySpread | None, checks: list[SpreadCheck]) -> dict[str, Any] | None:
    if qs is None:
        return None
    return {
        "nominal": phasor_json(qs.nominal),
        "sensitivities": {p: {"abs": _num(a), "phase_deg": _num(b)} for p, a, b in ranked(qs.sensitivities)},
        "worst_case": {fn: _extreme(e) for fn, e in qs.worst_case.items()},
        "monte_carlo": _monte_carlo(qs.monte_carlo),
        "spice_checks": [check_document(c) for c in checks],
    }


def point_spread_document(spread: SpreadResult, index: int) -> dict[str, Any] | None:
    """``points[index].spread``: each quantity's spread at that frequency."""
    if index >= len(spread.points):
        return None
    point = spread.points[index]
    return {
        q: quantity_document(quantity_of(q, point), spread.checks_at(point.freq_hz, q)) for q in ("vth", "zth", "in")
    }


def spread_document(spread: SpreadResult) -> dict[str, Any]:
    """The case's ``spread``: parts, limits over the spread, what ngspice checked, verdict and timing."""
    return {
        "verdict": spread.verdict,
        "parts": [
            {
                "name": p.name,
                "element": p.element,
                "parameter": p.parameter,
                "nominal": _num(p.nominal),
                "low": _num(p.low),
                "high": _num(p.high),
                "dist": p.dist,
                "group": p.group,
            }
            for p in spread.own.parts
        ],
        "limits": [
            {
                "index": lim.index,
                "limit": lim.text,
                "verdict": lim.verdict,
                "nominal_verdict": lim.nominal_verdict,
                "explanation": lim.explanation,
                "lowest": _num(lim.spread.lowest),
                "highest": _num(lim.spread.highest),
                "lowest_corner": _corner(lim.spread.lowest_corner),
                "highest_corner": _corner(lim.spread.highest_corner),
                "failing_corner": _corner(lim.spread.failing_corner),
                "failing_hz": _num(lim.spread.failing_hz),
                "violating_fraction": _num(lim.spread.violating_fraction),
            }
            for lim in spread.limits
        ],
        "spice_checked_parts": list(spread.checked_parts),
        "spice_checks": {
            "total": len(spread.checks),
            "failed": sum(1 for c in spread.checks if c.verdict == "fail"),
            "unavailable": sum(1 for c in spread.checks if c.verdict == "unavailable"),
        },
        "spice_note": spread.spice_note or None,
        "caution": SPREAD_CAUTION,
        "notes": list(spread.notes),
        "elapsed_s": {"own": spread.elapsed_own_s, "spice": spread.elapsed_spice_s},
    }


def add_spread(points: list[dict[str, Any]], result: CaseResult) -> None:
    """Give each point document (in frequency order) its ``spread``, when the case has one."""
    if result.spread is None:
        return
    for i, doc in enumerate(points):
        doc["spread"] = point_spread_document(result.spread, i)
