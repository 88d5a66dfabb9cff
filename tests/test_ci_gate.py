"""The CI gate in ci/: the script's outputs and exit codes, the workflow, the pre-commit hook, the docs."""

from __future__ import annotations

import re
import subprocess
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest

from crosscheck import cli
from crosscheck.report.caution import CAUTION

ROOT = Path(__file__).resolve().parents[1]
GATE = ROOT / "ci" / "crosscheck-gate.sh"
WORKFLOW = ROOT / "ci" / "workflows" / "crosscheck.yml"
HOOKS = ROOT / "ci" / "pre-commit-hooks.yaml"
RC = "rc output\nV1 in 0 DC 0 AC 1\nR1 in out 1k\nC1 out 0 100n\n.end\n"


def _gate(*args: str, cwd: Path) -> subprocess.CompletedProcess:
    env = {"PATH": "/usr/bin:/bin", "CROSSCHECK": str(Path(sys.executable).parent / "crosscheck"),
           "HOME": str(cwd)}
    return subprocess.run(["bash", str(GATE), *args], cwd=cwd, env=env, capture_output=True, text=True,
                          timeout=300)


def _cases(folder: Path, limit_max: str | None = None) -> Path:
    folder.mkdir(parents=True)
    (folder / "rc.cir").write_text(RC)
    body = 'title = "RC output"\nnetlist = "rc.cir"\nport = ["out", "0"]\n' \
           'sweep = { start = "10", stop = "10k", per_decade = 1 }\n'
    if limit_max:
        body += f'[[limit]]\nquantity = "abs(zth)"\nmax = "{limit_max}"\n'
    (folder / "rc.toml").write_text(body)
    return folder


@pytest.mark.spice
def test_gate_passes_and_writes_three_reports(tmp_path):
    """A passing folder: exit 0, JUnit with one passing test, a PASS summary, an HTML report with the caution."""
    _cases(tmp_path / "cases")
    run = _gate("--out", "reports", "cases", cwd=tmp_path)
    assert run.returncode == 0, run.stderr
    out = tmp_path / "reports"
    root = ET.parse(out / "crosscheck.xml").getroot()
    assert (root.tag, root.get("tests"), root.get("failures"), root.get("errors")) == ("testsuites", "1", "0", "0")
    assert root.find("testsuite").get("skipped") == "0"
    markdown = (out / "crosscheck.md").read_text(encoding="utf-8")
    assert markdown.startswith("### crosscheck: PASS — 1 case(s)")
    html = (out / "crosscheck.html").read_text(encoding="utf-8")
    assert '<img class="plot" src="data:image/svg+xml;base64,' in html and "licensed engineer decide" in html
    assert CAUTION.split(";")[0] in html
    assert "crosscheck: PASS" in run.stdout


@pytest.mark.spice
def test_gate_exit_code_is_crosschecks_on_a_failing_limit(tmp_path):
    """|Z_th| of the RC is about 1 kΩ at 10 Hz (by hand), so a 500 Ω maximum fails: exit 1, one JUnit failure."""
    _cases(tmp_path / "cases", limit_max="500")
    run = _gate("-o", "reports", "cases", "--", "--workers", "1", cwd=tmp_path)
    assert run.returncode == cli.EXIT_FAIL == 1, run.stderr
    root = ET.parse(tmp_path / "reports" / "crosscheck.xml").getroot()
    assert (root.get("tests"), root.get("failures")) == ("1", "1")
    assert "limit[1] abs(zth)" in root.find(".//failure").text
    assert (tmp_path / "reports" / "crosscheck.md").read_text(encoding="utf-8").startswith("### crosscheck: FAIL")


@pytest.mark.spice
def test_gate_reports_invalid_input_as_error(tmp_path):
    """A case file with a bad key: exit 3, and the JUnit error names the file and the key."""
    folder = _cases(tmp_path / "cases")
    (folder / "bad.toml").write_text('netlist = "rc.cir"\nport = ["out"]\nfrequencies = ["1k"]\n')
    run = _gate("cases", cwd=tmp_path)
    assert run.returncode == cli.EXIT_ERROR == 3
    error = ET.parse(tmp_path / "crosscheck-reports" / "crosscheck.xml").getroot().find(".//error")
    assert "bad.toml" in error.get("message") and "key 'port'" in error.get("message")


@pytest.mark.parametrize("args, code, stream, text", [
    ((), 2, "stderr", "Usage: crosscheck-gate.sh"),
    (("--help",), 0, "stdout", "Usage: crosscheck-gate.sh"),
    (("--bogus", "cases"), 2, "stderr", "unknown option --bogus"),
    (("--out",), 2, "stderr", "--out needs a folder name"),
])
def test_gate_usage(tmp_path, args, code, stream, text):
    run = _gate(*args, cwd=tmp_path)
    assert run.returncode == code
    assert text in getattr(run, stream)


