"""Verdicts as rows: a pandas DataFrame, and the findings every report words the same way.

The frame is the common currency of the tabular reports (CSV, summaries) and of
users' own analysis (``crosscheck verify --format csv`` and ``pandas.read_csv``):
one row per case, frequency and quantity, for the solver-vs-SPICE comparison and
for each hand-calculated expectation, design limit and baseline (drift) check.

A ``Finding`` is one judged item already put into words (what, where, obtained,
expected, how far off, why), so the pytest plugin, JUnit, Markdown and HTML
all tell a user the same thing about a case.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    import pandas as pd

from crosscheck.judge.multiport import MatrixPointCheck, element_unit
from crosscheck.judge.records import DriftCheck, ExpectationCheck, LimitCheck, PointCheck
from crosscheck.judge.result import CaseResult
from crosscheck.model.values import format_eng, format_polar
from crosscheck.report.spread_frame import SPREAD_CHECKS, spread_findings, spread_rows
from crosscheck.vocabulary import QUANTITIES, Verdict, quantity_unit

COLUMNS = [
    "case",
    "title",
    "port",
    "check",
    "freq_hz",
    "quantity",
    "own_re",
    "own_im",
    "spice_re",
    "spice_im",
    "expected_re",
    "expected_im",
    "limit_min",
    "limit_max",
    "band_lo_hz",
    "band_hi_hz",
    "margin",
    "err",
    "rel_err",
    "mag_err_pct",
    "phase_err_deg",
    "tolerance",
    "condition",
    "verdict",
    "explanation",
]

#: What each ``check`` value in the frame and in a Finding means.
CHECKS = {
    "spice": "crosscheck's own solver against ngspice",
    "expect": "a hand-calculated value ([[expect]]) against crosscheck's own solver",
    "limit": "a design limit ([[limit]]) over its band",
    "drift": "crosscheck's own solver against the stored baseline of an earlier run",
    "input": "the case could not be run (invalid input, or an engine crashed)",
    **SPREAD_CHECKS,
}

_LIMIT_UNITS = {"phase": "°", "db": "dB"}


def _re(z: complex | None) -> float:
    return math.nan if z is None else z.real


def _im(z: complex | None) -> float:
    return math.nan if z is None else z.imag


def _unit(quantity: str) -> str:
    return quantity_unit(quantity) if quantity in QUANTITIES else element_unit(quantity)  # z21: Ω, voc1: V ...


def severity(verdict: str) -> int:
    """Rank of a verdict (higher is worse); a verdict this module does not know ranks worst of all."""
    return Verdict(verdict).rank if verdict in Verdict._value2member_map_ else len(Verdict)


def limit_unit(check: LimitCheck) -> str:
    return _LIMIT_UNITS.get(check.function, _unit(check.quantity))


def _compared(r: CaseResult) -> list[PointCheck | MatrixPointCheck]:
    """The solver-vs-SPICE judgements: per point, and per matrix element of a multi-port case."""
    return [*r.points, *(r.multiport.checks if r.multiport is not None else ())]


def _spice_rows(r: CaseResult) -> list[dict]:
    rows = []
    for p in _compared(r):  # with several ports, a row per matrix element
        for q in p.quantities:
            rows.append(
                dict(
                    check="spice",
                    freq_hz=p.freq_hz,
                    quantity=q.quantity,
                    own_re=_re(q.own),
                    own_im=_im(q.own),
                    spice_re=_re(q.ref),
                    spice_im=_im(q.ref),
                    err=q.err,
                    rel_err=q.rel_err,
                    mag_err_pct=q.mag_err_pct,
                    phase_err_deg=q.phase_err_deg,
                    tolerance=r.tolerance.rel,
                    condition=p.condition,
                    verdict=q.verdict,
                    explanation=q.explanation,
                )
            )
    return rows


def _expect_row(e: ExpectationCheck) -> dict:
    return dict(
        check="expect",
        freq_hz=e.at_hz,
        quantity=e.quantity,
        own_re=_re(e.obtained),
        own_im=_im(e.obtained),
        expected_re=e.expected.real,
        expected_im=e.expected.imag,
        rel_err=e.rel_err,
        mag_err_pct=e.mag_err_pct,
        phase_err_deg=e.phase_err_deg,
        verdict=e.verdict,
        explanation=e.explanation,
        tolerance=math.nan,
    )


def _limit_row(c: LimitCheck) -> dict:
    lo, hi = c.band if c.band is not None else (math.nan, math.nan)
    return dict(
        check="limit",
        freq_hz=_nan(c.worst_freq_hz),
        quantity=c.text,
        own_re=_nan(c.worst_value),
        limit_min=_nan(c.minimum),
        limit_max=_nan(c.maximum),
        band_lo_hz=lo,
        band_hi_hz=hi,
        margin=_nan(c.margin),
        verdict=c.verdict,
        explanation=c.explanation,
        tolerance=math.nan,
    )


def _drift_row(d: DriftCheck) -> dict:
    # The baseline file states its own tolerance; the record does not carry it, so the column stays empty.
    return dict(
        check="drift",
        freq_hz=d.freq_hz,
        quantity=d.quantity,
        own_re=_re(d.obtained),
        own_im=_im(d.obtained),
        expected_re=_re(d.baseline),
        expected_im=_im(d.baseline),
        rel_err=d.rel_err,
        verdict=d.verdict,
        explanation=d.explanation,
        tolerance=math.nan,
    )


def _nan(x: float | None) -> float:
    return math.nan if x is None else float(x)


def verdict_frame(results: Sequence[CaseResult]) -> pd.DataFrame:
    """One row per case, check, frequency and quantity; columns in ``COLUMNS`` (see ``CHECKS`` for ``check``)."""
    rows = []
    for r in results:
        head = dict(case=r.name, title=r.title, port=f"{r.port[0]},{r.port[1]}", tolerance=r.tolerance.rel)
        if r.error:
            rows.append(head | dict(check="input", freq_hz=math.nan, quantity="", verdict="error", explanation=r.error))
        body = _spice_rows(r) + [_expect_row(e) for e in r.expectations] + [_limit_row(c) for c in r.limits]
        body += [_drift_row(d) for d in r.drift] + spread_rows(r)
        if r.multiport is not None:
            body += [_expect_row(e) for e in r.multiport.expectations] + [_limit_row(c) for c in r.multiport.limits]
        rows.extend(head | row for row in body)
    import pandas as pd  # start-up time: only the frame needs pandas, not the reports that word findings

    return pd.DataFrame(rows, columns=COLUMNS)


# --------------------------------------------------------------------------- findings in words


@dataclass(frozen=True)
class Finding:
    """One judged item of a case in words: ``obtained`` is always crosscheck's own value (or the case's)."""

    check: str  # a key of CHECKS
    label: str  # "zth vs SPICE", "expect[1] vth", "limit[2] abs(zth)", "drift vth"
    freq_hz: float | None
    obtained: str
    expected: str
    error: str  # how far off, against what tolerance or bound
    verdict: str
    why: str


def _polar(z: complex | None, unit: str) -> str:
    return "none" if z is None else format_polar(z, 6, " " + unit if unit else "")


def _pct(x: float) -> str:
    return "—" if x is None or not math.isfinite(x) else f"{x:.3g}"


def _spice_findings(r: CaseResult) -> list[Finding]:
    out = []
    for p in _compared(r):
        for q in p.quantities:
            error = "—" if math.isnan(q.err) else f"{q.err:.3g} (tolerance {r.tolerance.rel:.3g})"
            out.append(
                Finding(
                    "spice",
                    f"{q.quantity} vs SPICE",
                    p.freq_hz,
                    _polar(q.own, _unit(q.quantity)),
                    f"{_polar(q.ref, _unit(q.quantity))} (ngspice)",
                    error,
                    q.verdict,
                    q.explanation or p.explanation,
                )
            )
    return out


def _expect_finding(e: ExpectationCheck) -> Finding:
    unit = _unit(e.quantity)
    if e.quantity.startswith("series_"):
        obtained = "none" if e.obtained is None else format_eng(e.obtained.real, 6, " " + unit)
        expected = format_eng(e.expected.real, 6, " " + unit)
    else:
        obtained, expected = _polar(e.obtained, unit), _polar(e.expected, unit)
    error = f"{_pct(e.mag_err_pct)} % in magnitude, {_pct(e.phase_err_deg)}° in phase"
    why = e.explanation + (f" (likely slip: {e.slip})" if e.slip and e.slip not in e.explanation else "")
    return Finding(
        "expect", f"expect[{e.index}] {e.quantity}", e.at_hz, obtained, f"{expected} (by hand)", error, e.verdict, why
    )


def limit_bounds(c: LimitCheck) -> str:
    """'≥ 1 kΩ and ≤ 2 kΩ' in the limit's unit."""
    unit = " " + limit_unit(c)
    parts = ([f"≥ {format_eng(c.minimum, 4, unit)}"] if c.minimum is not None else []) + (
        [f"≤ {format_eng(c.maximum, 4, unit)}"] if c.maximum is not None else []
    )
    return " and ".join(parts)


