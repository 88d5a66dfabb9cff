"""Report writers: JUnit XML, CSV, Markdown and self-contained HTML, checked by parsing what they write.

The results are made without ngspice: crosscheck's own solver runs the cases, and the
"SPICE" answers are the own answers, exact (a pass), perturbed by 1e-3 (a fail) or missing
(unavailable). Hand values and design limits are judged by the real code from case files.
"""

from __future__ import annotations

from dataclasses import replace

import base64
import dataclasses
import io
import math
import re
import xml.etree.ElementTree as ET
from html.parser import HTMLParser
from pathlib import Path

import pandas as pd
import pytest

from crosscheck.model.cases import load_case
from crosscheck.report.caution import CAUTION
from crosscheck.judge.result import CaseResult
from crosscheck.run.check import run_cases
from crosscheck.cli import verify_format
from crosscheck.judge.compare import EngineAnswer, compare_point
from crosscheck.vocabulary import worst
from crosscheck.errors import CaseFileError
from crosscheck.judge.records import DriftCheck
from crosscheck.report.circuit_drawing import equivalent_svg, representative
from crosscheck.report.csv_out import csv_report
from crosscheck.report.frame import COLUMNS, findings, verdict_frame
from crosscheck.report.html import html_report
from crosscheck.report.junit import junit_tree, junit_xml
from crosscheck.report.markdown import markdown_report
from crosscheck.report.plots import case_figure_svg

RC = "rc output\nV1 in 0 DC 0 AC 1\nR1 in out 1k\nC1 out 0 100n\n.end\n"
SWEEP = 'sweep = { start = "10", stop = "100k", per_decade = 2 }\n'
SVG = "{http://www.w3.org/2000/svg}"


def _case(folder: Path, name: str, body: str) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "rc.cir").write_text(RC)
    path = folder / f"{name}.toml"
    path.write_text(f'title = "{name}"\nnetlist = "rc.cir"\nport = ["out", "0"]\n' + body)
    return path


def _with_spice(result: CaseResult, factor: complex = 1.0, missing: str | None = None) -> CaseResult:
    """Attach 'SPICE' answers made from the own ones (times ``factor`` for Z_th), or none with a reason."""
    points = []
    for eq in result.own:
        ref = None if missing else EngineAnswer(eq.freq_hz, eq.vth, eq.zth * factor, eq.in_)
        points.append(compare_point(eq, ref, result.tolerance, missing or ""))
    verdict = worst(
        [p.verdict for p in points]
        + [e.verdict for e in result.expectations]
        + [c.verdict for c in result.limits]
        + [d.verdict for d in result.drift]
    )
    return replace(result, points=tuple(points), verdict=verdict)


@pytest.fixture(scope="module")
def results(tmp_path_factory: pytest.TempPathFactory) -> list[CaseResult]:
    """Six cases, one of each outcome, in two folders (shared by the module: tests must not change them)."""
    tmp_path = tmp_path_factory.mktemp("formats")
    filters, bridges = tmp_path / "filters", tmp_path / "bridges"
    passing = _case(filters, "passing", SWEEP + '[[expect]]\nat = "1k"\nzth = "1k"\nrel = 10\nphase_deg = 180\n')
    failing = _case(filters, "spice_fail", SWEEP)
    limit = _case(bridges, "limit_fail", SWEEP + '[[limit]]\nquantity = "abs(zth)"\nmax = "900"\nband = ["10", "1k"]\n')
    single = _case(bridges, "single", 'frequencies = ["1k"]\n')
    drifting = _case(bridges, "drifting", 'frequencies = ["50", "1k", "20k"]\n')
    items = [load_case(p) for p in (passing, failing, limit, single, drifting)]
    items.append((str(filters / "broken.toml"), CaseFileError(f"{filters / 'broken.toml'}: key 'port': a|b wrong")))
    out = run_cases(items, engine="own")
    out[0] = _with_spice(out[0])
    out[1] = _with_spice(out[1], factor=1 + 1e-3)
    out[2] = _with_spice(out[2])
    out[3] = _with_spice(out[3], missing="ngspice is not installed")
    eq = out[4].own[1]
    out[4] = _with_spice(
        replace(
            out[4],
            drift=(
                DriftCheck(
                    eq.freq_hz,
                    "zth",
                    eq.zth * (1 + 1e-6),
                    eq.zth,
                    1e-6,
                    "drift",
                    "Z_th moved by 1e-06 since the baseline",
                ),
            ),
        )
    )
    return out


