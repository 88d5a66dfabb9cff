"""The pytest plugin end to end: case files collected as tests, outcomes, failure text and opt-in collection.

Each test runs pytest inside pytest (the ``pytester`` fixture) on case files it writes
into its own temporary folder.
"""

from __future__ import annotations

from importlib.metadata import entry_points

import pytest

from crosscheck.pytest_plugin import looks_like_case

pytest_plugins = ["pytester"]

RC = "rc output\nV1 in 0 DC 0 AC 1\nR1 in out 1k\nC1 out 0 100n\n.end\n"
# By hand: |Z_th| = 1 kΩ / sqrt(1 + (2π·10 Hz·1 kΩ·100 nF)²) = 999.98 Ω at 10 Hz, so a 900 Ω maximum fails.
CASES = {
    "cases/passing.toml": 'title = "RC divider"\nnetlist = "rc.cir"\nport = ["out", "0"]\n'
                          'frequencies = ["10", "1k"]\n',
    "cases/limit.toml": 'title = "RC with a source limit"\nnetlist = "rc.cir"\nport = ["out", "0"]\n'
                        'frequencies = ["10", "100"]\n'
                        '[[limit]]\nquantity = "abs(zth)"\nmax = "900"\n',
    "cases/invalid.toml": 'netlist = "rc.cir"\nport = ["out", "0"]\nfrequencies = ["1k", "-5"]\n',
    "cases/rc.cir": RC,
    "cases/data.toml": '[table]\nvalue = 3\n',  # TOML, but not a case file: never collected
    "pyproject.toml": '[project]\nname = "library"\nversion = "1"\n',
}


@pytest.fixture
def library(pytester: pytest.Pytester) -> pytest.Pytester:
    for name, text in CASES.items():
        path = pytester.path / name
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(text, encoding="utf-8")
    return pytester


def test_plugin_is_registered_through_the_entry_point():
    """Installing crosscheck registers the plugin under the name `crosscheck` (so `-p no:crosscheck` works)."""
    found = [e for e in entry_points(group="pytest11") if e.name == "crosscheck"]
    assert [e.value for e in found] == ["crosscheck.pytest_plugin"]


def test_only_case_files_look_like_cases(library):
    """netlist and port at the top level make a case file; a broken case file still counts."""
    assert looks_like_case(library.path / "cases/passing.toml")
    assert not looks_like_case(library.path / "cases/data.toml")
    assert not looks_like_case(library.path / "pyproject.toml")
    broken = library.path / "cases/broken.toml"
    broken.write_text('netlist = "rc.cir"\nport = ["out", "0"\nfrequencies = ["1k"]\n')
    assert looks_like_case(broken)


def test_own_engine_outcomes_failure_table_and_error(library):
    """Without ngspice: a pass, a failing limit with an obtained/expected table, an invalid file as an error."""
    result = library.runpytest("cases", "--crosscheck-engine", "own", "-rA")
    result.assert_outcomes(passed=1, failed=1, errors=1)
    result.stdout.fnmatch_lines([  # in report order: errors, then failures ("?" stands for fnmatch's "[")
        "*ERROR at setup of crosscheck case invalid.toml*",
        "*invalid case:*invalid.toml: key 'frequencies': -5 Hz is negative*",
        "*crosscheck case limit.toml*",
        "*crosscheck: fail — RC with a source limit (port out → 0)*",
        "*check*at*obtained (crosscheck)*expected*off by*verdict*",
        "*limit?1? abs(zth)*10 Hz*999.98 Ω*≤ 900 Ω at every frequency of the case*margin -99.98 Ω*fail*",
        "why: limit?1? abs(zth) at 10 Hz:*",
    ])
    assert "pyproject.toml::" not in result.stdout.str() and "data.toml" not in result.stdout.str()


@pytest.mark.spice
def test_both_engines_end_to_end(library):
    """With ngspice: the same outcomes, and the passing case really was compared with ngspice."""
    result = library.runpytest("cases", "-rA", "-p", "no:cacheprovider",
                               "--junitxml", str(library.path / "pytest.xml"))
    result.assert_outcomes(passed=1, failed=1, errors=1)
    xml = (library.path / "pytest.xml").read_text(encoding="utf-8")
    assert 'name="crosscheck_verdict" value="pass"' in xml
    assert 'name="ngspice_version" value="ngspice' in xml


@pytest.mark.spice
def test_unavailable_engine_is_skipped_with_the_reason(library, monkeypatch):
    """When ngspice cannot be loaded the case is skipped, and the summary says why."""
    monkeypatch.setenv("NGSPICE_LIBRARY_PATH", str(library.path / "no-such-libngspice.so"))
    result = library.runpytest("cases/passing.toml", "-rs")
    result.assert_outcomes(skipped=1)
    result.stdout.fnmatch_lines(["*SKIPPED*crosscheck unavailable:*"])


def test_collection_is_opt_in_for_a_bare_run(library):
    """A bare `pytest` collects no case files; --crosscheck or the ini option switches collection on."""
    bare = library.runpytest("--crosscheck-engine", "own")
    assert bare.ret == pytest.ExitCode.NO_TESTS_COLLECTED
    flag = library.runpytest("--crosscheck", "--crosscheck-engine", "own")
    flag.assert_outcomes(passed=1, failed=1, errors=1)
    library.makeini("[pytest]\ncrosscheck_cases = true\n")
    ini = library.runpytest("--crosscheck-engine", "own")
    ini.assert_outcomes(passed=1, failed=1, errors=1)


def test_one_named_file_is_one_item(library):
    """Naming a case file collects that case alone, under the file's stem."""
    result = library.runpytest("cases/passing.toml", "--collect-only", "-q", "--crosscheck-engine", "own")
    result.stdout.fnmatch_lines(["cases/passing.toml::passing", "1 test collected*"])
