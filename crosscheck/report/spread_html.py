"""The spread's section of a case in the HTML report: limits over the spread, what ngspice confirmed, the
figure (``spread_plots``), the ranked sensitivities and the worst-case table with corners.

Every user string (part names, explanations) is escaped with ``html.escape``; the figure is a data URI.
"""

from __future__ import annotations

import base64
import html
import math
from collections.abc import Sequence

from crosscheck.judge.result import CaseResult
from crosscheck.judge.spread import quantity_of
from crosscheck.model.values import format_eng
from crosscheck.report.caution import SPREAD_CAUTION
from crosscheck.report.spread_json import ranked
from crosscheck.report.spread_plots import spread_figure_svg
from crosscheck.report.spread_text import MAX_PARTS_SHOWN, corner_words, spread_summary
from crosscheck.vocabulary import quantity_name, quantity_unit


def _e(text: object) -> str:
    return html.escape(str(text), quote=True)


def _table(headers: Sequence[str], rows: Sequence[Sequence[str]]) -> str:
    head = "".join(f"<th>{_e(h)}</th>" for h in headers)
    body = "".join("<tr>" + "".join(f"<td>{c}</td>" for c in row) + "</tr>" for row in rows)
    return f"<table><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"


def _sensitivities(r: CaseResult) -> str:
    assert r.spread is not None
    out = []
    for point in r.spread.points:
        for q in ("vth", "zth", "in"):
            qs = quantity_of(q, point)
            if qs is None:
                continue
            rows = [[_e(p), f"{a:+.4g}", f"{b:+.4g}"] for p, a, b in ranked(qs.sensitivities)[:MAX_PARTS_SHOWN]]
            title = f"{quantity_name(q)} at {format_eng(point.freq_hz, 5, ' Hz')}"
            out.append(f"<h5>{_e(title)}</h5>" + _table(("part", "% of |q| per %", "° per %"), rows))
    return "".join(out)


def _worst_case(r: CaseResult) -> str:
    assert r.spread is not None
    rows = []
    for point in r.spread.points:
        for q in ("vth", "zth", "in"):
            qs = quantity_of(q, point)
            for fn, e in qs.worst_case.items() if qs is not None else ():
                u = " °" if fn == "phase_deg" else ("" if math.isnan(e.minimum) else " " + quantity_unit(q))
                rows.append(
                    [
                        _e(format_eng(point.freq_hz, 5, " Hz")),
                        _e(quantity_name(q)),
                        _e(fn),
                        _e(format_eng(e.minimum, 5, u)),
                        _e(corner_words(e.min_corner, 8)),
                        _e(format_eng(e.maximum, 5, u)),
                        _e(corner_words(e.max_corner, 8)),
                        _e(e.min_method if e.min_method == e.max_method else f"{e.min_method} / {e.max_method}"),
                    ]
                )
    return _table(("f", "qty", "function", "min", "min corner", "max", "max corner", "found by"), rows)


def spread_section(r: CaseResult) -> str:
    """The case's spread as HTML ("" without one)."""
    spread = r.spread
    if spread is None:
        return ""
    out = [
        f"<h4>Component spread</h4><p>{_e(spread_summary(spread))}</p>",
        f'<p class="caution">{_e(SPREAD_CAUTION)}</p>',
    ]
    if spread.limits:
        rows = [[_e(lim.index), _e(lim.text), _e(lim.verdict), _e(lim.explanation)] for lim in spread.limits]
        out.append("<h5>Design limits over the spread</h5>" + _table(("#", "limit", "verdict", "why"), rows))
    failed = [c for c in spread.checks if c.verdict != "pass"]
    if failed:
        rows = [
            [_e(c.kind), _e(format_eng(c.freq_hz, 4, " Hz")), _e(c.verdict), _e(c.explanation)] for c in failed[:50]
        ]
        out.append("<h5>ngspice confirmations not passing</h5>" + _table(("check", "f", "verdict", "why"), rows))
    svg = spread_figure_svg(r)
    if svg is not None:
        uri = "data:image/svg+xml;base64," + base64.b64encode(svg.encode("utf-8")).decode("ascii")
        out.append(
            f'<figure class="spread"><img class="plot" src="{uri}" alt="ranked sensitivities and Monte Carlo '
            'histograms"><figcaption>Top: the parts that drive the spread, ranked (% of |q| per % of the part). '
            "Below: |q| and its phase over every Monte Carlo sample, design limits dashed.</figcaption></figure>"
        )
    out.append(f"<details><summary>Sensitivities</summary>{_sensitivities(r)}</details>")
    out.append(f"<details open><summary>Worst case over the tolerance box</summary>{_worst_case(r)}</details>")
    return "".join(out)