def test_outcomes_of_the_fixture_are_as_intended(results):
    """The fixture really holds one case of each verdict, so the format tests below can fail."""
    assert [r.verdict for r in results] == ["pass", "fail", "fail", "unavailable", "drift", "error"]
    assert results[2].limits and results[2].limits[0].verdict == "fail"
    assert results[0].expectations and all(e.verdict == "pass" for e in results[0].expectations)


# --------------------------------------------------------------------------- JUnit


SUITE_ATTRS = {"name", "tests", "failures", "errors", "skipped", "time", "timestamp", "hostname"}


def test_junit_structure_and_counts(results):
    """testsuites > testsuite > testcase with the attributes and counts the common JUnit schema requires."""
    root = ET.fromstring(junit_xml(results, timestamp="2024-01-02T03:04:05", hostname="ci"))
    assert root.tag == "testsuites"
    suites = root.findall("testsuite")
    assert {s.get("name") for s in suites} == {str(results[0].case.path.parent), str(results[2].case.path.parent)}
    totals = dict(tests=0, failures=0, errors=0, skipped=0)
    for suite in suites:
        assert SUITE_ATTRS <= set(suite.attrib)
        children = [c.tag for c in suite]
        assert children[0] == "properties" and children[-2:] == ["system-out", "system-err"]
        cases = suite.findall("testcase")
        assert set(children[1:-2]) == {"testcase"}
        counted = dict(
            tests=len(cases),
            failures=sum(c.find("failure") is not None for c in cases),
            errors=sum(c.find("error") is not None for c in cases),
            skipped=sum(c.find("skipped") is not None for c in cases),
        )
        assert {k: int(suite.get(k)) for k in counted} == counted
        for k in totals:
            totals[k] += counted[k]
        for case in cases:
            assert {"classname", "name", "time"} <= set(case.attrib)
            assert float(case.get("time")) >= 0
        assert sum(float(c.get("time")) for c in cases) == pytest.approx(float(suite.get("time")), abs=5e-3)
        names = [p.get("name") for p in suite.find("properties")]
        assert "ngspice_version" in names
        assert CAUTION in suite.find("system-out").text
    assert totals == dict(tests=6, failures=3, errors=1, skipped=1)
    assert {k: int(root.get(k)) for k in ("tests", "failures", "errors")} == dict(tests=6, failures=3, errors=1)
    assert "skipped" not in root.attrib  # the schema defines no skipped count on <testsuites>
    assert float(root.get("time")) >= 0
    times = [e.get("time") for e in root.iter() if "time" in e.attrib]
    assert all(re.fullmatch(r"\d+(\.\d{1,3})?", s) for s in times), "at most three decimals"
    testcase_attrs = {a for c in root.iter("testcase") for a in c.attrib}
    assert testcase_attrs <= {"name", "classname", "time", "assertions", "status"}


def test_junit_maps_each_verdict_to_its_element(results):
    """fail and drift are <failure> (type says which), error is <error>, unavailable is <skipped> with the reason."""
    root = junit_tree(results, timestamp="2024-01-02T03:04:05", hostname="ci")
    by_name = {c.get("name"): c for c in root.iter("testcase")}
    assert by_name["passing"].find("failure") is None and by_name["passing"].find("error") is None
    assert by_name["spice_fail"].find("failure").get("type") == "fail"
    assert "zth vs SPICE" in by_name["spice_fail"].find("failure").text
    limit = by_name["limit_fail"].find("failure")
    assert "limit[1] abs(zth)" in limit.text and "obtained (crosscheck)" in limit.text
    assert by_name["drifting"].find("failure").get("type") == "drift"
    assert "not installed" in by_name["single"].find("skipped").get("message")
    assert "key 'port'" in by_name["broken"].find("error").get("message")
    assert by_name["limit_fail"].get("classname").endswith("bridges")
    assert "." in by_name["limit_fail"].get("classname") and "/" not in by_name["limit_fail"].get("classname")


def test_junit_replaces_characters_xml_cannot_hold(results):
    """Engine output with control characters still gives a parsable document."""
    broken = dataclasses.replace(results[5], error="ngspice said \x00\x1b[31mboom")
    root = ET.fromstring(junit_xml([broken]))
    assert "boom" in root.find(".//error").get("message")


# --------------------------------------------------------------------------- CSV


