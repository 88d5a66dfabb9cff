"""JSON documents of checked cases: every engine's numbers, the errors and the verdicts.

Cautions come first after the summary: ``cautions`` lists each case that has its own (a hazard
``judge.hazards`` flagged, worded by ``report.caution``, or the case file's ``caution``), and each case's
``caution`` holds the numbers behind it (levels as RMS, or DC, with the limits they were held against).
The general ``caution`` stays last.
"""

from __future__ import annotations

import math
from collections import Counter
from collections.abc import Sequence
from typing import Any

from crosscheck.judge.hazards import Level
from crosscheck.judge.result import CaseResult
from crosscheck.report.caution import CAUTION, case_caution, case_cautions
from crosscheck.report.equivalents_json import own_point
from crosscheck.report.multiport_json import multiport_document
from crosscheck.report.read_warnings import warned, warning_document
from crosscheck.report.spread_json import add_spread, spread_document
from crosscheck.version import __version__
from crosscheck.vocabulary import Verdict
from crosscheck.vocabulary import phasor_json as phasor


def _num(x: float) -> Any:
    return None if x is None or (isinstance(x, float) and math.isnan(x)) else (x if math.isfinite(x) else repr(x))


def _spice_point(point: Any) -> dict[str, Any]:
    return {
        "vth": phasor(point.vth),
        "zth": phasor(point.zth),
        "in": phasor(point.isc),
        "yn": phasor(None if point.zth in (None, 0) else 1 / point.zth),
        "freq_hz_reported": point.freq_hz,
        "route_mismatch": _num(point.route_mismatch),
        "notes": list(point.notes) or None,
    }


def points_document(result: CaseResult) -> list[dict[str, Any]]:
    out = []
    spice_points = list(result.spice.points) if result.spice is not None else []
    for i, eq in enumerate(result.own or []):
        doc: dict[str, Any] = {"freq_hz": eq.freq_hz, "own": own_point(eq)}
        if result.points or result.spice is not None or result.spice_note:
            doc["spice"] = _spice_point(spice_points[i]) if i < len(spice_points) else None
            if doc["spice"] is None:
                doc["spice_note"] = result.spice_note or "ngspice was not run"
        if result.points:
            check = result.points[i]
            doc["errors"] = {
                q.quantity: {
                    "err": _num(q.err),
                    "rel_err": _num(q.rel_err),
                    "mag_err_pct": _num(q.mag_err_pct),
                    "phase_err_deg": _num(q.phase_err_deg),
                    "verdict": q.verdict,
                    "explanation": q.explanation or None,
                }
                for q in check.quantities
            }
            doc["verdict"] = check.verdict
            doc["explanation"] = check.explanation or None
        out.append(doc)
    add_spread(out, result)
    return out


def expectation_document(e: Any) -> dict[str, Any]:
    return {
        "index": e.index,
        "at_hz": e.at_hz,
        "quantity": e.quantity,
        "expected": phasor(e.expected),
        "obtained": phasor(e.obtained),
        "rel_err": _num(e.rel_err),
        "mag_err_pct": _num(e.mag_err_pct),
        "mag_err_db": _num(e.mag_err_db),
        "phase_err_deg": _num(e.phase_err_deg),
        "verdict": e.verdict,
        "slip": e.slip,
        "explanation": e.explanation or None,
        "how": e.how or None,
    }


def limit_document(lim: Any) -> dict[str, Any]:
    return {
        "index": lim.index,
        "text": lim.text,
        "function": lim.function,
        "quantity": lim.quantity,
        "min": _num(lim.minimum),
        "max": _num(lim.maximum),
        "band_hz": list(lim.band) if lim.band is not None else None,
        "worst_freq_hz": _num(lim.worst_freq_hz),
        "worst_value": _num(lim.worst_value),
        "margin": _num(lim.margin),
        "verdict": lim.verdict,
        "explanation": lim.explanation or None,
        "values": [[f, _num(v)] for f, v in lim.values],
    }


def drift_document(d: Any) -> dict[str, Any]:
    return {
        "freq_hz": d.freq_hz,
        "quantity": d.quantity,
        "baseline": phasor(d.baseline),
        "obtained": phasor(d.obtained),
        "rel_err": _num(d.rel_err),
        "verdict": d.verdict,
        "explanation": d.explanation or None,
    }


def reading_document(result: CaseResult) -> dict[str, Any] | None:
    """The reading check (ngspice reading the netlist's own lines against the own route), or None."""
    r = result.reading
    if r is None:
        return None
    return {
        "verdict": r.verdict,
        "cause": r.cause,
        "worst_rel_err": _num(r.worst_rel_err),
        "freq_hz": r.freq_hz,
        "line": r.line or None,
        "elements": list(r.elements),
        "explanation": r.explanation or None,
    }


