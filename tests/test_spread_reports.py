"""Component spread end to end: the command line, case files, verdicts and every report format.

The failing case (``tests/data/failing_spread``) meets its |Z_th| limit at nominal values and breaks it at a
corner of its tolerances; its corner value is recomputed here from the series-parallel formula.
"""

from __future__ import annotations

import csv
import io
import json
import math
from pathlib import Path
from xml.etree import ElementTree as ET

import numpy as np
import pytest

from crosscheck.cli import EXIT_FAIL, EXIT_OK, EXIT_USAGE, main
from crosscheck.errors import CaseFileError
from crosscheck.model.cases import load_case
from crosscheck.model.vary import PERCENTILES
from crosscheck.report.csv_out import csv_report
from crosscheck.report.html import html_report
from crosscheck.report.junit import junit_xml
from crosscheck.report.markdown import markdown_report
from crosscheck.report.results_json import results_document
from crosscheck.run.check import run_cases
from crosscheck.spice.workers import SpicePool
from crosscheck.vocabulary import Verdict

FAILING = Path(__file__).resolve().parent / "data" / "failing_spread" / "hydrophone_adc_filter.toml"
NETLIST = FAILING.with_suffix(".cir")


def _zth_at_corner(rbo: float, raa: float, caa: float, rbias: float, f: float) -> complex:
    """Z_th = (Rbo + Raa) || Caa || Rbias (recomputed by this project, the formula in the case's how)."""
    zc = 1 / (2j * math.pi * f * caa)
    return 1 / (1 / (rbo + raa) + 1 / zc + 1 / rbias)


@pytest.fixture(scope="module")
def failing_result():
    with SpicePool(workers=2) as pool:
        [result] = run_cases([load_case(FAILING)], engine="both", pool=pool)
    return result


@pytest.mark.spice
def test_reduce_json_has_the_spread_of_every_point(capsys):
    """`reduce --vary --samples --seed --format json`: points[i].spread.{vth,zth,in} with every field, checked."""
    code = main([
        "reduce", str(NETLIST), "--port", "adc", "0", "--freq", "100", "1.6k", "--vary", "R*=1%",
        "--vary", "Caa=5%", "--samples", "2000", "--seed", "1", "--spice-samples", "5", "--format", "json",
    ])  # fmt: skip
    doc = json.loads(capsys.readouterr().out)
    assert code == EXIT_OK and doc["verdict"] == "pass"
    assert len(doc["points"]) == 2
    for point in doc["points"]:
        for q in ("vth", "zth", "in"):
            s = point["spread"][q]
            assert set(s) == {"nominal", "sensitivities", "worst_case", "monte_carlo", "spice_checks"}
            assert set(s["sensitivities"]) == {"rbo", "raa", "caa", "rbias"}
            assert all(set(v) == {"abs", "phase_deg"} for v in s["sensitivities"].values())
            assert set(s["worst_case"]) == {"abs", "phase_deg", "re", "im"}
            for e in s["worst_case"].values():
                assert e["min"] <= e["max"] and set(e["min_corner"]) == {"rbo", "raa", "caa", "rbias"}
            mc = s["monte_carlo"]
            assert mc["samples"] == 2000 and set(mc["percentiles"]) == {"abs", "phase_deg"}
            assert [float(k) for k in mc["percentiles"]["abs"]] == list(PERCENTILES)
            kinds = {c["kind"] for c in s["spice_checks"]}
            assert kinds >= {"sensitivity", "corner", "sample"}
            assert all(c["verdict"] == "pass" for c in s["spice_checks"])
    # |Z_th| at 1.6 kHz: the nominal value and the worst case against the formula (1e-9 relative).
    zth = doc["points"][1]["spread"]["zth"]
    nominal = _zth_at_corner(1000, 470, 100e-9, 22e3, 1600)
    assert complex(zth["nominal"]["re"], zth["nominal"]["im"]) == pytest.approx(nominal, rel=1e-9)
    high = _zth_at_corner(1010, 474.7, 95e-9, 22220, 1600)
    assert zth["worst_case"]["abs"]["max"] == pytest.approx(abs(high), rel=1e-9)
    assert doc["spread"]["caution"].startswith("Spread analysis covers only the stated tolerances")


@pytest.mark.spice
def test_a_limit_met_at_nominal_but_broken_at_a_corner_fails(failing_result):
    """The nominal limit passes; over the spread it fails at the corner named with its part values."""
    r = failing_result
    assert [lim.verdict for lim in r.limits] == [Verdict.PASS]
    [lim] = r.spread.limits
    assert lim.verdict == Verdict.FAIL and lim.nominal_verdict == Verdict.PASS
    assert "fails at corner rbo = 1.01k, raa = 474.7, caa = 95n, rbias = 22.22k" in lim.explanation
    assert lim.spread.highest == pytest.approx(abs(_zth_at_corner(1010, 474.7, 95e-9, 22220, 1600)), rel=1e-9)
    assert r.verdict == Verdict.FAIL
    assert all(c.verdict == Verdict.PASS for c in r.spread.checks) and len(r.spread.checks) > 20
    # ngspice at the failing corner gives the same |Z_th| (to the case's tolerance): the fail is both engines'.
    [confirm] = [c for c in r.spread.checks if c.kind == "limit-corner" and c.subject == "highest"]
    assert confirm.spice == pytest.approx(lim.spread.highest, rel=1e-6) and confirm.spice > 830


