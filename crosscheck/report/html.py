"""One self-contained HTML file of a run: summary, each case's numbers, plots and equivalent circuit.

Self-contained means a reviewer can mail it or attach it to a CI run: no external links,
no scripts, no fonts or styles fetched from anywhere; plots and drawings are SVG, embedded as
base64 data URIs (an SVG shown through ``<img>`` runs no script and fetches nothing). Collapsed parts
use ``<details>``, which needs no script.
Cautions come before any case: the summary opens with each case's own (``report.caution``: a hazardous
level, or its case file's ``caution``) and the general caution, which the page also ends with; a case's
section repeats its own under its heading. Reading's unacknowledged warnings follow the cautions, and each
case's section repeats its own with its notes from reading folded below them (``report.read_warnings``).
Every string goes through ``html.escape``.
"""

from __future__ import annotations

import base64
import html
import math
from collections import Counter
from collections.abc import Sequence

from crosscheck.judge.result import CaseResult
from crosscheck.model.values import format_eng, format_polar
from crosscheck.report.caution import CAUTION, CaseCaution, case_caution, case_cautions
from crosscheck.report.circuit_drawing import equivalent_svg, representative
from crosscheck.report.frame import case_reason, count_words, findings, overall_verdict, worst_spice_error
from crosscheck.report.multiport_plots import case_figure_html as multiport_figure
from crosscheck.report.plots import VERDICT_COLOURS, VERDICT_SYMBOLS, case_figure_svg, is_swept
from crosscheck.report.read_warnings import ACKNOWLEDGE, shown_notes, warned, warning_words
from crosscheck.report.results_json import ngspice_version
from crosscheck.report.spread_html import spread_section
from crosscheck.version import __version__
from crosscheck.vocabulary import quantity_unit

_STYLE = """
body { font-family: system-ui, sans-serif; margin: 1.5em auto; max-width: 72em; color: #222; padding: 0 1em; }
h1 { margin-bottom: 0.2em; } h3 { margin-bottom: 0.3em; }
table { border-collapse: collapse; margin: 0.5em 0 1em; font-size: 0.9em; }
th, td { border: 1px solid #ccc; padding: 0.25em 0.5em; text-align: left; vertical-align: top; }
th { background: #f2f2f2; } td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
.verdict { font-weight: bold; padding: 0.05em 0.4em; border-radius: 0.3em; color: black; }
.v-other { background: #ffffff; border: 1px solid #000; }
.status { font-size: 1.25em; } .meta { color: #555; font-size: 0.9em; }
.why { background: #fff4e5; border-left: 4px solid #d9822b; padding: 0.4em 0.7em; }
.warning { background: #fff8c5; border-left: 4px solid #9a6700; padding: 0.4em 0.7em; }
.error { background: #fdecea; border-left: 4px solid #c62828; padding: 0.4em 0.7em; white-space: pre-wrap; }
section.case { border-top: 2px solid #ddd; margin-top: 2em; }
.figures { display: flex; flex-wrap: wrap; gap: 1em; align-items: flex-start; }
figure { margin: 0; } figcaption { color: #555; font-size: 0.85em; max-width: 40em; }
img.plot { max-width: 100%; height: auto; border: 1px solid #eee; }
footer { border-top: 2px solid #ddd; margin-top: 2em; padding-top: 0.5em; color: #333; }
"""

_KNOWN = ("pass", "fail", "error", "unavailable", "drift")


def verdict_css() -> str:
    """Badge rules: each verdict its own Okabe–Ito colour (``plots.VERDICT_COLOURS``) and its own symbol
    before the word, so no verdict is told by colour alone. Black text reads on every fill but black,
    which takes white (contrast at least 4.5:1 throughout)."""
    rules = []
    for verdict in _KNOWN:
        colour = VERDICT_COLOURS[verdict]
        text = "white" if colour == "#000000" else "black"
        rules.append(f".v-{verdict} {{ background: {colour}; color: {text}; }}")
        rules.append(f'.v-{verdict}::before {{ content: "{VERDICT_SYMBOLS[verdict]} "; }}')
    return "\n".join(rules) + "\n"


_STYLE += verdict_css()


def _e(text: object) -> str:
    """Text content escaped (quotes may stay: they are harmless outside attribute values)."""
    return html.escape(str(text), quote=False)


def _attr(text: object) -> str:
    return html.escape(str(text), quote=True)


def _badge(verdict: str) -> str:
    cls = verdict if verdict in _KNOWN else "other"
    return f'<span class="verdict v-{cls}">{_e(verdict)}</span>'


def _data_uri(mime: str, data: bytes) -> str:
    return f"data:{mime};base64,{base64.b64encode(data).decode('ascii')}"


def _z(z: complex | None, unit: str) -> str:
    return "—" if z is None else _e(format_polar(z, 6, " " + unit))