def checks_document(result: CaseResult) -> dict[str, Any]:
    """Hand-calculated expectations, design limits and baseline drift of one case."""
    return {
        "expectations": [expectation_document(e) for e in result.expectations],
        "limits": [limit_document(lim) for lim in result.limits],
        "drift": [drift_document(d) for d in result.drift],
        "baseline_note": getattr(result, "baseline_note", "") or None,
    }


def _level_document(level: Level | None, unit: str) -> dict[str, Any] | None:
    if level is None:
        return None
    return {
        "value": _num(level.value),
        "unit": f"{unit} DC" if level.dc else f"{unit} RMS",
        "freq_hz": level.freq_hz,
        "from_peak": level.from_peak,  # true: a peak phasor divided by sqrt(2)
        "limit": level.limit,
        "above": level.above,
    }


def caution_document(result: CaseResult) -> dict[str, Any]:
    """The case's own caution: the hazard judgement's numbers and words, and the case file's text."""
    hazard = result.hazard
    found = case_caution(result)
    return {
        "hazard": None
        if hazard is None
        else {
            "flagged": hazard.flagged,
            "above_extra_low_voltage": hazard.above_elv,
            "high_prospective_current": hazard.high_current,
            "source_voltage": _level_document(hazard.source, "V"),
            "prospective_current": _level_document(hazard.current, "A"),
        },
        "text": (found.hazard or None) if found is not None else None,
        "stated": result.stated_caution or None,
    }


def case_document(result: CaseResult) -> dict[str, Any]:
    doc: dict[str, Any] = {
        "case": result.name,
        "title": result.title,
        "caution": caution_document(result),
        "port": list(result.port),
        "sources": result.sources,
        "excitation": result.excitation,
        "tolerance": {
            "rel": result.tolerance.rel,
            "abs": result.tolerance.abs,
            "phase_deg": result.tolerance.phase_deg,
        },
        "verdict": result.verdict,
        "error": result.error,
        "points": points_document(result),
        "reading": reading_document(result),
        "elapsed_s": {"own": result.elapsed_own_s, "spice": result.elapsed_spice_s},
        **checks_document(result),
        **read_document(result),
    }
    if result.spice is not None:
        doc["spice_strategy"] = result.spice.strategy
    if result.multiport is not None:  # several ports: the matrices and their judgements (``multiport_json``)
        doc["multiport"] = multiport_case_document(result)
    if result.spread is not None:
        doc["spread"] = spread_document(result.spread)
    return doc


def multiport_case_document(result: CaseResult) -> dict[str, Any] | None:
    """The ``multiport`` object: ports, points (own, spice, element verdicts), hand values and limits."""
    part = result.multiport
    if part is None:
        return None
    return {
        **multiport_document(part),
        "expectations": [expectation_document(e) for e in part.expectations],
        "limits": [limit_document(lim) for lim in part.limits],
    }


def read_document(result: CaseResult) -> dict[str, Any]:
    """What reading said: unacknowledged ``warnings``, ``accepted_warnings`` (the case file's
    ``accept_warnings``), and every note."""
    return {
        "warnings": [warning_document(w) for w in result.open_warnings],
        "accepted_warnings": [warning_document(w) for w in result.accepted_warnings],
        "notes": list(result.read_notes),
    }


def run_warnings(results: Sequence[CaseResult]) -> list[dict[str, Any]]:
    """Every unacknowledged warning of the run, each with its case, for the top of the document."""
    return [{"case": r.name, **warning_document(w)} for _i, r in warned(results) for w in r.open_warnings]


def ngspice_version(results: Sequence[CaseResult]) -> str | None:
    return next((r.spice.ngspice_version for r in results if r.spice is not None), None)


def summary(results: Sequence[CaseResult]) -> dict[str, int]:
    counts = Counter(r.verdict for r in results)
    return {"cases": len(results), **{v: counts.get(v, 0) for v in Verdict}}


def results_document(results: Sequence[CaseResult]) -> dict[str, Any]:

    return {
        "crosscheck_version": __version__,
        "ngspice_version": ngspice_version(results),
        "summary": summary(results),
        "cautions": [{"case": c.name, "lines": c.lines()} for c in case_cautions(results)],
        "warnings": run_warnings(results),
        "cases": [case_document(r) for r in results],
        "caution": CAUTION,
    }
