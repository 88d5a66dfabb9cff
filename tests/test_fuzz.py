"""The fuzz loop: a seeded run in CI with no unexplained disagreement, shrinking with an injected fault,
the reproducer files, and the command line. The long run (10,000 cases) is `make fuzz-full`, not here."""

from __future__ import annotations

import json

import pytest

from crosscheck.model.cases import load_case
from crosscheck.run.check import load_network
from crosscheck.cli import main
from crosscheck.judge.compare import compare_quantity
from crosscheck.fuzz import loop
from crosscheck.fuzz.faults import faulty_route, injected
from crosscheck.fuzz.loop import EXPLAINED_PHRASES, FuzzOptions, recheck, run_fuzz
from crosscheck.fuzz.generate import Knobs
from crosscheck.model.tolerance import SOLVER_VS_SPICE
from crosscheck.spice.workers import SpicePool

#: The CI run: at least 300 networks, seeded.
CI_COUNT = 300
CI_SEED = 1


@pytest.fixture(scope="module")
def pool():
    with SpicePool(workers=2) as p:
        yield p


@pytest.mark.spice
def test_seeded_run_has_no_unexplained_disagreement(pool):
    """300 seeded networks of every family: no unexplained fail, no error, no unavailable quantity that the
    case's caveat does not foresee; and the numbers behind the summary are there."""
    summary = run_fuzz(FuzzOptions(count=CI_COUNT, seed=CI_SEED, shrink=False), pool=pool)
    assert summary.cases_run == CI_COUNT
    assert sum(summary.counts.values()) == CI_COUNT
    assert [(o.case.seed, o.status, o.reason) for o in summary.problems] == []
    assert summary.counts["error"] == 0
    for o in summary.explained_cases:
        assert o.explained and o.reason, o.case.seed
        if o.status == "unavailable":
            assert o.case.caveat, o.case.seed
    assert summary.counts["pass"] >= 0.9 * CI_COUNT  # explained cases are the exception, not the rule
    for q in ("vth", "zth", "in"):
        p = summary.percentiles(q)
        assert p["p50"] <= 1e-12, (q, p)  # a median far below the 1e-6 tolerance: the engines agree
    assert summary.verdicts().count("pass") == CI_COUNT


@pytest.mark.spice
def test_shrinking_an_injected_fault(pool, tmp_path):
    """With a fault on, the failing case shrinks to one that still fails and is no larger; its files are a
    ready regression case: the case file loads, and without the fault the shrunk case passes."""
    with pytest.MonkeyPatch.context() as patch, injected("capacitor-inverted"):
        patch.setattr(loop, "thevenin", faulty_route("capacitor-inverted"))  # the fuzz loop's own route, broken
        summary = run_fuzz(FuzzOptions(count=50, seed=2, stop_after_failures=1, out=tmp_path, shrink_budget=150),
                           pool=pool)
        [rep] = summary.reproducers
        original = summary.problems[0]
        assert rep.outcome.problem and rep.outcome.status == original.status
        again = recheck(original.case, rep.shrunk.network, rep.shrunk.port, rep.shrunk.freqs_hz, pool,
                        SOLVER_VS_SPICE)
        assert again.problem
    before, after = rep.shrunk.original_size, rep.shrunk.size
    assert all(a <= b for a, b in zip(after, before)) and after < before, (before, after)
    assert after[2] == 1  # one frequency
    toml = tmp_path / f"fuzz_{rep.seed}.toml"
    assert {p.name for p in tmp_path.iterdir()} >= {toml.name, f"fuzz_{rep.seed}.cir", f"fuzz_{rep.seed}.json",
                                                    "summary.json"}
    case = load_case(toml)
    network, port = load_network(case)
    assert network.elements == rep.shrunk.network.elements and (port.a, port.b) == tuple(rep.shrunk.port)
    assert case.freqs_hz == rep.shrunk.freqs_hz
    assert "capacitor-inverted" in toml.read_text()
    numbers = json.loads((tmp_path / f"fuzz_{rep.seed}.json").read_text())
    point = numbers["shrunk"]["points"][0]
    assert point["own"]["zth"] is not None and point["ngspice"]["zth"] is not None
    healthy = recheck(original.case, network, port, case.freqs_hz, pool, SOLVER_VS_SPICE)
    assert healthy.status == "pass", healthy.reason


@pytest.mark.spice
def test_command_line_json(tmp_path, capsys):
    """`crosscheck fuzz --format json` prints only the summary document on stdout and exits 0 on agreement."""
    code = main(["fuzz", "--count", "12", "--seed", "4", "--workers", "2", "--format", "json",
                 "--out", str(tmp_path), "--family", "bridge", "--nodes", "3", "5"])
    out = capsys.readouterr().out
    doc = json.loads(out)
    assert code == 0, doc["failures"]
    assert doc["cases"] == 12 and doc["knobs"]["family"] == "bridge" and doc["knobs"]["nodes"] == [3, 5]
    assert sum(doc["verdicts"].values()) == 12 and doc["faults_injected"] == []
    assert set(doc["error_percentiles"]) == {"vth", "zth", "in"}
    assert json.loads((tmp_path / "summary.json").read_text())["cases"] == 12


@pytest.mark.spice
def test_case_seed_reruns_one_case(capsys):
    """`--case-seed` runs exactly the cases named, with the seeds reported."""
    code = main(["fuzz", "--case-seed", "1000005", "1000006", "--workers", "1", "--format", "json"])
    doc = json.loads(capsys.readouterr().out)
    assert code == 0 and doc["cases"] == 2 and doc["case_seeds"] == [1000005, 1000006]


def test_command_line_refuses_bad_knobs(capsys):
    """Knobs that cannot work are a usage error (exit 2) naming the problem."""
    assert main(["fuzz", "--nodes", "4", "2"]) == 2
    assert "min <= max" in capsys.readouterr().err
    assert main(["fuzz", "--kinds", "VI"]) == 2
    assert "no R, L or C" in capsys.readouterr().err


def test_explained_phrases_match_the_comparer():
    """The fuzz loop recognises the comparer's ill-conditioning texts; if their wording changes, this fails."""
    tol = SOLVER_VS_SPICE
    ill = compare_quantity("zth", 1.0 + 1e-3, 1.0, tol, condition=1e12, scale=1e-9)
    fits = compare_quantity("zth", 1.0 + 1e-5, 1.0, tol, condition=1e9, scale=1e-9)
    model = compare_quantity("zth", 1.1, 1.0, tol, condition=1.0, scale=1.0)
    assert ill.verdict == fits.verdict == model.verdict == "fail"
    assert any(p in ill.explanation for p in EXPLAINED_PHRASES)
    assert any(p in fits.explanation for p in EXPLAINED_PHRASES)
    assert not any(p in model.explanation for p in EXPLAINED_PHRASES)


def test_options_are_checked():
    """Negative counts and seeds, and no workers, are refused with the value named."""
    for bad in (dict(count=-1), dict(seed=-2), dict(workers=0), dict(case_seeds=(-5,))):
        with pytest.raises(ValueError, match=r"-1|-2|0|-5"):
            FuzzOptions(**bad)
    assert FuzzOptions(case_seeds=(7, 9)).seeds() == [7, 9]
    assert FuzzOptions(count=2, seed=3, knobs=Knobs()).seeds() == [3_000_009, 3_000_010]
