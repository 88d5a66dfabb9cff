"""JUnit XML of checked cases, so any CI server shows crosscheck's verdicts beside its other tests.

Layout (the common JUnit schema that CI servers read, the one pytest's ``xunit2`` family
follows; attributes as that schema allows them, from memory): ``<testsuites>`` holds one
``<testsuite>`` per case folder; each case is a ``<testcase>`` with ``classname`` the folder
(dotted, as CI servers group by package) and ``name`` the case file's stem (the path is in its
``<system-out>``: the schema has no file attribute on a test case). ``fail`` and ``drift`` are
``<failure>``, ``error`` is ``<error>``, ``unavailable`` is ``<skipped>`` with the reason. Each
suite carries tests, failures, errors, skipped and time (``<testsuites>`` all but skipped, which
the schema does not define there) and lists the ngspice and crosscheck versions as properties.
A case's own cautions (``report.caution``: a hazardous level, or its case file's ``caution``) and then its
unacknowledged reading warnings (``WARNING [code] file:line: message``, ``report.read_warnings``) open its
``<system-out>``, whose last lines are reading's notes; the suite's ``<system-out>`` lists the cautions and
warnings before the general caution. A warning never changes the element; under ``--strict`` the case's
verdict is ``error`` and so is its element.
"""

from __future__ import annotations

import datetime as _dt
import re
import socket
import xml.etree.ElementTree as ET
from collections import Counter
from collections.abc import Sequence
from pathlib import PurePath

from crosscheck.judge.result import CaseResult
from crosscheck.model.values import format_eng
from crosscheck.report.caution import CAUTION, case_caution
from crosscheck.report.frame import case_reason, finding_table, findings, worst_spice_error
from crosscheck.report.read_warnings import ACKNOWLEDGE, note_lines, warning_lines
from crosscheck.report.results_json import ngspice_version
from crosscheck.version import __version__

#: How each verdict appears: the child element of <testcase> (None for a pass).
ELEMENT = {"pass": None, "fail": "failure", "drift": "failure", "error": "error", "unavailable": "skipped"}

# Characters XML 1.0 cannot carry at all (engine output may hold them): replaced, never emitted.
_NOT_XML = re.compile("[^\u0009\u000a\u000d\u0020-\ud7ff\ue000-\ufffd\U00010000-\U0010ffff]")


def _clean(text: str) -> str:
    return _NOT_XML.sub("\ufffd", text)


def folder_of(result: CaseResult) -> str:
    """The case's folder as written on the command line ('.' for a file named without one)."""
    return PurePath(result.name).parent.as_posix()


def _classname(folder: str) -> str:
    dotted = folder.strip("/").replace("/", ".")
    return dotted if dotted and dotted != "." else "crosscheck"


def _case_name(result: CaseResult) -> str:
    return PurePath(result.name).stem or result.name


def _element_for(verdict: str) -> str | None:
    return ELEMENT.get(verdict, "failure")  # a verdict this writer does not know is shown, never hidden


def _details(result: CaseResult) -> str:
    lines = [f"{result.title} (port {result.port[0]} -> {result.port[1]}, {len(result.freqs_hz)} frequencies)"]
    if result.error:
        lines.append(result.error)
    lines += finding_table(findings(result), limit=20)
    return "\n".join(lines)


def _caution_lines(result: CaseResult) -> list[str]:
    found = case_caution(result)
    return [f"CAUTION: {line}" for line in found.lines()] if found is not None else []