def test_csv_reads_back_with_every_check_and_exact_numbers(results):
    """One row per case, check, frequency and quantity; numbers round-trip exactly; the caution is the last row."""
    frame = pd.read_csv(io.StringIO(csv_report(results)))
    assert list(frame.columns) == COLUMNS
    body, last = frame.iloc[:-1], frame.iloc[-1]
    assert last["check"] == "caution" and last["explanation"] == CAUTION
    spice = body[body["check"] == "spice"]
    assert len(spice) == sum(3 * len(r.points) for r in results)
    assert set(body["check"]) == {"spice", "expect", "limit", "drift", "input"}
    limit = body[body["check"] == "limit"].iloc[0]
    assert (limit["quantity"], limit["limit_max"], limit["band_lo_hz"], limit["band_hi_hz"]) == (
        "abs(zth)",
        900.0,
        10.0,
        1000.0,
    )
    assert limit["verdict"] == "fail" and limit["margin"] < 0
    # Exact round trip (tolerance 0): the writer promises the shortest text that reads back to the same double.
    first = results[1].points[0].quantities[1]
    row = spice[(spice["case"] == results[1].name) & (spice["quantity"] == "zth")].iloc[0]
    assert (row["own_re"], row["own_im"], row["spice_re"]) == (first.own.real, first.own.imag, first.ref.real)
    assert body[body["check"] == "input"].iloc[0]["verdict"] == "error"


def test_verdict_frame_has_expectation_rows(results):
    """An [[expect]] becomes a row with the hand value in expected_re/expected_im."""
    frame = verdict_frame(results[:1])
    row = frame[frame["check"] == "expect"].iloc[0]
    assert (row["expected_re"], row["expected_im"]) == (1000.0, 0.0)
    assert row["freq_hz"] == pytest.approx(1000.0, rel=1e-12)


# --------------------------------------------------------------------------- Markdown


def test_markdown_header_table_details_and_caution(results):
    """Status word and counts first; a table of what did not pass; passes folded away; version and caution last."""
    text = markdown_report(results)
    lines = text.splitlines()
    assert lines[0] == "### crosscheck: ERROR — 6 case(s): 1 pass, 2 fail, 1 error, 1 unavailable, 1 drift"
    table = [line for line in lines if line.startswith("| `")]
    problems = [r for r in results if r.verdict != "pass"]
    for r in problems:
        assert any(f"`{r.name}`" in line and f"**{r.verdict}**" in line for line in table)
    assert any("key 'port': a\\|b wrong" in line for line in table), "a pipe in a reason must be escaped"
    folded = text.split("passing case(s)</summary>")[1]
    assert results[0].name in folded and results[0].name not in text.split("passing case(s)</summary>")[0]
    assert "ngspice: not run" in text
    assert text.rstrip().endswith(CAUTION)


def test_markdown_all_pass_says_pass(results):
    text = markdown_report(results[:1])
    assert text.startswith("### crosscheck: PASS — 1 case(s): 1 pass, 0 fail, 0 error, 0 unavailable\n")
    assert "Every case passed" in text


# --------------------------------------------------------------------------- HTML


class _Page(HTMLParser):
    """Collects tags, image sources and text; counts open and close tags of the block elements."""

    def __init__(self) -> None:
        super().__init__()
        self.images: list[str] = []
        self.plots: list[str] = []  # the sources of the images of class "plot" (the sweep figures)
        self.tags: list[str] = []
        self.text: list[str] = []
        self.depth = {"section": 0, "table": 0, "details": 0}

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        if tag == "img":
            self.images.append(dict(attrs)["src"])
            if dict(attrs).get("class") == "plot":
                self.plots.append(dict(attrs)["src"])
        if tag in self.depth:
            self.depth[tag] += 1

    def handle_endtag(self, tag):
        if tag in self.depth:
            self.depth[tag] -= 1

    def handle_data(self, data):
        self.text.append(data)


@pytest.fixture(scope="module")
def page_text(results) -> str:
    return html_report(results)


def test_html_is_self_contained_with_summary_plots_drawings_and_caution(results, page_text):
    page = _Page()
    page.feed(page_text)
    page.close()
    assert page.depth == {"section": 0, "table": 0, "details": 0}, "every block element is closed"
    text = " ".join(page.text)
    assert "Summary" in text and CAUTION in text
    assert "http" not in page_text.lower(), "no external links, not even in embedded data"
    assert not {"script", "link", "iframe"} & set(page.tags)
    assert all(src.startswith("data:") for src in page.images)
    swept = [r for r in results if r.own and len(r.own) >= 3]
    assert len(page.plots) == len(swept) == 4
    assert all(s.startswith("data:image/svg+xml;base64,") for s in page.plots)
    for s in page.plots:  # each an SVG document XML can read, with both engines' curves
        svg = ET.fromstring(base64.b64decode(s.split(",", 1)[1]))
        assert svg.tag == SVG + "svg"
        labels = {t.text for t in svg.iter(SVG + "text")}
        assert {"crosscheck", "ngspice", "solver vs SPICE: judged relative error"} <= labels
    drawings = [s for s in page.images if s.startswith("data:image/svg+xml;base64,") and s not in page.plots]
    assert len(drawings) == sum(1 for r in results if r.own)
    assert all(b"<svg" in base64.b64decode(s.split(",", 1)[1]) for s in drawings)
    for r in results:
        assert r.title in text


