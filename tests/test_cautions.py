"""Cautions that fit the case: hazardous levels and a case file's own caution, near the top of every report.

The cases run on crosscheck's own solver only (``engine="own"``): no ngspice is needed to judge levels.
"""

from __future__ import annotations

import io
import json
import math
import xml.etree.ElementTree as ET
from pathlib import Path

import pandas as pd
import pytest

from crosscheck.errors import CaseFileError
from crosscheck.judge.hazards import ELV_AC_RMS_V, ELV_DC_V, HIGH_CURRENT_RMS_A
from crosscheck.judge.result import CaseResult
from crosscheck.model.cases import load_case
from crosscheck.report.caution import CAUTION
from crosscheck.report.csv_out import csv_report
from crosscheck.report.html import html_report
from crosscheck.report.junit import junit_tree
from crosscheck.report.markdown import markdown_report
from crosscheck.report.results_json import results_document
from crosscheck.run.check import run_cases

# A 230 V RMS supply behind 0.15 ohm + 0.3 mH (X = 2*pi*50*0.3m = 94.25 mohm), loaded by 1 kohm at the port.
MAINS = "mains\nV1 1 0 AC {v}\nR1 1 2 0.15\nL1 2 out 0.3m\nRL out 0 1k\n.end\n"
# Hand value: the port shorted bypasses RL, so I_N = 230 / |0.15 + j0.094248| = 230 / 0.177152 = 1298.3 A RMS.
MAINS_IN_RMS = 230.0 / abs(complex(0.15, 2 * math.pi * 50 * 0.3e-3))
# A 12 V RMS supply behind 1 ohm: 12 V, 12 A, nothing hazardous.
LOW = "low\nV1 1 0 AC 12\nR1 1 out 1\nRL out 0 100\n.end\n"


def _case(folder: Path, name: str, netlist: str, extra: str = "", sources: str = "rms", freqs: str = '["50"]') -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    (folder / f"{name}.cir").write_text(netlist)
    path = folder / f"{name}.toml"
    path.write_text(
        f'title = "{name}"\nnetlist = "{name}.cir"\nport = ["out", "0"]\nfrequencies = {freqs}\n'
        f'sources = "{sources}"\n{extra}'
    )
    return path


def _run(*paths: Path) -> list[CaseResult]:
    return run_cases([load_case(p) for p in paths], engine="own")


def _reports(results: list[CaseResult]) -> dict[str, str]:
    return {
        "json": json.dumps(results_document(results), ensure_ascii=False),
        "markdown": markdown_report(results),
        "junit": ET.tostring(junit_tree(results, "2026-01-01T00:00:00", "host"), encoding="unicode"),
        "csv": csv_report(results),
        "html": html_report(results),
    }


def _top_of_each(results: list[CaseResult]) -> dict[str, str]:
    """Each report cut where its cases begin, so a check on it finds only what comes before any case."""
    reports = _reports(results)
    doc = results_document(results)
    testcase = ET.fromstring(reports["junit"]).find(".//testcase/system-out")
    assert testcase is not None and testcase.text is not None
    frame = pd.read_csv(io.StringIO(reports["csv"]), dtype=str, keep_default_na=False)
    own = (frame["check"] == "caution") & (frame["case"] != "")  # a case's caution row (the general one names none)
    first = int(own.idxmin()) if not own.all() else len(own)  # the rows above the first of anything else
    return {
        "json": json.dumps(doc["cautions"], ensure_ascii=False),
        "markdown": reports["markdown"].split("\n|", 1)[0].split("Every case passed", 1)[0],
        "junit": testcase.text.split("\nfile: ", 1)[0],
        "csv": " ".join(frame["explanation"][:first]),
        "html": reports["html"].split('<section class="case"', 1)[0],
    }


@pytest.fixture()
def mains(tmp_path: Path) -> list[CaseResult]:
    return _run(_case(tmp_path / "power", "mains", MAINS.format(v="230")))


