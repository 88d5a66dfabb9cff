"""Reading's warnings and notes reach every output; case files acknowledge warnings; --strict; misread frequencies.

Most tests inject a ``Reading`` into the run (the reader's own warnings are another part of the work):
``crosscheck.run.check.read_netlist_reading`` is wrapped so that a real read of a real netlist comes
back with extra warnings and notes, and everything downstream — the result, every report format, the
command line's exit codes, the pytest plugin — runs unchanged. The end-to-end tests at the bottom use
netlists that the reader itself warns about (a source with only a DC value; an element on the title
line).
"""

from __future__ import annotations

import io
import json
import xml.etree.ElementTree as ET
from dataclasses import replace
from pathlib import Path

import pandas as pd
import pytest
from rich.console import Console

from crosscheck import cli
from crosscheck.cli import EXIT_ERROR, EXIT_OK, EXIT_USAGE, main
from crosscheck.errors import CaseFileError, Location
from crosscheck.model.cases import load_case
from crosscheck.model.frequencies import FrequencyError, check_frequency_text, misread_frequency_text
from crosscheck.model.reading import WARNING_CODES, Reading, ReadWarning
from crosscheck.report.outputs import render_report
from crosscheck.report.results_text import print_results
from crosscheck.report.untrusted import markdown_text
from crosscheck.run import check
from crosscheck.run.check import case_from_netlist, held_strictly, run_cases
from crosscheck.vocabulary import Verdict

pytest_plugins = ["pytester"]

DIVIDER = "divider\nV1 in 0 DC 0 AC 1\nR1 in out 1k\nR2 out 0 1k\n.end\n"
#: A message carrying user text that each format must make inert: markup, HTML, a pipe, a mention, ESC.
HOSTILE = "node <b>n1</b> [red]x[/] |pipe| @team \x1b[31m"
NO_AC = ReadWarning("no-ac-source", "no independent source has an AC value: " + HOSTILE, Location("div.cir", 2))
TITLE = ReadWarning("title-is-element", "line 1 'R1 a 0 1k' is read as the title", Location("div.cir", 1))
NOTE = "div.cir:5: .tran 1u 1m ignored: an analysis card has no effect on an AC answer"


@pytest.fixture
def inject(monkeypatch):
    """``inject(*warnings, notes=...)``: every read in the run returns these warnings and notes too."""

    def install(*found: ReadWarning, notes: tuple[str, ...] = (NOTE,)) -> None:
        real = check.read_netlist_reading

        def reading(text, file="<string>", **kwargs):
            network, read = real(text, file, **kwargs)
            return network, Reading(read.notes + notes, read.warnings + found)

        monkeypatch.setattr(check, "read_netlist_reading", reading)

    return install


def _own_result(inject, *found: ReadWarning, accept: tuple[str, ...] = (), name: str = "div.cir"):
    inject(*found)
    case = case_from_netlist(name, DIVIDER, ("out", "0"), [1e3], accept_warnings=accept)
    [result] = run_cases([case], engine="own")
    return result


# --------------------------------------------------------------------------- the result and --strict


def test_run_carries_notes_and_warnings_and_sorts_out_the_acknowledged(inject):
    result = _own_result(inject, NO_AC, TITLE, accept=("title-is-element",))
    assert result.verdict == Verdict.PASS  # a warning never changes the verdict by itself
    assert result.warnings == (NO_AC, TITLE)
    assert result.read_notes[-1] == NOTE
    assert result.open_warnings == (NO_AC,)
    assert result.accepted_warnings == (TITLE,)


def test_strict_makes_an_unacknowledged_warning_an_error_and_keeps_the_answers(inject):
    result = _own_result(inject, NO_AC)
    strict = held_strictly(result)
    assert strict.verdict == Verdict.ERROR
    assert strict.own == result.own and strict.warnings == result.warnings
    assert "--strict" in strict.error and "div.cir:2" in strict.error and "[no-ac-source]" in strict.error
    assert 'accept_warnings = ["no-ac-source"]' in strict.error


def test_strict_leaves_an_acknowledged_warning_alone(inject):
    result = _own_result(inject, NO_AC, accept=("no-ac-source",))
    assert held_strictly(result) is result
    assert held_strictly(result).verdict == Verdict.PASS


# --------------------------------------------------------------------------- case files


def _case_file(tmp_path: Path, extra: str) -> Path:
    (tmp_path / "div.cir").write_text(DIVIDER, encoding="utf-8")
    path = tmp_path / "div.toml"
    path.write_text(f'netlist = "div.cir"\nport = ["out", "0"]\nfrequencies = ["1k"]\n{extra}', encoding="utf-8")
    return path