def _num(x: float | None) -> str:
    return "—" if x is None or (isinstance(x, float) and math.isnan(x)) else f"{x:.2e}"


def _table(headers: Sequence[str], rows: Sequence[Sequence[str]], numeric: Sequence[int] = ()) -> str:
    """Cells are given already escaped (they may hold markup such as a verdict badge)."""
    head = "".join(f"<th>{_e(h)}</th>" for h in headers)
    body = "".join(
        "<tr>"
        + "".join(f'<td class="num">{c}</td>' if i in numeric else f"<td>{c}</td>" for i, c in enumerate(row))
        + "</tr>"
        for row in rows
    )
    return f"<table><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"


def _caution_items(c: CaseCaution) -> list[str]:
    items = [_e(c.hazard)] if c.hazard else []
    return items + ([f"The case file's caution: {_e(c.stated)}"] if c.stated else [])


def _cautions(results: Sequence[CaseResult]) -> str:
    """The cautions block at the top of the summary: each case's own, linked to its section, then the general one."""
    rows = [
        f'<li><a href="#case-{c.index}">{_e(c.name)}</a>: {item}</li>'
        for c in case_cautions(results)
        for item in _caution_items(c)
    ]
    listed = f"<ul>{''.join(rows)}</ul>" if rows else ""
    return f'<div class="why cautions" id="cautions"><strong>Caution.</strong>{listed}<p>{_e(CAUTION)}</p></div>'


def _case_caution(i: int, r: CaseResult) -> str:
    found = case_caution(r, i)
    if found is None:
        return ""
    return "".join(f'<p class="why caution"><strong>Caution.</strong> {item}</p>' for item in _caution_items(found))


def _read_warnings(results: Sequence[CaseResult]) -> str:
    """The reading warnings block under the cautions: each unacknowledged warning, linked to its case's section."""
    rows = [
        f'<li><a href="#case-{i}">{_e(r.name)}</a>: {_e(warning_words(w))}</li>'
        for i, r in warned(results)
        for w in r.open_warnings
    ]
    if not rows:
        return ""
    return (
        '<div class="warning read-warnings" id="read-warnings"><strong>Reading warnings</strong> (the answer is '
        f"probably not what the netlist meant):<ul>{''.join(rows)}</ul><p>{_e(ACKNOWLEDGE)}</p></div>"
    )


def _case_reading(r: CaseResult) -> str:
    """A case's unacknowledged warnings (prominent) and its notes from reading (folded)."""
    out = [
        f'<p class="warning read-warning"><strong>Warning.</strong> {_e(warning_words(w))}</p>' for w in r.open_warnings
    ]
    if r.read_notes:
        items = "".join(f"<li>{_e(n)}</li>" for n in shown_notes(r.read_notes))
        out.append(
            f'<details class="notes"><summary>{len(r.read_notes)} note(s) from reading</summary><ul>{items}</ul></details>'
        )
    return "".join(out)


def _summary(results: Sequence[CaseResult]) -> str:
    rows = []
    for i, r in enumerate(results, start=1):
        worst = worst_spice_error(r)
        why = case_reason(r) if r.verdict != "pass" else ""
        rows.append(
            [
                f'<a href="#case-{i}">{_e(r.name)}</a>',
                _e(r.title),
                _e(f"{r.port[0]} → {r.port[1]}"),
                str(len(r.freqs_hz)),
                _num(worst),
                _badge(r.verdict),
                _e(why[:400]),
            ]
        )
    return _table(("case", "title", "port", "points", "worst err", "verdict", "why"), rows, numeric=(3, 4))


def _points_table(r: CaseResult) -> str:
    if r.points:
        rows = []
        for p in r.points:
            for j, q in enumerate(p.quantities):
                rows.append(
                    [
                        _e(format_eng(p.freq_hz, 6, " Hz")) if j == 0 else "",
                        _e(q.quantity),
                        _z(q.own, quantity_unit(q.quantity)),
                        _z(q.ref, quantity_unit(q.quantity)),
                        _num(q.err),
                        _badge(q.verdict),
                        _e(q.explanation),
                    ]
                )
        return _table(("f", "qty", "crosscheck", "ngspice", "err", "verdict", "explanation"), rows, numeric=(0, 4))
    rows = [
        [
            _e(format_eng(eq.freq_hz, 6, " Hz")),
            _z(eq.vth, "V"),
            _z(eq.zth, "Ω"),
            _z(eq.in_, "A"),
            f"{eq.condition:.1g}",
            _e(eq.note),
        ]
        for eq in (r.own or [])
    ]
    return _table(("f", "V_th", "Z_th", "I_N", "cond", "note"), rows, numeric=(0, 4))