def band_text(band: tuple[float, float] | None) -> str:
    if band is None:
        return "at every frequency of the case"
    return f"over {format_eng(band[0], 4, ' Hz')} … {format_eng(band[1], 4, ' Hz')}"


def _limit_finding(c: LimitCheck) -> Finding:
    unit = " " + limit_unit(c)
    obtained = "none" if c.worst_value is None else format_eng(c.worst_value, 6, unit)
    error = "—" if c.margin is None else f"margin {format_eng(c.margin, 4, unit)}"
    return Finding(
        "limit",
        f"limit[{c.index}] {c.text}",
        c.worst_freq_hz,
        obtained,
        f"{limit_bounds(c)} {band_text(c.band)}",
        error,
        c.verdict,
        c.explanation,
    )


def _drift_finding(d: DriftCheck) -> Finding:
    unit = _unit(d.quantity)
    error = "—" if math.isnan(d.rel_err) else f"{d.rel_err:.3g} relative"
    return Finding(
        "drift",
        f"drift {d.quantity}",
        d.freq_hz,
        _polar(d.obtained, unit),
        f"{_polar(d.baseline, unit)} (baseline)",
        error,
        d.verdict,
        d.explanation,
    )


def findings(result: CaseResult, include_pass: bool = False) -> list[Finding]:
    """Every judged item of the case, worst first (stable within a verdict); passes only when asked."""
    items: list[Finding] = []
    if result.error:
        items.append(Finding("input", "case", None, "—", "—", "—", "error", result.error))
    items += _spice_findings(result)
    items += [_expect_finding(e) for e in result.expectations]
    items += [_limit_finding(c) for c in result.limits]
    items += [_drift_finding(d) for d in result.drift]
    if result.multiport is not None:
        items += [_expect_finding(e) for e in result.multiport.expectations]
        items += [_limit_finding(c) for c in result.multiport.limits]
    items += [Finding(*fields) for fields in spread_findings(result)]
    if not include_pass:
        items = [f for f in items if f.verdict != "pass"]
    return sorted(items, key=lambda f: -severity(f.verdict))


