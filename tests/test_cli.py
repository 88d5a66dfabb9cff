"""The command line: output shapes, exit codes, and errors that name file and line without a traceback."""

from __future__ import annotations

import json
import math
from pathlib import Path

import pytest

from crosscheck.cli import EXIT_ERROR, EXIT_OK, main

RC = """RC low-pass feeding a sampling capacitor
V1 in 0 DC 0 AC 2 30
R1 in out 1k
C1 out 0 100n
.end
"""


@pytest.fixture
def rc(tmp_path):
    path = tmp_path / "rc.cir"
    path.write_text(RC)
    return path


def _expected(f):
    """V_th = V/(1 + jωRC), Z_th = R/(1 + jωRC) (published: D. H. Johnson, OpenStax CNX m0030, exact)."""
    w = 2 * math.pi * f
    v = 2 * complex(math.cos(math.radians(30)), math.sin(math.radians(30)))
    d = 1 + 1j * w * 1e3 * 100e-9
    return v / d, 1e3 / d


def test_reduce_json_own_engine(rc, capsys):
    """JSON has the documented shape and full double precision."""
    assert main(["reduce", str(rc), "--port", "OUT", "0", "--freq", "1k", "10k", "--engine", "own",
                 "--format", "json"]) == EXIT_OK
    doc = json.loads(capsys.readouterr().out)
    assert doc["port"] == ["out", "0"]
    assert [p["freq_hz"] for p in doc["points"]] == [1000.0, 10000.0]
    for point in doc["points"]:
        vth, zth = _expected(point["freq_hz"])
        got_v = complex(point["own"]["vth"]["re"], point["own"]["vth"]["im"])
        got_z = complex(point["own"]["zth"]["re"], point["own"]["zth"]["im"])
        assert abs(got_v - vth) <= 1e-12 * abs(vth)  # tolerance: rel 1e-12 (exact formula)
        assert abs(got_z - zth) <= 1e-12 * abs(zth)
        got_in = complex(point["own"]["in"]["re"], point["own"]["in"]["im"])
        assert abs(got_in - vth / zth) <= 1e-12 * abs(vth / zth)
    assert "licensed engineer" in doc["caution"]


@pytest.mark.spice
def test_reduce_json_both_engines(rc, capsys):
    """With ngspice: per point a spice object with the same keys, errors, and a verdict."""
    assert main(["reduce", str(rc), "--port", "out", "0", "--freq", "1k", "--format", "json"]) == EXIT_OK
    doc = json.loads(capsys.readouterr().out)
    point = doc["points"][0]
    assert point["verdict"] == "pass"
    assert set(point["spice"]) >= {"vth", "zth", "in", "yn"}
    assert point["errors"]["vth"]["err"] <= 1e-6
    assert doc["ngspice_version"]


def test_reduce_text_shows_equivalent_and_caution(rc, capsys):
    assert main(["reduce", str(rc), "--port", "out", "0", "--freq", "1k", "--engine", "own"]) == EXIT_OK
    out = capsys.readouterr().out
    assert "V_th" in out and "Z_th" in out and "Caution" in out
    vth, _ = _expected(1e3)
    assert f"{math.degrees(math.atan2(vth.imag, vth.real)):.2f}°" in out


@pytest.mark.parametrize("text, line, words", [
    ("t\nR1 a 0 1k\nQ1 a b c model\n.end\n", 3, "Q1"),
    ("t\nR1 a 0 1k\n.include /etc/passwd\n.end\n", 3, ".include"),
    ("t\nV1 a 0 AC 1\nR1 a 0 4k7\n.end\n", 3, "4k7"),
])
def test_reduce_bad_netlist_names_file_and_line(tmp_path, capsys, text, line, words):
    """Invalid input: exit 3, one message on stderr with file:line, no traceback."""
    path = tmp_path / "bad.cir"
    path.write_text(text)
    assert main(["reduce", str(path), "--port", "a", "0", "--freq", "1k", "--engine", "own"]) == EXIT_ERROR
    err = capsys.readouterr().err
    assert f"{path}:{line}" in err
    assert words.lower() in err.lower()
    assert "Traceback" not in err


def test_reduce_unknown_port_node(rc, capsys):
    assert main(["reduce", str(rc), "--port", "nowhere", "0", "--freq", "1k", "--engine", "own"]) == EXIT_ERROR
    assert "nowhere" in capsys.readouterr().err


def test_reduce_missing_file(tmp_path, capsys):
    assert main(["reduce", str(tmp_path / "none.cir"), "--port", "a", "0", "--freq", "1"]) == EXIT_ERROR
    assert "none.cir" in capsys.readouterr().err


def test_bad_frequency_is_a_usage_error(rc, capsys):
    """A negative --freq is a command-line value that cannot be used: exit 2, naming --freq and the value."""
    with pytest.raises(SystemExit) as info:
        main(["reduce", str(rc), "--port", "out", "0", "--freq", "-5", "--engine", "own"])
    assert info.value.code == 2
    err = capsys.readouterr().err
    assert "--freq" in err and "-5" in err


def test_usage_error_exits_2(capsys):
    with pytest.raises(SystemExit) as info:
        main(["reduce"])
    assert info.value.code == 2


@pytest.mark.spice
def test_verify_writes_several_formats_from_one_run(tmp_path, capsys):
    """Repeated --output: each file's extension names its format; the engines run once for all of them."""
    from crosscheck.cli import main

    xml, md, js = tmp_path / "r.xml", tmp_path / "r.md", tmp_path / "r.json"
    audio = str(Path(__file__).resolve().parent.parent / "corpus" / "audio")
    code = main(["verify", audio, "--output", str(xml), "--output", str(md), "--output", str(js)])
    assert code == 0
    assert xml.read_text().lstrip().startswith("<?xml") and "<testsuite" in xml.read_text()
    assert md.read_text().startswith("#")
    assert json.loads(js.read_text())["cases"], "the JSON report lists the cases"
    assert "reports written to" in capsys.readouterr().out


def test_verify_refuses_one_format_for_several_outputs(tmp_path, capsys):
    from crosscheck.cli import EXIT_USAGE, main

    audio = str(Path(__file__).resolve().parent.parent / "corpus" / "audio")
    code = main(["verify", audio, "--format", "json", "--output", str(tmp_path / "a.json"),
                 "--output", str(tmp_path / "b.md")])
    assert code == EXIT_USAGE
    assert "ambiguous" in capsys.readouterr().err
    assert not (tmp_path / "a.json").exists(), "refused before any case ran"