def _judgements_table(r: CaseResult) -> str:
    found = [f for f in findings(r, include_pass=True) if f.check in ("expect", "limit", "drift")]
    if not found:
        return ""
    rows = [
        [
            _e(f.label),
            "—" if f.freq_hz is None else _e(format_eng(f.freq_hz, 4, " Hz")),
            _e(f.obtained),
            _e(f.expected),
            _e(f.error),
            _badge(f.verdict),
            _e(f.why),
        ]
        for f in found
    ]
    return "<h4>Hand calculations, design limits and baseline</h4>" + _table(
        ("check", "at", "obtained (crosscheck)", "expected", "off by", "verdict", "why"), rows, numeric=(1,)
    )


def _figures(r: CaseResult) -> str:
    parts = []
    eq = representative(r)
    if eq is not None:
        svg = equivalent_svg(eq, r.port, r.sources)
        at = "DC" if eq.freq_hz == 0 else format_eng(eq.freq_hz, 4, " Hz")
        parts.append(
            f'<figure class="circuit"><img src="{_data_uri("image/svg+xml", svg.encode("utf-8"))}" '
            f'alt="equivalent circuit at {_attr(at)}"><figcaption>Equivalent at {_e(at)} (crosscheck\'s '
            "solver): the source in series with Z_th drawn as R with L or C. Valid at this frequency "
            "only.</figcaption></figure>"
        )
    plot = case_figure_svg(r) if is_swept(r) else None
    if plot is not None:
        parts.append(
            f'<figure class="sweep"><img class="plot" src="{_data_uri("image/svg+xml", plot.encode("utf-8"))}" '
            f'alt="Z_th and V_th against frequency from both engines, and the error"><figcaption>'
            "crosscheck as lines, ngspice as circles; hand values as filled markers (colour and shape by "
            "verdict); design limits shade the "
            "forbidden side of each bound over its band; the error panel shows the judged relative "
            "error against the tolerance (dashed). DC points, if any, are in the table only."
            "</figcaption></figure>"
        )
    return f'<div class="figures">{"".join(parts)}</div>' if parts else ""


def _case_section(i: int, r: CaseResult) -> str:
    tol = r.tolerance
    meta = [
        f"file {_e(r.name)}",
        f"port {_e(r.port[0])} → {_e(r.port[1])}",
        f"sources {_e(r.sources)}",
        f"excitation {_e(r.excitation)}",
        f"tolerance rel {tol.rel:.3g}"
        + (f", abs {tol.abs:.3g}" if tol.abs else "")
        + (f", phase {tol.phase_deg:g}°" if tol.phase_deg is not None else ""),
    ]
    if r.spice is not None:
        meta.append(f"ngspice run: {_e(r.spice.strategy)}")
    elif r.spice_note:
        meta.append(f"ngspice: {_e(r.spice_note)}")
    out = [
        f'<section class="case" id="case-{i}"><h3>{_e(r.title)} {_badge(r.verdict)}</h3>',
        f'<p class="meta">{" · ".join(meta)}</p>',
        _case_caution(i, r),
        _case_reading(r),
    ]
    if r.error:
        out.append(f'<p class="error">{_e(r.error)}</p>')
    elif r.verdict != "pass":
        out.append(f'<p class="why">{_e(case_reason(r))}</p>')
    out.append(_figures(r))
    out.append(multiport_figure(r))
    out.append(_judgements_table(r))
    out.append(spread_section(r))
    if r.points or r.own:
        state = " open" if r.verdict != "pass" else ""
        out.append(
            f"<details{state}><summary>Points ({len(r.freqs_hz)} frequencies)</summary>{_points_table(r)}</details>"
        )
    out.append("</section>")
    return "".join(out)


def html_report(results: Sequence[CaseResult], title: str = "crosscheck report") -> str:
    """The whole report as one HTML document (UTF-8 text)."""

    counts = Counter(r.verdict for r in results)
    overall = overall_verdict([r.verdict for r in results])
    version = ngspice_version(results)
    head = (
        f'<p class="status">{_badge(overall)} {len(results)} case(s): {_e(count_words(counts))}</p>'
        + f'<p class="meta">{_e(version or "ngspice not run")} · crosscheck {_e(__version__)}</p>'
    )
    body = "".join(_case_section(i, r) for i, r in enumerate(results, start=1))
    return (
        '<!DOCTYPE html>\n<html lang="en"><head><meta charset="utf-8">'
        f"<title>{_e(title)}</title><style>{_STYLE}</style></head><body>"
        f"<header><h1>{_e(title)}</h1>{head}</header>"
        f"<h2>Summary</h2>{_cautions(results)}{_read_warnings(results)}{_summary(results)}<h2>Cases</h2>{body}"
        f'<footer><h2>Caution</h2><p class="caution">{_e(CAUTION)}</p></footer>'
        "</body></html>\n"
    )
