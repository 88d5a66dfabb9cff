"""The spread in the markdown report: per case with a spread, its limits over the spread, ngspice's
confirmations counted, and the worst case of |q| with its corners (the full numbers are in the JSON report).

Part names and explanations are user text: they go through the markdown writer's own cell escaping
(``cell``, passed in, so this module does not import ``markdown``, which imports it).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence

from crosscheck.judge.result import CaseResult
from crosscheck.judge.spread import quantity_of
from crosscheck.model.values import format_eng
from crosscheck.report.caution import SPREAD_CAUTION
from crosscheck.report.spread_json import ranked
from crosscheck.report.spread_text import corner_words, spread_summary
from crosscheck.vocabulary import quantity_name, quantity_unit


def spread_lines(results: Sequence[CaseResult], cell: Callable[[object], str]) -> list[str]:
    """Markdown lines for every case that analyses spread ([] when none does)."""
    cases = [r for r in results if r.spread is not None]
    if not cases:
        return []
    lines = ["#### Component spread", "", f"> {SPREAD_CAUTION}", ""]
    for r in cases:
        spread = r.spread
        assert spread is not None
        lines += [f"{cell(r.name)}: {cell(spread_summary(spread))}", ""]
        for lim in spread.limits:
            lines.append(f"- limit over spread, **{lim.verdict}**: {cell(lim.explanation)}")
        lines += [
            "",
            "| f | qty | min abs | min corner | max abs | max corner | top parts (% per %) |",
            "|---:|---|---:|---|---:|---|---|",
        ]
        for point in spread.points:
            for q in ("vth", "zth", "in"):
                qs = quantity_of(q, point)
                e = qs.worst_case.get("abs") if qs is not None else None
                if qs is None or e is None:
                    continue
                u = " " + quantity_unit(q)
                top = ", ".join(f"{p} {a:+.3g}" for p, a, _ in ranked(qs.sensitivities)[:3])
                lines.append(
                    f"| {format_eng(point.freq_hz, 4, ' Hz')} | {quantity_name(q)} | {format_eng(e.minimum, 5, u)} | "
                    f"{cell(corner_words(e.min_corner))} | {format_eng(e.maximum, 5, u)} | "
                    f"{cell(corner_words(e.max_corner))} | {cell(top)} |"
                )
        lines.append("")
    return lines