@pytest.mark.spice
def test_the_histogram_samples_are_the_monte_carlo_samples(failing_result):
    """The figure's samples give the same percentiles of |Z_th| as the own route's Monte Carlo (1e-12)."""
    spread = failing_result.spread
    h = spread.histogram
    assert h is not None and len(h.zth) == 2000
    mc = spread.points[0].zth.monte_carlo
    ours = np.percentile(np.abs(h.zth), PERCENTILES)
    assert ours == pytest.approx([mc.abs_percentiles[p] for p in PERCENTILES], rel=1e-12)


@pytest.mark.spice
def test_every_format_carries_the_spread(failing_result):
    """JUnit fails the case naming the corner; CSV, markdown and HTML each carry their spread section."""
    results = [failing_result]
    case = results_document(results)["cases"][0]
    assert case["spread"]["limits"][0]["verdict"] == "fail"
    corner = case["spread"]["limits"][0]["failing_corner"]
    assert corner == pytest.approx({"rbo": 1010.0, "raa": 474.7, "caa": 95e-9, "rbias": 22220.0}, rel=1e-12)
    assert {c["kind"] for c in case["points"][0]["spread"]["zth"]["spice_checks"]} >= {"corner", "limit-corner"}
    tree = ET.fromstring(junit_xml(results))
    failure = tree.find(".//testcase/failure")
    assert failure is not None and "fails at corner" in failure.get("message", "") + (failure.text or "")
    rows = list(csv.DictReader(io.StringIO(csv_report(results))))
    limit_rows = [r for r in rows if r["check"] == "spread-limit"]
    assert [r["verdict"] for r in limit_rows] == ["fail"]
    assert {r["check"] for r in rows} >= {"spread-sensitivity", "spread-corner", "spread-sample"}
    assert any(r["check"] == "caution" and r["quantity"] == "spread" for r in rows)
    md = markdown_report(results)
    assert "#### Component spread" in md and "limit over spread, **fail**" in md
    page = html_report(results)
    assert "<h4>Component spread</h4>" in page and 'figure class="spread"' in page
    assert '<figure class="spread"><img class="plot" src="data:image/svg+xml;base64,' in page
    assert "data:image/png" not in page
    assert "Spread analysis covers only the stated tolerances" in page


def test_case_file_spread_keys():
    """[[vary]] with samples and seed reads into a SpreadSpec; samples without [[vary]] is refused by key."""
    case = load_case(FAILING)
    assert case.spread is not None
    assert (case.spread.samples, case.spread.seed, case.spread.spice_samples) == (2000, 7, 10)
    assert [v.parts for v in case.spread.varies] == [("r*",), ("caa",)]


def test_samples_without_vary_is_refused(tmp_path):
    (tmp_path / "n.cir").write_text(NETLIST.read_text(encoding="utf-8"), encoding="utf-8")
    (tmp_path / "c.toml").write_text('netlist = "n.cir"\nport = ["adc", "0"]\nfrequencies = ["1k"]\nsamples = 10\n')
    with pytest.raises(CaseFileError, match="key 'samples'.*\\[\\[vary\\]\\]"):
        load_case(tmp_path / "c.toml")


def test_a_bad_vary_option_is_a_usage_error(capsys):
    with pytest.raises(SystemExit) as stop:
        main(["reduce", str(NETLIST), "--port", "adc", "0", "--freq", "1k", "--vary", "R*=150%"])
    assert stop.value.code == EXIT_USAGE
    assert "below 100%" in capsys.readouterr().err


@pytest.mark.spice
def test_verify_exit_code_and_text(capsys):
    """`verify` on the failing case exits 1 and its text names the limit over spread."""
    code = main(["verify", str(FAILING)])
    out = capsys.readouterr().out
    assert code == EXIT_FAIL
    assert "limit over spread: fail" in out


def test_every_corpus_field_has_a_case_with_spread_and_a_limit_over_it():
    """Each field folder of the corpus holds a case stating [[vary]] (each entry with a why) and a [[limit]]."""
    corpus = Path(__file__).resolve().parent.parent / "corpus"
    fields = sorted(p.name for p in corpus.iterdir() if p.is_dir())
    with_spread = set()
    for path in corpus.rglob("*.toml"):
        case = load_case(path)
        if case.spread is not None and case.limits:
            assert all(v.why.strip() for v in case.spread.varies), f"{path}: a [[vary]] without why"
            with_spread.add(path.relative_to(corpus).parts[0])
    assert sorted(with_spread) == fields
