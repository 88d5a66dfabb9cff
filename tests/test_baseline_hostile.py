"""Baselines are never lost: concurrent updates, partial updates, corrupt and hostile files, the lock, the index."""

from __future__ import annotations

import fcntl
import json
import os
import shlex
import signal
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

import crosscheck.judge.baseline_file as baseline_file
from crosscheck.cli import EXIT_ERROR, EXIT_OK, main
from crosscheck.judge.baseline import (
    Baseline,
    BaselineCorrupt,
    BaselineError,
    StoredCase,
    StoredPoint,
    diff_baselines,
    drift_checks,
    load_baseline,
    stored_case,
    update_baseline_file,
    write_baseline,
)
from crosscheck.model.cases import load_case
from crosscheck.own.equivalent import Equivalent
from crosscheck.run.check import run_cases

RC = "rc\nV1 in 0 AC 1 30\nR1 in out 1k\nC1 out 0 1u\n.end\n"
RL = "rl\nV1 in 0 AC 2\nR1 in out 50\nL1 out 0 1m\n.end\n"
ROOT = Path(__file__).resolve().parent.parent


def _case(folder: Path, name: str, netlist: str) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    (folder / f"{name}.cir").write_text(netlist)
    path = folder / f"{name}.toml"
    path.write_text(f'netlist = "{name}.cir"\nport = ["out", "0"]\nfrequencies = ["50", "1k"]\n')
    return path


def _corpus(root: Path) -> dict[str, Path]:
    """Two subsets, a/ and b/, of two cases each."""
    return {
        f"{sub}/{name}.toml": _case(root / sub, name, text)
        for sub in ("a", "b")
        for name, text in (("rc", RC), ("rl", RL))
    }


def _results(paths):
    return run_cases([load_case(p) for p in paths], engine="own")


def _doc(points: str = '{"freq_hz": 50, "vth": null, "zth": null, "in": {"re": 1, "im": 0}}') -> str:
    return (
        '{"format": "crosscheck baseline", "format_version": 1, "cases": {"a.toml": {"case_sha256": null, '
        f'"netlist_sha256": null, "port": ["out", "0"], "points": [{points}]}}}}}}'
    )


# --------------------------------------------------------------------------- partial updates and --prune


def test_partial_update_keeps_the_cases_it_did_not_run(tmp_path):
    """Updating from subset b/ leaves a/'s entries byte for byte and lists them as kept."""
    corpus = _corpus(tmp_path)
    target = tmp_path / "baseline.json"
    update_baseline_file(_results(corpus.values()), target)
    before = json.loads(target.read_text())["cases"]
    report = update_baseline_file(_results([corpus["b/rc.toml"], corpus["b/rl.toml"]]), target)
    after = json.loads(target.read_text())["cases"]
    assert set(after) == set(corpus) and after == before  # same numbers: nothing moved
    assert [k for k, _ in report.changes.kept] == ["a/rc.toml", "a/rl.toml"]
    assert report.changes.unchanged == ("b/rc.toml", "b/rl.toml") and report.changes.removed == ()
    text = "\n".join(report.lines(target))
    assert "0 added, 0 changed, 2 unchanged, 2 kept, 0 removed" in text
    assert "kept     a/rc.toml (not in this run" in text


def test_prune_removes_only_what_did_not_run_and_lists_it(tmp_path):
    """With prune the cases not in this run go, each named as removed; the run's cases stay."""
    corpus = _corpus(tmp_path)
    target = tmp_path / "baseline.json"
    update_baseline_file(_results(corpus.values()), target)
    report = update_baseline_file(_results([corpus["b/rc.toml"]]), target, prune=True)
    assert set(load_baseline(target).cases) == {"b/rc.toml"}
    assert report.changes.removed == ("a/rc.toml", "a/rl.toml", "b/rl.toml")
    text = "\n".join(report.lines(target))
    assert "removed  a/rl.toml (not in this run; --prune)" in text and "3 removed" in text


def test_non_finite_result_is_not_stored(tmp_path):
    """A run whose own value is inf keeps the previous entry instead of writing what cannot be read back."""
    corpus = _corpus(tmp_path)
    target = tmp_path / "baseline.json"
    [result] = _results([corpus["a/rc.toml"]])
    update_baseline_file([result], target)
    eq = result.own[0]
    broken = type(result)(**{**result.__dict__, "own": (Equivalent(eq.freq_hz, complex("inf"), eq.zth, eq.in_, eq.yn, 1.0),)})
    report = update_baseline_file([broken], target)
    assert "cannot store" in dict(report.changes.kept)["a/rc.toml"]
    assert load_baseline(target).cases["a/rc.toml"].points[0].values["vth"] == eq.vth  # exact: the old entry
    with pytest.raises(BaselineError, match="finite numbers only"):
        write_baseline(Baseline("x", {"a/rc.toml": stored_case(broken)}), target)