def _summary(result: CaseResult) -> str:
    worst = worst_spice_error(result)
    span = ""
    if result.freqs_hz:
        span = f"{format_eng(min(result.freqs_hz), 4, ' Hz')} … {format_eng(max(result.freqs_hz), 4, ' Hz')}"
    parts = [
        *_caution_lines(result),
        *warning_lines(result),
        f"file: {result.name}",
        f"title: {result.title}",
        f"port: {result.port[0]} -> {result.port[1]}",
        f"frequencies: {len(result.freqs_hz)} ({span})" if span else "frequencies: none",
        f"excitation: {result.excitation}",
        f"verdict: {result.verdict}",
        "worst solver-vs-SPICE error: "
        + ("not compared" if worst is None else f"{worst:.3g} (tolerance {result.tolerance.rel:.3g})"),
    ]
    parts += [
        f"{len(group)} {kind} check(s)"
        for kind, group in (
            ("hand-value", result.expectations),
            ("design-limit", result.limits),
            ("baseline", result.drift),
        )
        if group
    ]
    return "\n".join(parts + note_lines(result))


def _testcase(parent: ET.Element, result: CaseResult) -> str:
    folder = folder_of(result)
    case = ET.SubElement(
        parent,
        "testcase",
        classname=_classname(folder),
        name=_case_name(result),
        time=f"{result.elapsed_own_s + result.elapsed_spice_s:.3f}",
    )
    kind = _element_for(result.verdict)
    if kind is not None:
        reason = _clean(case_reason(result) or result.verdict)
        child = ET.SubElement(case, kind, message=reason[:1000])
        if kind != "skipped":
            child.set("type", result.verdict)
            child.text = _clean(_details(result))
    out = ET.SubElement(case, "system-out")
    out.text = _clean(_summary(result))
    return kind or "pass"


def junit_tree(results: Sequence[CaseResult], timestamp: str | None = None, hostname: str | None = None) -> ET.Element:
    """The ``<testsuites>`` element; ``timestamp`` (ISO 8601, no zone) and ``hostname`` default to now and here."""

    stamp = timestamp or _dt.datetime.now().replace(microsecond=0).isoformat()
    host = hostname or socket.gethostname() or "localhost"
    groups: dict[str, list[CaseResult]] = {}
    for r in results:
        groups.setdefault(folder_of(r), []).append(r)
    top = ET.Element("testsuites", name="crosscheck")
    total: Counter = Counter()
    total_time = 0.0
    for index, (folder, members) in enumerate(groups.items()):
        suite = ET.SubElement(
            top, "testsuite", name=folder, package=_classname(folder), id=str(index), timestamp=stamp, hostname=host
        )
        props = ET.SubElement(suite, "properties")
        for name, value in (
            ("ngspice_version", ngspice_version(members) or "not run"),
            ("crosscheck_version", __version__),
        ):
            ET.SubElement(props, "property", name=name, value=_clean(value))
        counts = Counter(_testcase(suite, r) for r in members)
        seconds = sum(r.elapsed_own_s + r.elapsed_spice_s for r in members)
        _counts(suite, len(members), counts, seconds)
        own = [f"{line} ({r.name})" for r in members for line in [*_caution_lines(r), *warning_lines(r)]]
        hint = [ACKNOWLEDGE] if any(r.open_warnings for r in members) else []
        ET.SubElement(suite, "system-out").text = _clean("\n".join([*own, *hint, f"Caution: {CAUTION}"]))
        ET.SubElement(suite, "system-err").text = ""
        total += counts
        total_time += seconds
    _counts(top, len(results), total, total_time, skipped=False)
    return top


def _counts(element: ET.Element, tests: int, counts: Counter, seconds: float, skipped: bool = True) -> None:
    element.set("tests", str(tests))
    element.set("failures", str(counts.get("failure", 0)))
    element.set("errors", str(counts.get("error", 0)))
    if skipped:  # the schema has a skipped count on <testsuite> only
        element.set("skipped", str(counts.get("skipped", 0)))
    element.set("time", f"{seconds:.3f}")  # the schema allows at most three decimals


def junit_xml(results: Sequence[CaseResult], timestamp: str | None = None, hostname: str | None = None) -> str:
    """The document as text, with an XML declaration (UTF-8)."""
    tree = junit_tree(results, timestamp, hostname)
    ET.indent(tree)
    return '<?xml version="1.0" encoding="UTF-8"?>\n' + ET.tostring(tree, encoding="unicode") + "\n"