def test_mains_case_is_flagged_with_the_rms_prospective_current(mains: list[CaseResult]) -> None:
    """230 V RMS with ~1.3 kA prospective: the hazard judgement holds I_N as RMS (to 1e-9, exact solve) above the flag."""
    hazard = mains[0].hazard
    assert hazard is not None and hazard.flagged and hazard.above_elv and hazard.high_current
    assert hazard.source is not None and hazard.source.value == pytest.approx(230.0, rel=1e-12)
    assert hazard.current is not None and not hazard.current.from_peak
    assert hazard.current.value == pytest.approx(MAINS_IN_RMS, rel=1e-9)


def test_mains_caution_states_rms_in_near_the_top_of_every_format(mains: list[CaseResult]) -> None:
    """Every format's top (before any case's numbers) names the hazard, the RMS I_N to 4 figures and the deferral."""
    assert f"{MAINS_IN_RMS:.4g}" == "1298"
    for fmt, top in _top_of_each(mains).items():
        assert "Hazardous levels" in top, fmt
        assert "1.298 kA RMS at 50 Hz (RMS as written)" in top, fmt
        assert "230 V RMS" in top and "above the 50 V RMS extra-low-voltage limit" in top, fmt
        assert "local codes and a licensed engineer" in top, fmt
        assert "from memory" in top and "defer to local codes" in top, fmt


def test_peak_sources_give_in_divided_by_root_two(tmp_path: Path) -> None:
    """Peak sources: I_N is stated as peak / √2 (to 1e-9) and the words say so, in every format's top."""
    peak = _case(tmp_path / "power", "mains_peak", MAINS.format(v=repr(230.0 * math.sqrt(2))), sources="peak")
    results = _run(peak)
    hazard = results[0].hazard
    assert hazard is not None and hazard.current is not None and hazard.current.from_peak
    assert hazard.current.value == pytest.approx(MAINS_IN_RMS, rel=1e-9)
    for fmt, top in _top_of_each(results).items():
        assert "1.298 kA RMS at 50 Hz (1.836 kA peak ÷ √2)" in top, fmt
    case_doc = results_document(results)["cases"][0]["caution"]["hazard"]["prospective_current"]
    assert case_doc["from_peak"] is True and case_doc["unit"] == "A RMS"


def test_low_voltage_case_gets_no_specific_caution(tmp_path: Path) -> None:
    """12 V RMS and 12 A: no format carries a hazard caution, and the general one is still there."""
    results = _run(_case(tmp_path / "bench", "low", LOW))
    hazard = results[0].hazard
    assert hazard is not None and not hazard.flagged
    doc = results_document(results)
    assert doc["cautions"] == [] and doc["cases"][0]["caution"]["text"] is None
    for fmt, text in _reports(results).items():
        assert "Hazardous levels" not in text, fmt
    assert CAUTION in _reports(results)["html"].split('<section class="case"', 1)[0]


def test_case_file_caution_reaches_every_format_near_its_top(tmp_path: Path) -> None:
    """A case file's ``caution`` appears in every format before any case's numbers (a 12 V case: no hazard)."""
    said = "Bench supply only: never connect this divider to the mains (QX-17)."
    results = _run(_case(tmp_path / "bench", "low", LOW, extra=f'caution = "{said}"\n'))
    assert results[0].stated_caution == said
    for fmt, top in _top_of_each(results).items():
        assert "QX-17" in top, fmt
        assert "Hazardous levels" not in top, fmt
    assert results_document(results)["cases"][0]["caution"]["stated"] == said


def test_fault_level_corpus_case_carries_its_caution_and_rms_fault_current() -> None:
    """The corpus fault-level case: its own caution (from the case file) and I''k = 18.86 kA RMS head every format."""
    path = Path(__file__).parent.parent / "corpus" / "power_distribution" / "switchboard_fault_level.toml"
    results = _run(path)
    for fmt, top in _top_of_each(results).items():
        assert "not a protection study" in top, fmt
        assert "18.86 kA RMS at 50 Hz" in top, fmt


def test_html_caution_comes_before_the_first_case_section(mains: list[CaseResult]) -> None:
    """In the HTML page the specific and the general caution sit in the summary, before the first case section."""
    text = html_report(mains)
    first_case = text.index('<section class="case"')
    assert 0 < text.index("Hazardous levels") < first_case
    assert 0 < text.index(CAUTION) < first_case
    assert text.index("Hazardous levels") < text.index("<h2>Cases</h2>")


