"""The rule that ngspice tests never skip: with ngspice unloadable, every spice-marked test fails, unless
the explicit opt-out says to skip (and then each skip names the reason)."""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent

PROBE = '''
import pytest


@pytest.mark.spice
def test_would_pass_without_ngspice():
    assert True


def test_plain():
    assert True
'''


def _run(tmp_path: Path, **env: str) -> subprocess.CompletedProcess[str]:
    shutil.copy(HERE / "conftest.py", tmp_path / "conftest.py")
    (tmp_path / "test_probe.py").write_text(PROBE, encoding="utf-8")
    (tmp_path / "pytest.ini").write_text("[pytest]\nmarkers =\n    spice: needs ngspice\n", encoding="utf-8")
    environment = {**os.environ, "NGSPICE_LIBRARY_PATH": str(tmp_path / "no-such-libngspice.so")}
    environment.pop("CROSSCHECK_SKIP_SPICE_TESTS", None)
    environment.update(env)
    return subprocess.run([sys.executable, "-m", "pytest", "-q", "-rs", "-p", "no:cacheprovider", str(tmp_path)],
                          cwd=tmp_path, capture_output=True, text=True, env=environment, timeout=120)


def test_a_spice_test_fails_when_ngspice_cannot_load(tmp_path: Path):
    """With the library unloadable, the spice-marked test errors at set-up, naming the install command."""
    done = _run(tmp_path)
    assert done.returncode != 0, done.stdout
    assert "1 passed, 1 error" in done.stdout, done.stdout
    assert "ngspice is needed by this test" in done.stdout and "apt-get install" in done.stdout


def test_the_opt_out_skips_with_the_reason(tmp_path: Path):
    """Only the explicit opt-out turns it into a skip, and the skip says why."""
    done = _run(tmp_path, CROSSCHECK_SKIP_SPICE_TESTS="1")
    assert done.returncode == 0, done.stdout
    assert "1 passed, 1 skipped" in done.stdout and "skipped on purpose" in done.stdout, done.stdout