def test_html_shows_limit_and_hand_value_rows(page_text):
    text = page_text
    assert "limit[1] abs(zth)" in text and "expect[1] zth" in text
    assert "≤ 900 Ω over 10 Hz … 1 kHz" in text


def test_plot_only_for_sweeps(results):
    """A case with fewer than three frequencies above 0 Hz has no plot; a sweep gives an SVG document."""
    assert case_figure_svg(results[3]) is None
    svg = case_figure_svg(results[2])
    assert svg is not None and ET.fromstring(svg).tag == SVG + "svg"


def test_circuit_drawing_labels_source_and_series_elements(results):
    """The drawing names V_th, R and C with values at the representative frequency."""
    eq = representative(results[3])
    assert eq.freq_hz == 1000.0
    svg = equivalent_svg(eq, results[3].port, "peak")
    assert "V_th = " in svg and "R = " in svg and "C = " in svg and "a (out)" in svg


def test_representative_frequency_prefers_hand_value_then_log_middle(results):
    assert representative(results[0]).freq_hz == pytest.approx(1000.0, rel=1e-12)  # the [[expect]] frequency
    freqs = [eq.freq_hz for eq in results[1].own]  # 10 Hz … 100 kHz, two per decade: middle is 1 kHz
    assert representative(results[1]).freq_hz == pytest.approx(1000.0, rel=1e-12), freqs


def test_findings_put_the_worst_first(results):
    found = findings(results[4], include_pass=True)
    assert found[0].verdict == "drift" and found[0].check == "drift"
    assert not math.isnan(found[0].freq_hz)


# --------------------------------------------------------------------------- CLI format choice


@pytest.mark.parametrize(
    "given, output, expected",
    [
        (None, "r.xml", "junit"),
        (None, "r.md", "markdown"),
        (None, "R.HTML", "html"),
        (None, "r.csv", "csv"),
        (None, "r.json", "json"),
        (None, "r.log", "text"),
        (None, None, "text"),
        ("json", "r.xml", "json"),
    ],
)
def test_verify_format_from_extension(given, output, expected):
    assert verify_format(given, None if output is None else Path(output)) == expected


@pytest.mark.spice
def test_verify_writes_html_chosen_by_extension(tmp_path):
    """`crosscheck verify case --output r.html` writes the HTML report and exits 0 for a passing case."""
    from crosscheck.cli import main

    path = _case(tmp_path / "cases", "sweep", SWEEP)
    out = tmp_path / "out" / "r.html"
    assert main(["verify", str(path), "--output", str(out), "--workers", "1"]) == 0
    text = out.read_text(encoding="utf-8")
    assert (
        text.startswith("<!DOCTYPE html>")
        and '<img class="plot" src="data:image/svg+xml;base64,' in text
        and CAUTION in text
    )


def test_comparison_table_keeps_its_frequencies_on_an_80_column_terminal(results):
    """A CI log is often 80 columns wide: the long phasors fold, while every frequency still shows whole
    (rich used to squeeze the frequency column to nothing there)."""
    from rich.console import Console

    from crosscheck.report.results_text import comparison_table
    from crosscheck.model.values import format_eng

    result = results[0]
    console = Console(width=80, record=True, file=io.StringIO())
    console.print(comparison_table(result))
    text = console.export_text()
    assert max(len(line) for line in text.splitlines()) <= 80
    for p in result.points:
        assert format_eng(p.freq_hz, 4, " Hz") in text, (p.freq_hz, text)


def test_html_badges_use_the_okabe_ito_verdict_colours_and_si_units(results, page_text):
    """Every verdict badge on the page has its own palette colour and symbol rule, and no number with a
    unit is written with SPICE's 'Meg' (mega is 'M' for people) or a prefixed decibel."""
    from crosscheck.report.plots import VERDICT_COLOURS, VERDICT_SYMBOLS

    for verdict in {r.verdict for r in results}:
        assert f'class="verdict v-{verdict}"' in page_text
        assert f".v-{verdict} {{ background: {VERDICT_COLOURS[verdict]};" in page_text
        assert f'.v-{verdict}::before {{ content: "{VERDICT_SYMBOLS[verdict]} "; }}' in page_text
    assert not re.search(r"\dMeg ?(Hz|Ω|V|A|S|F|H)\b", page_text)
    assert not re.search(r"\d [munpkMGT]dB\b", page_text)
