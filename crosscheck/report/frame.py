"""Verdicts as a pandas DataFrame: one row per case, frequency and quantity.

The frame is the common currency of the tabular reports (CSV, summaries) and of
users' own analysis (``crosscheck verify --format csv`` and ``pandas.read_csv``).
"""

from __future__ import annotations

import math
from typing import Sequence

import pandas as pd

from ..check import CaseResult

COLUMNS = ["case", "title", "port", "freq_hz", "quantity", "own_re", "own_im", "spice_re", "spice_im",
           "err", "rel_err", "mag_err_pct", "phase_err_deg", "tolerance", "condition", "verdict", "explanation"]


def _re(z: complex | None) -> float:
    return math.nan if z is None else z.real


def _im(z: complex | None) -> float:
    return math.nan if z is None else z.imag


def verdict_frame(results: Sequence[CaseResult]) -> pd.DataFrame:
    rows = []
    for r in results:
        port = f"{r.port[0]},{r.port[1]}"
        if r.error and not r.points:
            rows.append(dict(case=r.name, title=r.title, port=port, freq_hz=math.nan, quantity="",
                             verdict="error", explanation=r.error, tolerance=r.tolerance.rel))
            continue
        for p in r.points:
            for q in p.quantities:
                rows.append(dict(case=r.name, title=r.title, port=port, freq_hz=p.freq_hz, quantity=q.quantity,
                                 own_re=_re(q.own), own_im=_im(q.own), spice_re=_re(q.ref), spice_im=_im(q.ref),
                                 err=q.err, rel_err=q.rel_err, mag_err_pct=q.mag_err_pct,
                                 phase_err_deg=q.phase_err_deg, tolerance=r.tolerance.rel, condition=p.condition,
                                 verdict=q.verdict, explanation=q.explanation))
        for extra in r.extra.get("rows", []):
            rows.append(dict(case=r.name, title=r.title, port=port, tolerance=r.tolerance.rel) | extra)
    return pd.DataFrame(rows, columns=COLUMNS)
