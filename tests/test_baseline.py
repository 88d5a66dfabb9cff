"""Baselines: exact round trip, drift beyond the baseline tolerance, notes for what is missing, explicit updates."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from crosscheck.judge.baseline import BaselineError, case_key, diff_baselines, format_changes, load_baseline, updated_baseline, write_baseline
from crosscheck.model.cases import load_case
from crosscheck.run.check import run_cases
from crosscheck.cli import EXIT_DRIFT, EXIT_ERROR, EXIT_FAIL, EXIT_OK, EXIT_UNAVAILABLE, EXIT_USAGE, exit_code, main
from crosscheck.vocabulary import worst
from crosscheck.model.tolerance import BASELINE

RC = "rc\nV1 in 0 AC 1 30\nR1 in out 1k\nC1 out 0 1u\n.end\n"
RL = "rl\nV1 in 0 AC 2\nR1 in out 50\nL1 out 0 1m\n.end\n"


def _corpus(folder: Path) -> list[Path]:
    folder.mkdir(parents=True, exist_ok=True)
    (folder / "rc.cir").write_text(RC)
    (folder / "rl.cir").write_text(RL)
    paths = []
    for name in ("rc", "rl"):
        path = folder / f"{name}.toml"
        path.write_text(f'netlist = "{name}.cir"\nport = ["out", "0"]\nfrequencies = ["50", "1k", "20k"]\n')
        paths.append(path)
    return paths


def _run(paths, baseline=None):
    return run_cases([load_case(p) for p in paths], engine="own", baseline=baseline)


def _nudge(path: Path, case: str, quantity: str, factor: float) -> None:
    """Scale one stored quantity at the first frequency, as if an earlier solver had answered that."""
    doc = json.loads(path.read_text())
    point = doc["cases"][case]["points"][0]
    point[quantity] = {"re": point[quantity]["re"] * factor, "im": point[quantity]["im"] * factor}
    path.write_text(json.dumps(doc))


def test_round_trip_is_exact(tmp_path):
    """Written and read back, every stored number is the same double; version and hashes are kept."""
    paths = _corpus(tmp_path / "corpus")
    results = _run(paths)
    target = tmp_path / "corpus" / "baseline.json"
    baseline, kept = updated_baseline(results, target)
    write_baseline(baseline, target)
    back = load_baseline(target)
    assert kept == {}
    assert set(back.cases) == {"rc.toml", "rl.toml"}
    for r in results:
        stored = back.cases[case_key(r.name, target)]
        assert stored.case_sha256 is not None and len(stored.case_sha256) == 64
        for eq, point in zip(r.own, stored.points):
            assert point.freq_hz == eq.freq_hz
            assert point.values == {"vth": eq.vth, "zth": eq.zth, "in": eq.in_}  # exact, no tolerance
    assert back.crosscheck_version == baseline.crosscheck_version
    # A second run against it shows no drift at all.
    again = _run(paths, back)
    assert all(d.verdict == "pass" for r in again for d in r.drift)
    assert all(len(r.drift) == 3 * 3 for r in again)  # 3 frequencies × V_th, Z_th, I_N
    assert [r.verdict for r in again] == ["pass", "pass"]


def test_drift_beyond_tolerance_is_its_own_verdict(tmp_path):
    """A stored Z_th 1e-6 away (1000× the 1e-9 baseline tolerance) is drift; 1e-12 away is not."""
    paths = _corpus(tmp_path / "corpus")
    target = tmp_path / "corpus" / "baseline.json"
    write_baseline(updated_baseline(_run(paths), target)[0], target)
    _nudge(target, "rc.toml", "zth", 1 + 1e-6)
    _nudge(target, "rl.toml", "vth", 1 + 1e-12)
    rc, rl = _run(paths, load_baseline(target))
    moved = [d for d in rc.drift if d.verdict == "drift"]
    assert [(d.freq_hz, d.quantity) for d in moved] == [(50.0, "zth")]
    assert moved[0].rel_err == pytest.approx(1e-6 / (1 + 1e-6), rel=1e-9)  # relative to the stored value
    assert "unchanged" in moved[0].explanation and "--update-baseline" in rc.baseline_note
    assert rc.verdict == "drift" and rc.explanation == moved[0].explanation
    assert rl.verdict == "pass"
    assert exit_code([rc.verdict, rl.verdict]) == EXIT_DRIFT


def test_changed_case_is_said_to_be_changed(tmp_path):
    """When the netlist changed since the baseline, drift says so (the change may be intended)."""
    paths = _corpus(tmp_path / "corpus")
    target = tmp_path / "corpus" / "baseline.json"
    write_baseline(updated_baseline(_run(paths), target)[0], target)
    (tmp_path / "corpus" / "rc.cir").write_text(RC.replace("1k", "1.1k"))
    rc, _ = _run(paths, load_baseline(target))
    assert rc.verdict == "drift"
    assert "changed since the baseline" in rc.explanation
    assert "changed" in rc.baseline_note


def test_case_missing_from_baseline_is_a_note_not_a_failure(tmp_path):
    """A case the baseline does not hold gets a note and no drift checks; it still passes."""
    paths = _corpus(tmp_path / "corpus")
    target = tmp_path / "corpus" / "baseline.json"
    write_baseline(updated_baseline(_run(paths[:1]), target)[0], target)
    rc, rl = _run(paths, load_baseline(target))
    assert rl.drift == () and rl.verdict == "pass"
    assert "not in the baseline" in rl.baseline_note
    assert rc.baseline_note == "" and rc.drift


def test_new_frequency_is_a_note(tmp_path):
    """A frequency the baseline does not hold is a note, not drift."""
    paths = _corpus(tmp_path / "corpus")
    target = tmp_path / "corpus" / "baseline.json"
    write_baseline(updated_baseline(_run(paths), target)[0], target)
    paths[0].write_text('netlist = "rc.cir"\nport = ["out", "0"]\nfrequencies = ["50", "1k", "20k", "100k"]\n')
    rc, _ = _run(paths, load_baseline(target))
    assert rc.verdict == "pass"
    assert "not in the baseline" in rc.baseline_note


def test_update_lists_added_changed_kept_and_moved(tmp_path):
    """Writing a new baseline over an old one names each change with old → new; a case not run is kept."""
    paths = _corpus(tmp_path / "corpus")
    target = tmp_path / "corpus" / "baseline.json"
    write_baseline(updated_baseline(_run(paths[:1]), target)[0], target)
    _nudge(target, "rc.toml", "vth", 1 + 1e-6)
    old = load_baseline(target)
    old.cases["gone.toml"] = old.cases["rc.toml"]
    new, kept = updated_baseline(_run(paths), target, old)
    changes = diff_baselines(old, new, kept)
    assert changes.added == ("rl.toml",)
    assert changes.removed == () and [k for k, _ in changes.kept] == ["gone.toml"]
    assert new.cases["gone.toml"] == old.cases["gone.toml"]
    assert [k for k, _ in changes.changed] == ["rc.toml"]
    assert [(m.case, m.freq_hz, m.quantity) for m in changes.moved] == [("rc.toml", 50.0, "vth")]
    text = "\n".join(format_changes(changes, target))
    assert "1 added, 1 changed, 0 unchanged, 1 kept, 0 removed" in text
    assert "added    rl.toml" in text and "kept     gone.toml (not in this run" in text and "→" in text
    pruned, kept = updated_baseline(_run(paths), target, old, prune=True)
    changes = diff_baselines(old, pruned, kept)
    assert changes.removed == ("gone.toml",) and "gone.toml" not in pruned.cases
    assert "removed  gone.toml (not in this run; --prune)" in "\n".join(format_changes(changes, target))
    unchanged = diff_baselines(new, new)
    assert unchanged.empty and "no changes" in format_changes(unchanged, target)[0]


def test_errored_case_keeps_its_entry(tmp_path):
    """A case that produced no equivalents this time keeps its old entry, and the update says so."""
    paths = _corpus(tmp_path / "corpus")
    target = tmp_path / "corpus" / "baseline.json"
    old = updated_baseline(_run(paths), target)[0]
    (tmp_path / "corpus" / "rl.cir").write_text("broken\nR1 out 0 -5\n.end\n")
    results = _run(paths)
    assert results[1].verdict == "error"
    new, kept = updated_baseline(results, target, old)
    assert list(kept) == ["rl.toml"] and "error" in kept["rl.toml"]
    assert new.cases["rl.toml"] == old.cases["rl.toml"]


@pytest.mark.parametrize("content, words", [
    ("not json", "not valid JSON"),
    ('{"format": "something else"}', "not a crosscheck baseline"),
    ('{"format": "crosscheck baseline", "format_version": 99, "cases": {}}', "format version"),
    ('{"format": "crosscheck baseline", "format_version": 1, "cases": {"a": {"points": [{"freq_hz": 1, '
     '"vth": {"re": "x"}}]}}}', "--replace-corrupt"),
])
def test_bad_baseline_files_are_refused(tmp_path, content, words):
    """Each malformed file is a BaselineError naming what is wrong."""
    path = tmp_path / "b.json"
    path.write_text(content)
    with pytest.raises(BaselineError, match=words):
        load_baseline(path)


def test_missing_baseline_says_how_to_write_one(tmp_path):
    """A missing file names the command that writes one."""
    with pytest.raises(BaselineError, match="--update-baseline"):
        load_baseline(tmp_path / "none.json")


def test_drift_ranks_between_unavailable_and_fail():
    """pass < unavailable < drift < fail < error, and exit code 5 only when nothing failed."""
    assert worst(["unavailable", "drift"]) == "drift"
    assert worst(["drift", "fail"]) == "fail"
    assert exit_code(["pass", "drift", "unavailable"]) == EXIT_DRIFT
    assert exit_code(["drift", "fail"]) == EXIT_FAIL
    assert exit_code(["unavailable"]) == EXIT_UNAVAILABLE
    assert EXIT_DRIFT == 5
    assert BASELINE.rel == 1e-9


# --------------------------------------------------------------------------- command line (runs ngspice)


@pytest.mark.spice
def test_cli_verify_with_baseline(tmp_path, capsys):
    """--update-baseline writes and lists; a later run passes; a moved value exits 5 and shows old → new."""
    folder = tmp_path / "corpus"
    _corpus(folder)
    target = folder / "baseline.json"
    assert main(["verify", str(folder), "--baseline", str(target)]) == EXIT_ERROR
    assert "--update-baseline" in capsys.readouterr().err
    assert main(["verify", str(folder), "--update-baseline"]) == EXIT_USAGE
    capsys.readouterr()
    assert main(["verify", str(folder), "--baseline", str(target), "--update-baseline"]) == EXIT_OK
    out = capsys.readouterr().out
    assert "2 added, 0 changed" in out and target.exists()
    assert main(["verify", str(folder), "--baseline", str(target)]) == EXIT_OK
    capsys.readouterr()
    _nudge(target, "rc.toml", "zth", 1 + 1e-6)
    assert main(["verify", str(folder), "--baseline", str(target)]) == EXIT_DRIFT
    out = " ".join(capsys.readouterr().out.split())
    assert "drift" in out and "moved from" in out
    assert main(["verify", str(folder), "--baseline", str(target), "--format", "json"]) == EXIT_DRIFT
    doc = json.loads(capsys.readouterr().out)
    rc = next(c for c in doc["cases"] if c["case"].endswith("rc.toml"))
    assert rc["verdict"] == "drift" and any(d["verdict"] == "drift" for d in rc["drift"])
    assert main(["verify", str(folder), "--baseline", str(target), "--update-baseline"]) == EXIT_OK
    out = capsys.readouterr().out
    assert "changed  rc.toml (1 quantity(ies) moved" in out and "moved    rc.toml" in out


def test_malformed_case_entry_is_refused(tmp_path):
    """A case entry that is not an object is refused with the fix, not a traceback."""
    path = tmp_path / "b.json"
    path.write_text('{"format": "crosscheck baseline", "format_version": 1, "cases": {"a.toml": 3}}')
    with pytest.raises(BaselineError, match="malformed"):
        load_baseline(path)