def case_reason(result: CaseResult) -> str:
    """One sentence on why the case has its verdict: the first finding with that verdict, else the worst one."""
    found = findings(result)
    same = [f for f in found if f.verdict == result.verdict]
    if not (same or found):
        return result.explanation
    pick = (same or found)[0]
    where = f" at {format_eng(pick.freq_hz, 4, ' Hz')}" if pick.freq_hz is not None else ""
    if pick.check == "input":
        return pick.why
    return f"{pick.label}{where}: {pick.why}" if pick.why else f"{pick.label}{where}: {pick.verdict}"


def finding_table(found: Sequence[Finding], limit: int = 8) -> list[str]:
    """Findings as aligned plain-text lines (what, at, obtained, expected, off by), at most ``limit`` rows."""
    header = ("check", "at", "obtained (crosscheck)", "expected", "off by", "verdict")
    rows = [
        (
            f.label,
            "—" if f.freq_hz is None else format_eng(f.freq_hz, 4, " Hz"),
            f.obtained,
            f.expected,
            f.error,
            f.verdict,
        )
        for f in found[:limit]
        if f.check != "input"
    ]
    if not rows:
        return []
    widths = [max(len(row[i]) for row in [header, *rows]) for i in range(len(header))]
    lines = ["  ".join(cell.ljust(w) for cell, w in zip(row, widths)).rstrip() for row in [header, *rows]]
    if len(found) > limit:
        lines.append(f"… and {len(found) - limit} more")
    return lines


def overall_verdict(verdicts: Sequence[str]) -> str:
    """The run's verdict: the worst case verdict (``pass`` for no cases), in the order of ``vocabulary.Verdict``."""
    return max(verdicts, key=severity, default="pass")


def worst_spice_error(result: CaseResult) -> float | None:
    """Largest judged solver-vs-SPICE error of the case, or None when nothing was compared."""
    errs = [q.err for p in _compared(result) for q in p.quantities if not math.isnan(q.err)]
    return max(errs) if errs else None


def count_words(counts: Mapping[str, int] | Mapping[Verdict, int]) -> str:
    """'3 pass, 1 fail, 0 error, 0 unavailable' plus any other verdict that occurred (e.g. '1 drift')."""
    by_word = {str(v): n for v, n in counts.items()}
    shown = ["pass", "fail", "error", "unavailable"]
    shown += sorted((v for v in by_word if v not in shown), key=severity)
    return ", ".join(f"{by_word.get(v, 0)} {v}" for v in shown)