def test_case_file_accept_warnings_is_read(tmp_path):
    case = load_case(_case_file(tmp_path, 'accept_warnings = ["no-ac-source", "suffix-femto", "no-ac-source"]\n'))
    assert case.accept_warnings == ("no-ac-source", "suffix-femto")


@pytest.mark.parametrize(
    "value, words",
    [('["no-ac-sources"]', "'no-ac-sources' is not a warning code"), ('"no-ac-source"', "must be a list")],
)
def test_case_file_refuses_unknown_codes_listing_the_known_ones(tmp_path, value, words):
    with pytest.raises(CaseFileError) as caught:
        load_case(_case_file(tmp_path, f"accept_warnings = {value}\n"))
    message = str(caught.value)
    assert "key 'accept_warnings'" in message and words in message
    assert all(code in message for code in WARNING_CODES)


# --------------------------------------------------------------------------- every format


def _formats(results) -> dict[str, str]:
    out = {fmt: render_report(fmt, results) for fmt in ("json", "junit", "csv", "html", "markdown")}
    buffer = io.StringIO()
    print_results(Console(file=buffer, width=200, color_system=None), results, detail=False)
    out["text"] = buffer.getvalue()
    return out


def test_every_format_shows_the_warning_and_the_note(inject):
    result = _own_result(inject, NO_AC)
    out = _formats([result])
    for fmt, text in out.items():
        assert "no-ac-source" in text, fmt
        assert "div.cir:2" in text or fmt in ("json",), fmt
        assert ".tran 1u 1m ignored" in text, fmt
    doc = json.loads(out["json"])
    [case] = doc["cases"]
    assert case["warnings"] == [
        {
            "code": "no-ac-source",
            "meaning": WARNING_CODES["no-ac-source"],
            "file": "div.cir",
            "line": 2,
            "message": NO_AC.message,
        }
    ]
    assert doc["warnings"][0]["case"] == "div.cir" and case["notes"][-1] == NOTE and case["accepted_warnings"] == []
    frame = pd.read_csv(io.StringIO(out["csv"]), keep_default_na=False)
    warning_rows = frame[frame["check"] == "warning"]
    assert list(warning_rows["quantity"]) == ["no-ac-source"]
    assert warning_rows["explanation"].iloc[0].startswith("div.cir:2: no independent source")
    assert list(frame[frame["check"] == "note"]["explanation"]) == [n for n in result.read_notes]
    tree = ET.fromstring(out["junit"])
    [case_out] = [e.text for e in tree.iter("system-out") if e.text and "file: div.cir" in e.text]
    assert "WARNING [no-ac-source] div.cir:2: no independent source" in case_out
    assert tree.find(".//testcase/error") is None  # a warning alone is no error


def test_user_text_in_a_warning_is_inert_in_each_format(inject):
    out = _formats([_own_result(inject, NO_AC)])
    assert "\x1b" not in out["text"] and "\\x1b" in out["text"] and "[red]x[/]" in out["text"]
    assert "<b>n1" not in out["html"] and "&lt;b&gt;n1&lt;/b&gt;" in out["html"]
    assert markdown_text(NO_AC.message) in out["markdown"]  # a code span (report.untrusted), never raw
    assert "\x1b" not in out["markdown"]  # HTML escapes with html.escape, as every HTML string does


def test_a_formula_start_in_a_warning_location_is_neutralised_in_csv(inject):
    hostile = ReadWarning("no-ac-source", "x", Location("=HYPERLINK(1)", 3))
    out = render_report("csv", [_own_result(inject, hostile)])
    assert "'=HYPERLINK(1):3: x" in out


def test_an_acknowledged_warning_is_silent_except_in_json(inject):
    result = _own_result(inject, NO_AC, accept=("no-ac-source",))
    out = _formats([result])
    for fmt, text in out.items():
        if fmt != "json":
            assert "no-ac-source" not in text, fmt
    case = json.loads(out["json"])["cases"][0]
    assert case["warnings"] == [] and [w["code"] for w in case["accepted_warnings"]] == ["no-ac-source"]


def test_a_strict_error_is_an_error_in_junit_and_markdown(inject):
    out = _formats([held_strictly(_own_result(inject, NO_AC))])
    error = ET.fromstring(out["junit"]).find(".//testcase/error")
    assert error is not None and "--strict" in error.get("message", "")
    assert "ERROR" in out["markdown"].splitlines()[0]


# --------------------------------------------------------------------------- the command line


@pytest.fixture
def netlist(tmp_path) -> Path:
    path = tmp_path / "div.cir"
    path.write_text(DIVIDER, encoding="utf-8")
    return path