# --------------------------------------------------------------------------- corrupt and hostile files


@pytest.mark.parametrize(
    "content, words",
    [
        (_doc('{"freq_hz": 50, "vth": {"re": "inf", "im": 0}, "zth": null, "in": null}'), "non-finite"),
        (_doc('{"freq_hz": 50, "vth": {"re": "nan", "im": 0}, "zth": null, "in": null}'), "non-finite"),
        (_doc('{"freq_hz": 50, "vth": {"re": NaN, "im": 0}, "zth": null, "in": null}'), "non-finite number NaN"),
        (_doc('{"freq_hz": 50, "vth": {"re": -Infinity, "im": 0}, "zth": null, "in": null}'), "non-finite"),
        (_doc('{"freq_hz": 50, "vth": {"re": 1e999, "im": 0}, "zth": null, "in": null}'), "non-finite"),
        (_doc('{"freq_hz": Infinity, "vth": null, "zth": null, "in": null}'), "non-finite"),
        (_doc('{"freq_hz": -5, "vth": null, "zth": null, "in": null}'), "negative"),
        (_doc('{"freq_hz": true, "vth": null, "zth": null, "in": null}'), "malformed"),
        (_doc('{"freq_hz": "50", "vth": null, "zth": null, "in": null}'), "malformed"),
        (_doc('{"freq_hz": 50, "vth": {"re": 1}, "zth": null, "in": null}'), r"vth must be"),
        (_doc('{"freq_hz": 50, "vth": null, "zth": null}'), "in is missing"),
        (_doc("7"), r"points\[0\] must be an object"),
        (_doc('{"freq_hz": 1' + "0" * 400 + ', "vth": null, "zth": null, "in": null}'), "integer of 401 digits"),
        (_doc('{"freq_hz": 1' + "0" * 5000 + ', "vth": null, "zth": null, "in": null}'), "integer of 5001 digits"),
        ('{"a": ' * 100_000 + "1" + "}" * 100_000, "nested deeper than 16"),
        ("[" * 2000, "nested deeper than 16"),
        (_doc().replace('"case_sha256": null', '"case_sha256": "../../etc"'), "64 hex digits"),
        (_doc().replace('"port": ["out", "0"]', '"port": "out"'), "port must be two node names"),
        ('{"format": "crosscheck baseline", "format_version": true, "cases": {}}', "format version True"),
        ("\xff\xfe not text", "not valid JSON|not UTF-8"),
        ("", "not valid JSON"),
    ],
)
def test_hostile_baselines_are_refused_cleanly(tmp_path, content, words):
    """Every hostile file is BaselineCorrupt naming the problem and the repair command, never a traceback."""
    path = tmp_path / "b.json"
    path.write_text(content, encoding="utf-8", errors="surrogateescape")
    with pytest.raises(BaselineCorrupt, match=words) as info:
        load_baseline(path)
    assert "--update-baseline --replace-corrupt" in str(info.value) and "b.json.corrupt" in str(info.value)


def test_brackets_inside_strings_do_not_count_as_nesting(tmp_path):
    """A port name of 100 brackets, escaped quotes and backslashes is text: the file loads."""
    name = "[" * 100 + '\\"{' * 50 + "\\\\"
    path = tmp_path / "b.json"
    path.write_text(_doc().replace('"port": ["out", "0"]', f'"port": ["{name}", "0"]'))
    assert load_baseline(path).cases["a.toml"].port == ("[" * 100 + '"{' * 50 + "\\", "0")


def test_oversized_baseline_is_refused_unread(tmp_path, monkeypatch):
    """A file over the size cap is refused with its size and the cap, before parsing."""
    monkeypatch.setattr(baseline_file, "MAX_BYTES", 2**20)
    path = tmp_path / "b.json"
    path.write_bytes(b" " * (2**20 + 1))
    with pytest.raises(BaselineCorrupt, match=r"1048577 bytes, over the 1 MiB"):
        load_baseline(path)


