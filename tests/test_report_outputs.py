"""`verify --output`: each file written on its own, write failures reported (exit 3), inputs never overwritten.

The runs use crosscheck's own solver alone (``run_batch`` is replaced by an own-route run), so
these tests need no ngspice; what they pin is the command line's handling of output paths.
"""

from __future__ import annotations

import os
from pathlib import Path

import pytest

from crosscheck import cli
from crosscheck.run import batch
from crosscheck.run.check import run_cases

RC = "rc output\nV1 in 0 DC 0 AC 1\nR1 in out 1k\nC1 out 0 100n\n.end\n"


@pytest.fixture
def case(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    """One passing case file; verify runs it on the own route only, counting the runs."""
    (tmp_path / "rc.cir").write_text(RC)
    path = tmp_path / "rc.toml"
    path.write_text('title = "RC"\nnetlist = "rc.cir"\nport = ["out", "0"]\nfrequencies = ["1k"]\n')
    runs: list[int] = []

    def own_only(items, executor, **_options):
        runs.append(len(items))
        return run_cases(items, engine="own")

    monkeypatch.setattr(batch, "run_batch", own_only)
    monkeypatch.setattr(cli, "_RUNS", runs, raising=False)
    return path


def test_failed_outputs_are_reported_after_the_others_are_written(case, tmp_path, capsys):
    """A folder as the path, a folder that cannot be made and /dev/full fail with exit 3; the rest is written."""
    blocker = tmp_path / "a-file"
    blocker.write_text("x")
    (tmp_path / "a-folder.md").mkdir()
    good_md, good_csv = tmp_path / "out" / "r.md", tmp_path / "r.csv"
    bad = [tmp_path / "a-folder.md", blocker / "sub" / "r.xml"]
    if Path("/dev/full").exists():
        bad.append(Path("/dev/full"))
    args = ["verify", str(case)]
    for path in [bad[0], good_md, *bad[1:], good_csv]:
        args += ["--output", str(path)]
    code = cli.main(args)
    out, err = capsys.readouterr()
    assert code == cli.EXIT_ERROR
    assert good_md.read_text().startswith("### crosscheck: PASS") and good_csv.read_text().startswith("case,")
    assert "1 case(s): 1 pass" in out, "the terminal summary still prints"
    assert f"written to {good_md}, {good_csv}" in out
    for path in bad:
        assert f"could not write the report {path}:" in err
    assert "Is a directory" in err and "Not a directory" in err
    assert err.count("give --output a file path") == len(bad)
    assert "Traceback" not in err


def test_text_output_to_a_folder_is_a_reported_failure(case, tmp_path, capsys):
    """The text format (.txt) fails the same way as the file formats: reported, exit 3, summary printed."""
    (tmp_path / "r.txt").mkdir()
    assert cli.main(["verify", str(case), "--output", str(tmp_path / "r.txt")]) == cli.EXIT_ERROR
    out, err = capsys.readouterr()
    assert "1 case(s): 1 pass" in out and f"could not write the report {tmp_path / 'r.txt'}" in err


@pytest.mark.parametrize("target", ["case", "netlist", "baseline", "case-by-link"])
def test_output_that_is_an_input_is_refused_before_any_work(case, tmp_path, capsys, target):
    """--output naming the case file, its netlist, the --baseline file or a link to one: exit 2, nothing run."""
    baseline = tmp_path / "base.json"
    baseline.write_text("{}")
    before = {p: p.read_bytes() for p in (case, tmp_path / "rc.cir", baseline)}
    output = {"case": case, "netlist": tmp_path / "sub" / ".." / "rc.cir", "baseline": baseline}.get(target)
    if output is None:
        output = tmp_path / "link.md"
        os.symlink(case, output)
    args = ["verify", str(case), "--output", str(output)]
    if target == "baseline":
        args += ["--baseline", str(baseline), "--update-baseline"]
    (tmp_path / "sub").mkdir()
    code = cli.main(args)
    assert code == cli.EXIT_USAGE
    err = capsys.readouterr().err
    assert f"--output {output} is" in err and "Give --output a different path" in err
    assert cli._RUNS == [], "refused before any case ran"
    assert {p: p.read_bytes() for p in before} == before, "no input was overwritten"


@pytest.mark.skipif(not Path("/dev/full").exists(), reason="needs /dev/full (Linux)")
def test_standard_output_that_cannot_be_written_keeps_the_summary_on_stderr(case):
    """A report sent to a full standard output: exit 3, the summary and the reason on stderr, no traceback."""
    import subprocess
    import sys

    code = (
        "import sys; from crosscheck import cli; from crosscheck.run import batch; "
        "from crosscheck.run.check import run_cases; "
        "batch.run_batch = lambda items, executor, **kw: run_cases(items, engine='own'); "
        f"sys.exit(cli.main(['verify', {str(case)!r}, '--format', 'markdown']))"
    )
    with open("/dev/full", "w") as full:
        run = subprocess.run([sys.executable, "-c", code], stdout=full, stderr=subprocess.PIPE, text=True,
                             timeout=120)
    assert run.returncode == cli.EXIT_ERROR, run.stderr
    assert "1 case(s): 1 pass" in run.stderr
    assert "could not write the report to standard output: No space left on device" in run.stderr
    assert "Traceback" not in run.stderr
