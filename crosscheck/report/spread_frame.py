"""The spread's judgements as frame rows (CSV) and as findings (JUnit, markdown, HTML, the pytest plugin).

``report.frame`` calls these, so every tabular and worded report carries the spread the same way:

* ``check`` = ``caution``, ``quantity`` = ``spread``: what the spread covers (``caution.SPREAD_CAUTION``);
* ``check`` = ``spread-limit``: a design limit over the spread (``own_re`` the lowest value of its function,
  ``own_im`` the highest, ``limit_min``/``limit_max`` its bounds, the explanation naming a failing corner);
* ``check`` = ``spread-sensitivity`` / ``spread-corner`` / ``spread-limit-corner`` / ``spread-sample``: one
  ngspice confirmation
  (``own_*`` crosscheck's number, ``spice_*`` ngspice's, ``err`` their difference, ``tolerance`` the bound).

Findings are plain tuples in ``frame.Finding``'s field order (this module cannot import ``frame``, which
imports it): every limit over the spread, every confirmation that did not pass, and one line counting those
that did.
"""

from __future__ import annotations

import math
from typing import Any

from crosscheck.judge.result import CaseResult
from crosscheck.judge.spread import SpreadCheck
from crosscheck.model.values import format_eng
from crosscheck.report.caution import SPREAD_CAUTION

#: What each spread ``check`` value means (joined into ``frame.CHECKS``).
SPREAD_CHECKS = {
    "spread-limit": "a design limit ([[limit]]) over the component spread: holds at every corner, or fails at one",
    "spread-sensitivity": "a sensitivity against ngspice's central difference",
    "spread-corner": "a worst-case extreme against ngspice at its corner",
    "spread-sample": "a Monte Carlo sample against ngspice at the same part values",
    "spread-limit-corner": "a design limit's lowest or highest value over the spread against ngspice at its corner",
}


def _parts(x: Any) -> tuple[float, float]:
    if x is None:
        return math.nan, math.nan
    if isinstance(x, complex):
        return x.real, x.imag
    return float(x), math.nan


def _what(c: SpreadCheck) -> str:
    if c.kind == "sensitivity":
        return f"{'|' + c.quantity + '|' if c.function == 'abs' else 'phase of ' + c.quantity} to {c.subject}"
    if c.kind == "corner":
        return f"{c.subject} of {c.function}({c.quantity})"
    if c.kind == "limit-corner":
        return f"{c.subject} of the limit on {c.function}({c.quantity})"
    return f"{c.quantity} at {c.subject}"


def spread_rows(result: CaseResult) -> list[dict[str, Any]]:
    """Frame rows for the case's spread (none without one)."""
    spread = result.spread
    if spread is None:
        return []
    rows: list[dict[str, Any]] = [dict(check="caution", quantity="spread", explanation=SPREAD_CAUTION)]
    for lim in spread.limits:
        rows.append(
            dict(
                check="spread-limit",
                freq_hz=math.nan if lim.spread.failing_hz is None else lim.spread.failing_hz,
                quantity=lim.text,
                own_re=lim.spread.lowest,
                own_im=lim.spread.highest,
                limit_min=math.nan if lim.spread.minimum is None else lim.spread.minimum,
                limit_max=math.nan if lim.spread.maximum is None else lim.spread.maximum,
                verdict=lim.verdict,
                explanation=lim.explanation,
            )
        )
    for c in spread.checks:
        own_re, own_im = _parts(c.own)
        spice_re, spice_im = _parts(c.spice)
        rows.append(
            dict(
                check=f"spread-{c.kind}",
                freq_hz=c.freq_hz,
                quantity=c.quantity,
                own_re=own_re,
                own_im=own_im,
                spice_re=spice_re,
                spice_im=spice_im,
                err=c.difference,
                tolerance=c.allowed,
                verdict=c.verdict,
                explanation=f"{_what(c)}: {c.explanation}" if c.explanation else _what(c),
            )
        )
    return rows


def _number(x: Any) -> str:
    if x is None:
        return "none"
    if isinstance(x, complex):
        return f"{x.real:.6g}{x.imag:+.6g}j"
    return f"{x:.6g}"


def spread_findings(result: CaseResult) -> list[tuple]:
    """(check, label, freq_hz, obtained, expected, error, verdict, why) for ``frame.Finding``."""
    spread = result.spread
    if spread is None:
        return []
    out: list[tuple] = []
    for lim in spread.limits:
        s = lim.spread
        span = f"{format_eng(s.lowest, 5)} … {format_eng(s.highest, 5)}"
        bounds = " and ".join(
            ([f"≥ {format_eng(s.minimum, 4)}"] if s.minimum is not None else [])
            + ([f"≤ {format_eng(s.maximum, 4)}"] if s.maximum is not None else [])
        )
        out.append(
            ("spread-limit", f"limit[{lim.index}] {lim.text} over spread", s.failing_hz, span, bounds,
             "holds" if lim.verdict == "pass" else "fails at a corner", lim.verdict, lim.explanation)
        )  # fmt: skip
    passed = 0
    for c in spread.checks:
        if c.verdict == "pass":
            passed += 1
            continue
        out.append(
            (f"spread-{c.kind}", f"spread {c.kind}: {_what(c)}", c.freq_hz, _number(c.own),
             f"{_number(c.spice)} (ngspice)", f"{_number(c.difference)} (allowed {_number(c.allowed)})", c.verdict,
             c.explanation)
        )  # fmt: skip
    if spread.checks:
        out.append(
            ("spread-corner", "spread: ngspice confirmations", None, f"{passed} of {len(spread.checks)} passed", "all",
             "—", "pass", "")
        )  # fmt: skip
    elif spread.spice_note:
        out.append(
            ("spread-corner", "spread: ngspice confirmations", None, "none", "—", "—", "pass", spread.spice_note)
        )
    return out
