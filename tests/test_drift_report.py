"""Drift reports lead with the worst change and name the netlist elements that changed."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pytest

from crosscheck.judge.baseline import (
    BaselineCorrupt,
    element_changes,
    load_baseline,
    update_baseline_file,
)
from crosscheck.model.cases import load_case
from crosscheck.report.frame import case_reason
from crosscheck.run.check import run_cases

CORPUS = Path(__file__).resolve().parent.parent / "corpus" / "audio"


@pytest.fixture()
def corpus(tmp_path: Path) -> tuple[list[Path], Path]:
    """A copy of the audio corpus with a baseline written from it; the mixer case keeps no hand values or
    limits, so that a changed resistor makes it drift and nothing else."""
    folder = tmp_path / "audio"
    shutil.copytree(CORPUS, folder)
    mixer = folder / "mixer_line_out.toml"
    mixer.write_text(mixer.read_text().split("\n[[expect]]")[0] + "\n")
    paths = sorted(folder.glob("*.toml"))
    target = folder / "baseline.json"
    update_baseline_file(_run(paths), target)
    return paths, target


def _run(paths, baseline=None):
    return run_cases([load_case(p) for p in paths], engine="own", baseline=baseline)


def _change_resistor(folder: Path) -> None:
    cir = folder / "mixer_line_out.cir"
    cir.write_text(cir.read_text().replace(".param rbuild=100 ", ".param rbuild=120 "))


def test_verify_headline_is_the_worst_change_and_names_the_element(corpus) -> None:
    """After one resistor changes, the case's headline (its first drift record and case_reason) is its
    worst change, with its percentage, and names the resistor with old and new value."""
    paths, target = corpus
    _change_resistor(target.parent)
    results = _run(paths, load_baseline(target))
    mixer = next(r for r in results if r.name.endswith("mixer_line_out.toml"))
    others = [r for r in results if r is not mixer]
    assert mixer.verdict == "drift" and all(r.verdict != "drift" for r in others)
    drifted = [d for d in mixer.drift if d.verdict == "drift"]
    worst = max(drifted, key=lambda d: d.rel_err)
    assert drifted[0] is worst
    headline = case_reason(mixer)
    assert f"{worst.rel_err * 100:.3g} %" in headline
    assert "rbuild 100 Ω → 120 Ω" in headline
    assert f"worst of {len(drifted)}" in headline
    # The reason is said once, on the worst record; the others say where and how much.
    assert sum("changed since the baseline" in d.explanation for d in drifted) == 1
    assert mixer.baseline_note.startswith(f"{len(drifted)} value(s) drifted; worst")
    assert "rbuild 100 Ω → 120 Ω" in mixer.baseline_note


def test_update_report_leads_with_the_worst_and_is_one_line_per_case(corpus) -> None:
    """--update-baseline's first line names the worst change (case, quantity, frequency, percent) and the
    changed element; the moved points are one line for the case, not one per point."""
    paths, target = corpus
    _change_resistor(target.parent)
    before = load_baseline(target)
    lines = update_baseline_file(_run(paths), target).lines(target)
    first = lines[0]
    assert first.startswith("worst change: mixer_line_out.toml ") and "netlist: rbuild 100 Ω → 120 Ω" in first
    after = load_baseline(target)
    stored_old = before.cases["mixer_line_out.toml"]
    stored_new = after.cases["mixer_line_out.toml"]
    rels = [
        abs(p.values[q] - stored_old.point(p.freq_hz).values[q]) / abs(stored_old.point(p.freq_hz).values[q])
        for p in stored_new.points
        for q in ("vth", "zth", "in")
        if p.values[q] is not None and stored_old.point(p.freq_hz).values[q]
    ]
    assert f"relative change {max(rels) * 100:.3g} %" in first  # tolerance: 3 significant figures, as printed
    assert len(lines) <= 2 + len(paths)  # headline, counts, one changed and one moved line for the case
    assert sum(line.startswith("  moved    mixer_line_out.toml") for line in lines) == 1


def test_old_baseline_without_element_cards_is_still_read(corpus) -> None:
    """A baseline written before element cards were stored reads, and its drift says how to add them."""
    paths, target = corpus
    doc = json.loads(target.read_text())
    for entry in doc["cases"].values():
        del entry["elements"]
    target.write_text(json.dumps(doc))
    _change_resistor(target.parent)
    mixer = next(r for r in _run(paths, load_baseline(target)) if r.name.endswith("mixer_line_out.toml"))
    assert mixer.verdict == "drift" and "predates per-element records" in mixer.baseline_note


@pytest.mark.parametrize("cards", [["r1 a b 1"], {"r1": "r1 a b 1\nrm -rf"}, {"r1;x": "R a b 1.0"}, {"r1": 5}])
def test_malformed_element_cards_are_refused(corpus, cards) -> None:
    """Element cards that are not name -> plain card text are refused as a corrupt baseline."""
    _, target = corpus
    doc = json.loads(target.read_text())
    next(iter(doc["cases"].values()))["elements"] = cards
    target.write_text(json.dumps(doc))
    with pytest.raises(BaselineCorrupt, match="elements"):
        load_baseline(target)


def test_element_changes_names_added_removed_and_changed() -> None:
    """Value changes read as old → new with the unit; other edits, additions and removals by name."""
    before = {"r1": "R a b 1000.0", "c1": "C b 0 1e-06", "l1": "L b c 0.001"}
    after = {"r1": "R a b 1200.0", "c1": "C b 1 1e-06", "r9": "R c 0 50.0"}
    assert element_changes(before, after) == (
        "c1 'C b 0 1e-06' → 'C b 1 1e-06'; l1 removed; r1 1 kΩ → 1.2 kΩ; r9 added"
    )
    assert element_changes(before, before) == "" and element_changes(None, after) == ""