def test_reduce_shows_warnings_in_text_and_json(inject, netlist, capsys):
    inject(NO_AC)
    assert main(["reduce", str(netlist), "--port", "out", "0", "--freq", "1k", "--engine", "own"]) == EXIT_OK
    text = capsys.readouterr().out
    assert "Warning" in text and "[no-ac-source] div.cir:2" in text and ".tran 1u 1m ignored" in text
    assert text.index("no-ac-source") < text.index("V_th")  # before the numbers it may make meaningless
    assert (
        main(["reduce", str(netlist), "--port", "out", "0", "--freq", "1k", "--engine", "own", "--format", "json"])
        == EXIT_OK
    )
    doc = json.loads(capsys.readouterr().out)
    assert [w["code"] for w in doc["warnings"]] == ["no-ac-source"] and doc["notes"][-1] == NOTE


def test_reduce_strict_exits_with_error_unless_acknowledged(inject, netlist, capsys):
    inject(NO_AC)
    base = ["reduce", str(netlist), "--port", "out", "0", "--freq", "1k", "--engine", "own", "--strict"]
    assert main(base) == EXIT_ERROR
    assert "--strict" in capsys.readouterr().out
    assert main([*base, "--accept-warning", "no-ac-source"]) == EXIT_OK
    assert "no-ac-source" not in capsys.readouterr().out


def test_accept_warning_option_refuses_unknown_codes(netlist, capsys):
    with pytest.raises(SystemExit) as stop:
        main(["reduce", str(netlist), "--port", "out", "0", "--freq", "1k", "--accept-warning", "nope"])
    assert stop.value.code == EXIT_USAGE and "no-ac-source" in capsys.readouterr().err


@pytest.mark.spice
def test_verify_strict_and_accept_warnings_in_case_files(inject, tmp_path, capsys):
    inject(NO_AC)
    plain = _case_file(tmp_path, "")
    assert main(["verify", str(plain), "--format", "json"]) == EXIT_OK
    assert json.loads(capsys.readouterr().out)["warnings"][0]["code"] == "no-ac-source"
    assert main(["verify", str(plain), "--strict", "--output", str(tmp_path / "r.xml")]) == EXIT_ERROR
    assert ET.parse(tmp_path / "r.xml").find(".//testcase/error") is not None
    plain.write_text(plain.read_text() + 'accept_warnings = ["no-ac-source"]\n', encoding="utf-8")
    assert main(["verify", str(plain), "--strict"]) == EXIT_OK


def test_exit_code_table_puts_strict_errors_with_errors():
    """--strict errors are ``error`` verdicts, so the table's 3 applies (crosscheck/cli.py, EXIT_ERROR)."""
    assert cli.exit_code(["pass", Verdict.ERROR.value]) == EXIT_ERROR == 3


# --------------------------------------------------------------------------- the pytest plugin

PLUGIN_CASE = 'title = "divider"\nnetlist = "div.cir"\nport = ["out", "0"]\nfrequencies = ["1k"]\n'


@pytest.fixture
def plugin_library(pytester: pytest.Pytester) -> pytest.Pytester:
    (pytester.path / "cases").mkdir()
    (pytester.path / "cases/div.cir").write_text(DIVIDER, encoding="utf-8")
    (pytester.path / "cases/div.toml").write_text(PLUGIN_CASE, encoding="utf-8")
    return pytester


def test_plugin_reports_each_warning_and_strict_fails(inject, plugin_library):
    inject(NO_AC)
    # -W default: this project's own filterwarnings = error would reach the inner run (it is in-process)
    result = plugin_library.runpytest("cases", "--crosscheck-engine", "own", "-rA", "-W", "default")
    result.assert_outcomes(passed=1, warnings=1)
    result.stdout.fnmatch_lines(["*div.cir:2: CrosscheckReadingWarning: crosscheck ?no-ac-source?*"])
    result.stdout.fnmatch_lines(["*crosscheck reading*", "*WARNING ?no-ac-source? div.cir:2*", "*note: div.cir:5*"])
    strict = plugin_library.runpytest("cases", "--crosscheck-engine", "own", "--crosscheck-strict", "-W", "default")
    strict.assert_outcomes(failed=1, warnings=1)
    strict.stdout.fnmatch_lines(["*crosscheck: error*", "*WARNING ?no-ac-source? div.cir:2*"])