def test_replace_corrupt_keeps_the_refused_file(tmp_path):
    """Without the flag a corrupt file stops the update untouched; with it the file is rewritten and kept aside."""
    corpus = _corpus(tmp_path)
    target = tmp_path / "baseline.json"
    target.write_text("{ truncated")
    with pytest.raises(BaselineCorrupt):
        update_baseline_file(_results(corpus.values()), target)
    assert target.read_text() == "{ truncated"
    (tmp_path / "baseline.json.corrupt").write_text("an older refused file")
    report = update_baseline_file(_results(corpus.values()), target, replace_corrupt=True)
    assert report.corrupt_kept_as == tmp_path / "baseline.json.corrupt.1"
    assert report.corrupt_kept_as.read_text() == "{ truncated"
    assert (tmp_path / "baseline.json.corrupt").read_text() == "an older refused file"
    assert set(load_baseline(target).cases) == set(corpus)
    assert "refused file is kept as" in report.lines(target)[0]


# --------------------------------------------------------------------------- writing and the lock


def test_failed_write_leaves_the_old_file_and_no_temporary(tmp_path, monkeypatch):
    """If the rename fails the baseline is untouched and the temporary file is removed."""
    corpus = _corpus(tmp_path)
    target = tmp_path / "baseline.json"
    update_baseline_file(_results(corpus.values()), target)
    before = target.read_bytes()

    def broken_replace(src, dst):
        raise OSError("disk full")

    monkeypatch.setattr(baseline_file.os, "replace", broken_replace)
    with pytest.raises(OSError, match="disk full"):
        update_baseline_file(_results(corpus.values()), target, prune=True)
    assert target.read_bytes() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a", "b", "baseline.json", "baseline.json.lock"]