def test_dc_levels_are_held_against_the_dc_limit(tmp_path: Path) -> None:
    """At 0 Hz a source is DC: 150 V is above 120 V ripple-free DC, 100 V is not (from memory, as the module says)."""
    assert (ELV_AC_RMS_V, ELV_DC_V, HIGH_CURRENT_RMS_A) == (50.0, 120.0, 100.0)
    net = "dc\nV1 1 0 AC {v}\nR1 1 out 10\nRL out 0 1k\n.end\n"
    high = _run(_case(tmp_path / "a", "dc150", net.format(v="150"), freqs='["0"]'))[0].hazard
    low = _run(_case(tmp_path / "b", "dc100", net.format(v="100"), freqs='["0"]'))[0].hazard
    assert high is not None and high.above_elv and high.source is not None and high.source.dc
    assert low is not None and not low.flagged
    assert "150 V DC, above the 120 V DC extra-low-voltage limit" in markdown_report(
        _run(_case(tmp_path / "c", "dc150", net.format(v="150"), freqs='["0"]'))
    )


def test_current_sources_skip_the_voltage_test_and_a_large_current_alone_flags(tmp_path: Path) -> None:
    """A 200 A current source (no voltage of its own) is flagged on |I_N| alone: 200 A RMS to 1e-9, no source level."""
    net = "current\nI1 0 out AC 200\nR1 out 0 1\n.end\n"
    results = _run(_case(tmp_path / "i", "isrc", net))
    hazard = results[0].hazard
    assert hazard is not None and hazard.source is None and not hazard.above_elv
    assert hazard.high_current and hazard.current is not None
    assert hazard.current.value == pytest.approx(200.0, rel=1e-9)
    assert "a prospective short-circuit current |I_N| of 200 A RMS at 50 Hz" in markdown_report(results)


def test_hostile_case_caution_is_inert_in_every_format(tmp_path: Path) -> None:
    """A caution holding markup, a link, a mention and a formula start stays text: escaped or in a code span."""
    hostile = "=HYPERLINK(1) <img src=x onerror=alert(1)> [x](https://e.vil) @team"
    results = _run(_case(tmp_path / "h", "low", LOW, extra=f"caution = {json.dumps(hostile)}\n"))
    reports = _reports(results)
    assert "<img src=x" not in reports["html"] and "&lt;img src=x" in reports["html"]
    assert f"`{hostile}`" in reports["markdown"]
    frame = pd.read_csv(io.StringIO(reports["csv"]), dtype=str, keep_default_na=False)
    assert frame["explanation"][0] == "'" + hostile  # OWASP's rule: a formula start gets a leading quote
    assert "<img" not in reports["junit"]


@pytest.mark.parametrize(
    ("value", "message"),
    [("5", "must be a string"), ('"a\\u0007b"', "control character"), (json.dumps("x" * 100_001), "at most 100000")],
)
def test_case_caution_of_the_wrong_kind_is_refused_naming_the_key(tmp_path: Path, value: str, message: str) -> None:
    """``caution`` must be text without control characters, within the case file's string cap."""
    path = _case(tmp_path / "bad", "low", LOW, extra=f"caution = {value}\n")
    with pytest.raises(CaseFileError, match=rf"key 'caution'.*{message}"):
        load_case(path)


def test_a_hazard_assessed_with_the_network_equals_one_assessed_from_the_case_file(mains: list[CaseResult]) -> None:
    """Judging with the network at hand (``assessed_hazard``) and re-reading the case's netlist agree exactly."""
    from dataclasses import replace

    from crosscheck.judge.hazards import assess_network
    from crosscheck.run.check import load_network

    result = mains[0]
    assert result.case is not None
    network, _ = load_network(result.case)
    given = replace(result, assessed_hazard=assess_network(network, result.own, result.sources))
    assert given.hazard == result.hazard and given.hazard is given.assessed_hazard
