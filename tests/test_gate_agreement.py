"""`pytest PATH` (the plugin) and `crosscheck verify PATH --format junit` agree on pass and fail counts."""

from __future__ import annotations

import shutil
import subprocess
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest

from crosscheck.cli import EXIT_FAIL, main

ROOT = Path(__file__).resolve().parents[1]


def _counts(junit: Path) -> tuple[int, int, int, int]:
    """(tests, failures, errors, skipped) summed over every testsuite of a JUnit file."""
    tree = ET.parse(junit).getroot()
    suites = [tree] if tree.tag == "testsuite" else list(tree.iter("testsuite"))
    return tuple(sum(int(s.get(k, 0)) for s in suites) for k in ("tests", "failures", "errors", "skipped"))  # type: ignore[return-value]


@pytest.mark.spice
def test_plugin_and_verify_agree(tmp_path):
    """Two corpus folders and the on-purpose failing case: both routes count every case, 1 failure, 0 errors and
    0 skipped (equal counts of skips would make the two agree without either having run ngspice)."""
    library = tmp_path / "library"
    for field in ("rf", "control"):
        shutil.copytree(ROOT / "corpus" / field, library / field)
    failing = library / "failing"
    failing.mkdir()
    for f in (ROOT / "tests" / "data" / "failing_limit").iterdir():
        if f.suffix in (".toml", ".cir"):
            shutil.copy(f, failing / f.name)

    verify_xml = tmp_path / "verify.xml"
    assert main(["verify", str(library), "--format", "junit", "--output", str(verify_xml)]) == EXIT_FAIL

    plugin_xml = tmp_path / "plugin.xml"
    run = subprocess.run([sys.executable, "-m", "pytest", str(library), "-q", "-p", "no:cacheprovider",
                          f"--junitxml={plugin_xml}", "-o", "addopts="],
                         cwd=tmp_path, capture_output=True, text=True)
    assert run.returncode == 1, run.stdout + run.stderr

    cases = len(list(library.rglob("*.toml")))
    assert _counts(verify_xml) == (cases, 1, 0, 0)
    assert _counts(plugin_xml) == _counts(verify_xml)