def test_gate_passes_verify_usage_errors_through(tmp_path):
    """A verify option crosscheck rejects gives crosscheck's usage code 2 and no reports claimed."""
    _cases(tmp_path / "cases")
    run = _gate("cases", "--", "--no-such-option", cwd=tmp_path)
    assert run.returncode == 2
    assert "without a report" in run.stderr


def test_gate_script_is_valid_bash():
    assert subprocess.run(["bash", "-n", str(GATE)], capture_output=True).returncode == 0


def _yaml(path: Path):
    import yaml  # PyYAML is always there: PySpice, a dependency of crosscheck, requires it

    return yaml.safe_load(path.read_text(encoding="utf-8"))


def test_workflow_installs_ngspice_runs_the_gate_and_uploads_reports():
    workflow = _yaml(WORKFLOW)
    triggers = workflow.get("on", workflow.get(True))  # YAML 1.1 reads a bare `on` as true
    assert "pull_request" in triggers
    steps = workflow["jobs"]["crosscheck"]["steps"]
    uses = [s.get("uses", "") for s in steps]
    runs = "\n".join(s.get("run", "") for s in steps)
    assert any(u.startswith("actions/checkout@") for u in uses)
    assert any(u.startswith("actions/setup-python@") for u in uses)
    assert "apt-get install" in runs and "libngspice0" in runs
    assert "pip install" in runs
    assert "bash ci/crosscheck-gate.sh --out" in runs
    [upload] = [s for s in steps if s.get("uses", "").startswith("actions/upload-artifact@")]
    assert upload["if"] == "always()" and "REPORTS" in upload["with"]["path"]
    assert workflow["env"]["REPORTS"] == "crosscheck-reports"


def test_pre_commit_hook_matches_case_files_only():
    [hook] = _yaml(HOOKS)
    assert {"id", "name", "entry", "language"} <= set(hook)
    assert hook["entry"] == "crosscheck verify" and hook["pass_filenames"] is True
    files = re.compile(hook["files"])
    for path in ("cases/filter.toml", "lib/corpus/audio/amp.toml", "bridge.case.toml"):
        assert files.search(path), path
    for path in ("pyproject.toml", "tests/data/settings.toml", "cases/notes.md"):
        assert not files.search(path), path


def test_ci_readme_documents_every_exit_code():
    """The exit-code table in ci/README.md lists exactly the codes crosscheck's command line defines."""
    text = (ROOT / "ci" / "README.md").read_text(encoding="utf-8")
    documented = {int(m) for m in re.findall(r"^\| (\d) \|", text, flags=re.MULTILINE)}
    defined = {value for name, value in vars(cli).items() if name.startswith("EXIT_")}
    assert documented == defined


HOSTILE_ARGPARSE = '''import os, pathlib
pathlib.Path({marker!r}).write_text("the pull request's argparse.py ran")
pathlib.Path("reports").mkdir(exist_ok=True)
pathlib.Path("reports/crosscheck.md").write_text("### crosscheck: PASS\\n")
os._exit(0)
'''


@pytest.mark.spice
def test_gate_fallback_never_imports_modules_from_the_pull_requests_tree(tmp_path):
    """With CROSSCHECK unset and no crosscheck script, a hostile argparse.py at the tree's root does not run."""
    tree, marker = tmp_path / "pr", tmp_path / "hostile-ran"
    _cases(tree / "cases", limit_max="10")  # a failing limit: the right verdict is FAIL, exit 1
    (tree / "argparse.py").write_text(HOSTILE_ARGPARSE.format(marker=str(marker)))
    bin_dir = tmp_path / "bin"  # `python3` is this interpreter (crosscheck installed); no `crosscheck` on PATH
    bin_dir.mkdir()
    (bin_dir / "python3").write_text(f'#!/bin/sh\nexec "{sys.executable}" "$@"\n')
    (bin_dir / "python3").chmod(0o755)
    env = {"PATH": f"{bin_dir}:/usr/bin:/bin", "HOME": str(tmp_path)}
    run = subprocess.run(["bash", str(GATE), "--out", "reports", "cases"], cwd=tree, env=env,
                         capture_output=True, text=True, timeout=300)
    assert not marker.exists(), "the gate imported argparse.py from the pull request's tree"
    assert run.returncode == 1, run.stderr
    assert "crosscheck: FAIL" in run.stdout
    assert (tree / "reports" / "crosscheck.md").read_text(encoding="utf-8").startswith("### crosscheck: FAIL")