def test_plugin_is_silent_about_an_acknowledged_warning(inject, plugin_library):
    inject(NO_AC)
    path = plugin_library.path / "cases/div.toml"
    path.write_text(PLUGIN_CASE + 'accept_warnings = ["no-ac-source"]\n', encoding="utf-8")
    result = plugin_library.runpytest("cases", "--crosscheck-engine", "own", "--crosscheck-strict", "-rA")
    result.assert_outcomes(passed=1)
    assert "no-ac-source" not in result.stdout.str()


# --------------------------------------------------------------------------- frequencies SPICE misreads


@pytest.mark.parametrize("text", ["1MHz", "1M", "10.7MHz", "2Mhz", "1mHz", "1mhz", "1e3M", " 2M "])
def test_misread_frequency_spellings_are_refused_with_the_fix(text):
    """SPICE reads M and m alike as milli and ignores the letters after a scale (common practice)."""
    why = misread_frequency_text(text)
    assert (
        why is not None
        and "milli" in why
        and f"{text.strip()[: -len(text.strip().lstrip('0123456789.e+-'))]}meg" in why
    )
    with pytest.raises(FrequencyError, match="--freq:"):
        check_frequency_text(text, where="--freq")


@pytest.mark.parametrize("text", ["1kHz", "2.4GHz", "1meg", "1MEG", "1megHz", "1m", "50", "1e6", "10Hz"])
def test_frequencies_spice_reads_as_written_pass(text):
    assert misread_frequency_text(text) is None


def test_freq_option_refuses_mhz(netlist, capsys):
    with pytest.raises(SystemExit) as stop:
        main(["reduce", str(netlist), "--port", "out", "0", "--freq", "1MHz", "--engine", "own"])
    assert stop.value.code == EXIT_USAGE
    assert "write 1meg for 1 MHz" in capsys.readouterr().err


@pytest.mark.parametrize(
    "extra, key",
    [
        ('frequencies = ["1k", "1MHz"]\n', "frequencies[1]"),
        ('sweep = { start = "1k", stop = "2M", points = 3 }\n', "sweep.stop"),
        ('frequencies = ["1k"]\n[[expect]]\nat = "3MHz"\nvth = "0.5"\n', "expect[1].at"),
    ],
)
def test_case_file_refuses_mhz_frequencies(tmp_path, extra, key):
    (tmp_path / "div.cir").write_text(DIVIDER, encoding="utf-8")
    path = tmp_path / "c.toml"
    path.write_text(f'netlist = "div.cir"\nport = ["out", "0"]\n{extra}', encoding="utf-8")
    with pytest.raises(CaseFileError) as caught:
        load_case(path)
    assert f"key '{key}'" in str(caught.value) and "meg" in str(caught.value)


# --------------------------------------------------------------------------- with the reader's own warnings

def test_a_dc_only_netlist_warns_no_ac_source_and_strict_refuses_it(tmp_path, capsys):
    path = tmp_path / "dc.cir"
    path.write_text("supply divider\nV1 in 0 DC 5\nR1 in out 1k\nR2 out 0 1k\n.end\n", encoding="utf-8")
    args = ["reduce", str(path), "--port", "out", "0", "--freq", "50", "--engine", "own"]
    assert main(args) == EXIT_OK
    assert "no-ac-source" in capsys.readouterr().out
    assert main([*args, "--strict"]) == EXIT_ERROR
    assert main([*args, "--strict", "--accept-warning", "no-ac-source"]) == EXIT_OK


def test_an_element_on_the_title_line_warns_title_is_element(tmp_path, capsys):
    path = tmp_path / "t.cir"
    path.write_text("R1 in out 1k\nV1 in 0 DC 0 AC 1\nR2 in out 1k\nR3 out 0 1k\n.end\n", encoding="utf-8")
    args = ["reduce", str(path), "--port", "out", "0", "--freq", "50", "--engine", "own", "--format", "json"]
    assert main(args) == EXIT_OK
    doc = json.loads(capsys.readouterr().out)
    assert [(w["code"], w["line"]) for w in doc["warnings"]] == [("title-is-element", 1)]


def test_replace_keeps_reading_fields(inject):
    """A later judgement (``replace``) keeps what reading said."""
    result = _own_result(inject, NO_AC)
    assert replace(result, baseline_note="x").warnings == (NO_AC,)


@pytest.mark.parametrize("at", ["1MHz", "1M"])
def test_expect_option_refuses_a_misread_frequency(netlist, capsys, at):
    code = main(["reduce", str(netlist), "--port", "out", "0", "--freq", "1k", "--engine", "own", "--expect", f"vth@{at}=1"])
    assert code == EXIT_USAGE
    err = capsys.readouterr().err
    assert f"vth@{at}=1" in err and "write 1meg for 1 MHz" in err
