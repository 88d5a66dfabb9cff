"""Case files: what they accept, and errors that name the file and the key."""

from __future__ import annotations

from pathlib import Path

import pytest

from crosscheck.model.cases import MAX_POINTS, find_case_files, load_case
from crosscheck.errors import CaseFileError

NETLIST = "divider\nV1 in 0 DC 0 AC 1\nR1 in out 1k\nC1 out 0 1u\n.end\n"


def _write(tmp_path: Path, body: str, netlist: str | None = NETLIST, name: str = "case.toml") -> Path:
    if netlist is not None:
        (tmp_path / "divider.cir").write_text(netlist)
    path = tmp_path / name
    path.write_text(body)
    return path


def test_full_case_reads(tmp_path):
    path = _write(tmp_path, """
title = "RC divider as seen by the ADC"
netlist = "divider.cir"
port = ["out", "0"]
frequencies = ["50", "1k"]
sources = "rms"
[tolerance]
rel = 1e-7
[[expect]]
at = "1k"
vth = "0.157∠-80.96°"
zth = "24.7 - j155"
how = "divider formula by hand"
[[limit]]
quantity = "abs(zth)"
max = "1.1k"
band = ["10", "10k"]
""")
    case = load_case(path)
    assert case.title == "RC divider as seen by the ADC"
    assert case.port == ("out", "0")
    assert case.freqs_hz == (50.0, 1000.0)
    assert case.sources == "rms"
    assert case.tolerance.rel == 1e-7
    [expect] = case.expectations
    assert abs(expect.values["zth"] - (24.7 - 155j)) < 1e-12
    [limit] = case.limits
    assert (limit.function, limit.quantity, limit.maximum, limit.band) == ("abs", "zth", 1100.0, (10.0, 10000.0))


def test_sweep_per_decade_includes_both_ends(tmp_path):
    path = _write(tmp_path, 'netlist = "divider.cir"\nport = ["out", "0"]\n'
                            'sweep = { start = "10", stop = "100k", per_decade = 10 }\n')
    freqs = load_case(path).freqs_hz
    assert len(freqs) == 41
    assert freqs[0] == pytest.approx(10.0, rel=1e-15)
    assert freqs[-1] == pytest.approx(1e5, rel=1e-12)
    ratios = [b / a for a, b in zip(freqs, freqs[1:])]
    assert max(ratios) == pytest.approx(10 ** 0.1, rel=1e-12)


def test_expectation_frequency_is_added(tmp_path):
    path = _write(tmp_path, 'netlist = "divider.cir"\nport = ["out", "0"]\nfrequencies = ["50"]\n'
                            '[[expect]]\nat = "60"\nvth = "1"\n')
    assert load_case(path).freqs_hz == (50.0, 60.0)


def test_inline_netlist(tmp_path):
    path = _write(tmp_path, 'netlist = """\ninline\nR1 a 0 1k\nI1 0 a AC 1\n.end\n"""\nport = ["a", "0"]\n'
                            'frequencies = [0]\n', netlist=None)
    assert "inline" in load_case(path).netlist_text


BAD = [
    ("port = ['out']\nnetlist = 'divider.cir'\nfrequencies = ['1k']", "port"),
    ("port = ['out', '0']\nnetlist = 'divider.cir'", "frequencies"),
    ("port = ['out', '0']\nnetlist = 'divider.cir'\nfrequencies = ['1k']\nsweep = {start=1, stop=2, points=2}",
     "frequencies"),
    ("port = ['out', '0']\nnetlist = 'divider.cir'\nfrequencies = ['4k7']", "frequencies[0]"),
    ("port = ['out', '0']\nnetlist = 'divider.cir'\nsweep = {start='1', stop='1meg', per_decade=100000}", "sweep"),
    ("port = ['out', '0']\nnetlist = '../divider.cir'\nfrequencies = ['1k']", "netlist"),
    ("port = ['out', '0']\nnetlist = '/etc/passwd'\nfrequencies = ['1k']", "netlist"),
    ("port = ['out', '0']\nnetlist = 'missing.cir'\nfrequencies = ['1k']", "netlist"),
    ("port = ['out', '0']\nnetlist = 'divider.cir'\nfrequencies = ['1k']\nsources = 'avg'", "sources"),
    ("port = ['out', '0']\nnetlist = 'divider.cir'\nfrequencies = ['1k']\n[[expect]]\nat = '1k'", "expect[1]"),
    ("port = ['out', '0']\nnetlist = 'divider.cir'\nfrequencies = ['1k']\n[[expect]]\nat='1k'\nvth='1+'", "expect[1].vth"),
    ("port = ['out', '0']\nnetlist = 'divider.cir'\nfrequencies = ['1k']\n[[limit]]\nquantity = 'sqrt(zth)'\nmax=1",
     "limit[1].quantity"),
    ("port = ['out', '0']\nnetlist = 'divider.cir'\nfrequencies = ['1k']\n[[limit]]\nquantity = 'abs(zth)'", "limit[1]"),
    ("port = ['out', '0']\nnetlist = 'divider.cir'\nfrequencies = ['1k']\nfrequncies = 1", "frequncies"),
    ("port = ['out', '0'\n", "TOML"),
]


@pytest.mark.parametrize("body, key", BAD, ids=[k for _, k in BAD])
def test_bad_case_names_file_and_key(tmp_path, body, key):
    """Each malformed case file raises CaseFileError naming the file and the key at fault."""
    path = _write(tmp_path, body)
    with pytest.raises(CaseFileError) as info:
        load_case(path)
    message = str(info.value)
    assert str(path) in message
    assert key in message
    assert "Traceback" not in message


def test_outside_path_allowed_only_explicitly(tmp_path):
    (tmp_path / "shared.cir").write_text(NETLIST)
    sub = tmp_path / "cases"
    sub.mkdir()
    path = _write(sub, "port = ['out', '0']\nnetlist = '../shared.cir'\nfrequencies = ['1k']", netlist=None)
    with pytest.raises(CaseFileError):
        load_case(path)
    assert load_case(path, allow_outside=True).netlist_text == NETLIST


def test_point_limit_is_enforced(tmp_path):
    freqs = ", ".join(str(i + 1) for i in range(MAX_POINTS + 1))
    path = _write(tmp_path, f"port = ['out', '0']\nnetlist = 'divider.cir'\nfrequencies = [{freqs}]")
    with pytest.raises(CaseFileError, match="at most"):
        load_case(path)


def test_find_case_files_recurses_sorted(tmp_path):
    (tmp_path / "b").mkdir()
    (tmp_path / "a").mkdir()
    for p in ("b/x.toml", "a/y.toml", "a/z.cir"):
        (tmp_path / p).write_text("")
    found = find_case_files([tmp_path])
    assert [p.relative_to(tmp_path).as_posix() for p in found] == ["a/y.toml", "b/x.toml"]


def test_a_zero_relative_tolerance_is_refused_naming_the_key(tmp_path):
    """rel = 0 in a case file contradicts the pass rule (it drops the abs and round-off terms): refused."""
    import pytest

    from crosscheck.errors import CaseFileError
    from crosscheck.model.cases import load_case

    (tmp_path / "rc.cir").write_text("rc\nV1 in 0 AC 1\nR1 in out 1k\nC1 out 0 100n\n.end\n")
    case = tmp_path / "c.toml"
    case.write_text('netlist = "rc.cir"\nport = ["out", "0"]\nfrequencies = ["1k"]\n[tolerance]\nrel = 0\n')
    with pytest.raises(CaseFileError, match=r"tolerance\.rel.*machine epsilon"):
        load_case(case)