def test_lock_is_exclusive_and_released_when_its_holder_is_killed(tmp_path):
    """While held no one else can flock BASELINE.lock; a process killed holding it leaves it free."""
    target = tmp_path / "baseline.json"
    lock = tmp_path / "baseline.json.lock"
    with baseline_file.locked(target):
        with open(lock, "a") as other, pytest.raises(BlockingIOError):
            fcntl.flock(other.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
    holder = subprocess.Popen(
        [sys.executable, "-c", textwrap.dedent(f"""
            import sys, time
            from crosscheck.judge.baseline_file import locked
            with locked({str(target)!r}):
                print("held", flush=True)
                time.sleep(60)
        """)],
        stdout=subprocess.PIPE,
        text=True,
        cwd=ROOT,
    )
    try:
        assert holder.stdout.readline().strip() == "held"
        with open(lock, "a") as other, pytest.raises(BlockingIOError):
            fcntl.flock(other.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
        os.kill(holder.pid, signal.SIGKILL)
        holder.wait(timeout=30)
        with open(lock, "a") as other:
            fcntl.flock(other.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)  # free again: would raise if not
    finally:
        if holder.poll() is None:
            holder.kill()
        holder.stdout.close()


# --------------------------------------------------------------------------- the frequency index


def test_drift_check_matches_points_through_the_index(monkeypatch):
    """10,000 points are matched with at most 4 same_frequency tests each (a linear scan needs ~n²/2 = 5e7)."""
    n = 10_000
    calls = 0
    real = baseline_file.same_frequency

    def counting(a, b):
        nonlocal calls
        calls += 1
        if calls > 4 * n:
            raise AssertionError(f"more than {4 * n} frequency comparisons for {n} points: not indexed")
        return real(a, b)

    monkeypatch.setattr(baseline_file, "same_frequency", counting)
    freqs = [10.0 * 1.001**i for i in range(n)]
    own = [Equivalent(f, 1 + 0j, complex(1, f), 1 + 0j, 1 + 0j, 1.0) for f in freqs]
    stored = StoredCase(None, None, ("out", "0"), tuple(StoredPoint(f, {"vth": 1 + 0j, "zth": complex(1, f), "in": 1 + 0j}) for f in reversed(freqs)))
    checks, notes = drift_checks(own, stored)
    assert len(checks) == 3 * n and all(c.verdict == "pass" for c in checks) and notes == []
    assert calls <= 4 * n
    calls = 0
    old = type("B", (), {"cases": {"k": stored}})()
    new = type("B", (), {"cases": {"k": stored}})()
    assert diff_baselines(old, new).unchanged == ("k",)


def test_index_finds_the_same_frequency_as_a_linear_scan():
    """Lookups agree with scanning in stored order, near-equal frequencies (within 1e-12 relative) included."""
    freqs = [0.0, 1.0, 1.0 + 1e-13, 50.0, 50.0, 1e3, 2e3 * (1 + 5e-13), 1e9]
    index = baseline_file.FrequencyIndex(freqs)
    for probe in [0.0, 1e-300, 1.0, 1.0 + 2e-13, 50.0, 49.0, 1e3 * (1 - 1e-13), 2e3, 1e9, 2e9]:
        scan = next((i for i, f in enumerate(freqs) if baseline_file.same_frequency(f, probe)), None)
        found = index.find(probe)
        assert (found is None) == (scan is None)
        if found is not None:
            assert baseline_file.same_frequency(freqs[found], probe)


# --------------------------------------------------------------------------- command line (runs ngspice)


def _verify(*args: str, cwd: Path) -> subprocess.Popen:
    return subprocess.Popen(
        [sys.executable, "-m", "crosscheck", "verify", *args, "--workers", "1"],
        cwd=cwd,
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
    )


@pytest.mark.spice
def test_concurrent_updates_of_different_subsets_both_land(tmp_path):
    """Two verify --update-baseline processes on a/ and b/ at once leave a valid baseline with all four cases (3 rounds)."""
    corpus = _corpus(tmp_path)
    for round_ in range(3):
        target = tmp_path / f"baseline{round_}.json"
        runs = [_verify(str(tmp_path / sub), "--baseline", str(target), "--update-baseline", cwd=ROOT) for sub in "ab"]
        outs = [run.communicate(timeout=300) for run in runs]
        assert [run.returncode for run in runs] == [EXIT_OK, EXIT_OK], outs
        assert set(load_baseline(target).cases) == set(corpus), outs
        leftovers = [p.name for p in tmp_path.iterdir() if p.name.startswith(f".baseline{round_}")]
        assert leftovers == []


@pytest.mark.spice
def test_cli_corrupt_baseline_names_a_repair_command_that_works(tmp_path, capsys):
    """A corrupt baseline exits 3 naming a command; that command exits 0, rewrites it and keeps BASELINE.corrupt."""
    _corpus(tmp_path)
    target = tmp_path / "baseline.json"
    target.write_text('{"format": "crosscheck baseline", "format_version": 1, "cases": {"x": {"points": [{"freq_hz": 1e999')
    folder = str(tmp_path / "a")
    for argv in (["verify", folder, "--baseline", str(target)], ["verify", folder, "--baseline", str(target), "--update-baseline"]):
        assert main(argv) == EXIT_ERROR
        err = capsys.readouterr().err
        assert "not valid JSON" in err and target.read_text().startswith("{")
    command = err.split("Repair it from a run: ", 1)[1].split(" (rewrites", 1)[0]
    words = shlex.split(command)
    assert words[:2] == ["crosscheck", "verify"] and "--replace-corrupt" in words
    assert main(words[1:]) == EXIT_OK
    out = capsys.readouterr().out
    assert f"refused file is kept as {target}.corrupt" in out
    assert (tmp_path / "baseline.json.corrupt").read_text().endswith("1e999")
    assert set(load_baseline(target).cases) == {"a/rc.toml", "a/rl.toml"}


@pytest.mark.spice
def test_cli_prune_lists_what_it_removes(tmp_path, capsys):
    """verify --update-baseline on a/ keeps b/; adding --prune removes b/ and names each case removed."""
    _corpus(tmp_path)
    target = tmp_path / "baseline.json"
    assert main(["verify", str(tmp_path), "--baseline", str(target), "--update-baseline"]) == EXIT_OK
    capsys.readouterr()
    assert main(["verify", str(tmp_path / "a"), "--baseline", str(target), "--update-baseline"]) == EXIT_OK
    assert "kept     b/rl.toml (not in this run" in capsys.readouterr().out
    assert len(load_baseline(target).cases) == 4
    assert main(["verify", str(tmp_path / "a"), "--baseline", str(target), "--update-baseline", "--prune"]) == EXIT_OK
    out = capsys.readouterr().out
    assert "removed  b/rc.toml (not in this run; --prune)" in out and "removed  b/rl.toml" in out
    assert set(load_baseline(target).cases) == {"a/rc.toml", "a/rl.toml"}
    with pytest.raises(SystemExit) as info:
        main(["verify", str(tmp_path / "a"), "--baseline", str(target), "--prune"])
    assert info.value.code == 2 and "--prune needs --update-baseline" in capsys.readouterr().err


def test_repair_command_keeps_the_options_that_choose_the_cases(tmp_path, capsys):
    """For netlists named with --port and --freq the repair command repeats them, quoted for a shell."""
    netlist = tmp_path / "my rc.cir"
    netlist.write_text(RC)
    target = tmp_path / "baseline.json"
    target.write_text("[]")
    argv = ["verify", str(netlist), "--port", "out", "0", "--freq", "50", "--baseline", str(target)]
    assert main(argv) == EXIT_ERROR
    err = " ".join(capsys.readouterr().err.split())
    assert f"crosscheck verify {shlex.quote(str(netlist))} --port out 0 --freq 50 --baseline {target}" in err
    assert "--update-baseline --replace-corrupt" in err and target.read_text() == "[]"
