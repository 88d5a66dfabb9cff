"""What a new user hits first: unusable option values are usage errors, and every option does what it says."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from crosscheck.cli import EXIT_OK, EXIT_USAGE, _verify_items, main, override_header
from crosscheck.cli_parser import SMALLEST_REL, parser

RC = """RC low-pass
V1 in 0 DC 0 AC 2 30
R1 in out 1k
C1 out 0 100n
.end
"""

CASE = """title = "RC at the output"
port = ["out", "0"]
frequencies = ["1k"]
sources = "peak"
netlist = \"\"\"
RC low-pass
V1 in 0 DC 0 AC 2 30
R1 in out 1k
C1 out 0 100n
.end
\"\"\"

[tolerance]
rel = 1e-6
abs = 1e-12
"""


@pytest.fixture
def rc(tmp_path: Path) -> Path:
    path = tmp_path / "rc.cir"
    path.write_text(RC)
    return path


@pytest.fixture
def case_file(tmp_path: Path) -> Path:
    path = tmp_path / "cases" / "rc.toml"
    path.parent.mkdir()
    path.write_text(CASE)
    return path


def _usage_error(argv: list[str], capsys) -> str:
    """Run the command line, require exit 2 (argparse's own exit, or the code returned) and return stderr."""
    try:
        code = main(argv)
    except SystemExit as stop:
        code = stop.code
    assert code == EXIT_USAGE
    err = capsys.readouterr().err
    assert "Traceback" not in err
    return err


REDUCE = ["reduce", "{rc}", "--port", "out", "0", "--freq", "1k", "--engine", "own"]


@pytest.mark.parametrize(
    ("extra", "option", "value"),
    [
        (["--rel", "-1"], "--rel", "-1"),
        (["--rel", "nan"], "--rel", "nan"),
        (["--rel", "0"], "--rel", "0"),
        (["--rel", "2"], "--rel", "2"),
        (["--expect-rel", "-1"], "--expect-rel", "-1"),
        (["--expect-rel", "inf"], "--expect-rel", "inf"),
    ],
)
def test_reduce_refuses_unusable_values(rc, capsys, extra, option, value):
    """An unusable reduce option value is exit 2 with a message naming the option, the value and what to write."""
    err = _usage_error([a.format(rc=rc) for a in REDUCE] + extra, capsys)
    assert f"argument {option}: {value!r}" in err
    assert "write " in err


def test_reduce_refuses_unreadable_frequency(rc, capsys):
    """A --freq that is not a number is a usage error naming --freq and the text, not an input error (exit 3)."""
    err = _usage_error(["reduce", str(rc), "--port", "out", "0", "--freq", "abc", "--engine", "own"], capsys)
    assert "argument --freq" in err and "'abc'" in err


@pytest.mark.parametrize(
    ("extra", "option", "value"),
    [
        (["--workers", "0"], "--workers", "0"),
        (["--workers", "two"], "--workers", "two"),
        (["--timeout", "0"], "--timeout", "0"),
        (["--timeout", "inf"], "--timeout", "inf"),
        (["--memory", "1k"], "--memory", "1024"),
        (["--output", "r.pdf"], "--output", "r.pdf"),
        (["--freq", "-5"], "--freq", "-5"),
    ],
)
def test_verify_refuses_unusable_values(case_file, capsys, extra, option, value):
    """An unusable verify option value is exit 2 naming the option and the value, before any case runs."""
    err = _usage_error(["verify", str(case_file), *extra], capsys)
    assert option in err and value in err


def test_verify_refuses_a_folder_as_baseline(case_file, tmp_path, capsys):
    """--baseline naming a folder is a usage error (exit 2) saying to name the JSON file."""
    err = _usage_error(["verify", str(case_file), "--baseline", str(tmp_path)], capsys)
    assert "argument --baseline" in err and "is a folder" in err


def test_unknown_report_extension_lists_the_known_ones(case_file, capsys):
    """--output r.pdf is refused with the list of known report extensions, not written as text."""
    err = _usage_error(["verify", str(case_file), "--output", str(case_file.parent / "r.pdf")], capsys)
    assert ".json .xml .csv .html .htm .md .markdown .txt" in err
    assert not (case_file.parent / "r.pdf").exists()


@pytest.mark.parametrize(
    ("extra", "option", "value"),
    [
        (["--count", "-1"], "--count", "-1"),
        (["--count", "0"], "--count", "0"),
        (["--nodes", "0", "5"], "--nodes", "0"),
        (["--workers", "0"], "--workers", "0"),
        (["--seed", "-1"], "--seed", "-1"),
        (["--case-seed", "-3"], "--case-seed", "-3"),
    ],
)
def test_fuzz_refuses_unusable_values(capsys, extra, option, value):
    """An unusable fuzz option value is exit 2 with the option and value named, before any network is drawn."""
    err = _usage_error(["fuzz", *extra], capsys)
    assert f"argument {option}: {value!r}" in err


def test_smallest_meaningful_rel_is_accepted(rc, capsys):
    """--rel at machine epsilon (the smallest accepted, 2.22e-16) runs; the pass rule keeps its round-off floor."""
    assert main([*(a.format(rc=rc) for a in REDUCE), "--rel", repr(SMALLEST_REL)]) == EXIT_OK
    assert SMALLEST_REL == pytest.approx(2.220446049250313e-16, rel=0)  # tolerance: exact (IEEE double epsilon)


def _verify_args(*argv: str):
    return parser().parse_args(["verify", *argv])


def test_verify_command_line_rel_and_sources_override_case_files(case_file):
    """--rel and --sources on the command line replace each case file's own (its abs is kept)."""
    [case] = _verify_items(_verify_args(str(case_file), "--rel", "1e-9", "--sources", "rms"))
    assert case.tolerance.rel == 1e-9  # tolerance: exact (the value given)
    assert case.tolerance.abs == 1e-12  # tolerance: exact (the case file's own, kept)
    assert case.sources == "rms"
    [plain] = _verify_items(_verify_args(str(case_file)))
    assert plain.tolerance.rel == 1e-6 and plain.sources == "peak"  # tolerance: exact (the file's values)


def test_override_is_named_in_the_report_header(case_file):
    """The report header names every command-line override, and is empty when there is none."""
    header = override_header(_verify_args(str(case_file), "--rel", "1e-9", "--sources", "rms"))
    assert "rel = 1e-09" in header and "sources = RMS" in header
    assert override_header(_verify_args(str(case_file))) == ""


def test_port_and_freq_with_only_case_files_are_noted(case_file, capsys):
    """--port and --freq given with case files alone change nothing, and stderr says so."""
    _verify_items(_verify_args(str(case_file), "--port", "a", "b", "--freq", "1k"))
    err = capsys.readouterr().err
    assert "--port, --freq apply only to netlists named directly" in err


def test_port_and_freq_with_a_netlist_are_not_noted(case_file, rc, capsys):
    """With a netlist named directly, --port and --freq apply and no note is printed."""
    items = _verify_items(_verify_args(str(case_file), str(rc), "--port", "out", "0", "--freq", "1k"))
    assert len(items) == 2
    assert "apply only" not in capsys.readouterr().err


@pytest.mark.spice
def test_reduce_engine_spice_runs_ngspice_alone(rc, capsys):
    """--engine spice gives ngspice's equivalents (JSON under "ngspice"), with no comparison and no own numbers."""
    argv = ["reduce", str(rc), "--port", "out", "0", "--freq", "1k", "--engine", "spice", "--format", "json"]
    assert main(argv) == EXIT_OK
    doc = json.loads(capsys.readouterr().out)
    assert doc["engine"] == "ngspice"
    [point] = doc["points"]
    assert "own" not in point and "verdict" not in point
    vth = complex(point["ngspice"]["vth"]["re"], point["ngspice"]["vth"]["im"])
    expected = 2 * complex(0.8660254037844387, 0.5) / (1 + 2j * 3.141592653589793 * 1e3 * 1e3 * 100e-9)
    assert abs(vth - expected) <= 1e-9 * abs(expected)  # tolerance: rel 1e-9 (ngspice's printed precision)


@pytest.mark.spice
def test_reduce_engine_spice_text_says_ngspice_alone(rc, capsys):
    """The text output of --engine spice is headed as ngspice's alone and has no comparison table."""
    assert main(["reduce", str(rc), "--port", "out", "0", "--freq", "1k", "--engine", "spice"]) == EXIT_OK
    out = capsys.readouterr().out
    assert "Equivalents from ngspice alone" in out
    assert "qty" not in out and "case(s):" not in out  # no comparison table, no summary line


def test_only_unknown_extensions_without_format_are_refused():
    """r.pdf is refused without --format; a file with no extension is text, and --format names any file's format."""
    from crosscheck.report.outputs import unknown_extensions

    assert len(unknown_extensions(None, [Path("r.pdf"), Path("r.md"), Path("report")])) == 1
    assert unknown_extensions("json", [Path("r.pdf")]) == []
