"""Hostile case files and netlists end only their own case, with a message; the run and its reports go on."""

from __future__ import annotations

import json
import os
import threading
import warnings
from pathlib import Path

import numpy as np
import pytest

from crosscheck.errors import CaseFileError, CrosscheckError
from crosscheck.model.case_file import MAX_CASE_BYTES, MAX_ENTRIES
from crosscheck.model.cases import MAX_POINTS, find_case_files, load_case
from crosscheck.model.netlist import read_netlist, read_netlist_text
from crosscheck.run import check
from crosscheck.run.check import run_cases
from crosscheck.vocabulary import Verdict

NETLIST = "divider\nV1 in 0 AC 1\nR1 in out 1k\nR2 out 0 1k\n"
GOOD = 'netlist = """\n' + NETLIST + '"""\nport = ["out", "0"]\n'


def _case(folder: Path, name: str, text: str) -> Path:
    path = folder / f"{name}.toml"
    path.write_text(text, encoding="utf-8")
    return path


def _refused(folder: Path, text: str, *words: str) -> str:
    """load_case refuses the text with a CaseFileError naming the file and every given word."""
    path = _case(folder, "hostile", text)
    with pytest.raises(CrosscheckError) as caught:
        load_case(path)
    message = str(caught.value)
    assert str(path) in message
    for word in words:
        assert word in message, message
    return message


# --------------------------------------------------------------------------- the whole run


@pytest.mark.spice
def test_hostile_folder_gives_error_results_good_cases_pass_and_every_report_is_written(tmp_path, capsys):
    """Seven hostile cases and two good ones: exit 3, the good pass, each hostile is an error with its reason."""
    from crosscheck.cli import EXIT_ERROR, main

    cases = tmp_path / "cases"
    cases.mkdir()
    (cases / "sub").mkdir()
    os.mkfifo(cases / "pipe.cir")
    _case(cases, "good_a", GOOD + 'frequencies = ["1k"]\n')
    _case(cases, "good_b", GOOD + 'sweep = { start = "10", stop = "1k", per_decade = 2 }\n')
    hostile = {
        "h_exponent": (GOOD + 'frequencies = ["1e' + "9" * 5000 + 'k"]\n', "characters long"),
        "h_tags": (GOOD + 'frequencies = ["1k"]\ntags = 5\n', "'tags'"),
        "h_deep": (GOOD + 'frequencies = ["1k"]\nabout = ' + "[" * 3000 + "]" * 3000 + "\n", "nested"),
        "h_sweep": (GOOD + 'sweep = { start = "1e-300", stop = "1e300", per_decade = 10 }\n', "sweep.stop"),
        "h_folder": ('netlist = "sub"\nport = ["out", "0"]\nfrequencies = ["1k"]\n', "folder"),
        "h_fifo": ('netlist = "pipe.cir"\nport = ["out", "0"]\nfrequencies = ["1k"]\n', "FIFO"),
        "h_tiny_r": (GOOD.replace("R2 out 0 1k", "R2 out 0 1e-320") + 'frequencies = ["1k"]\n', "r2"),
    }
    for name, (text, _) in hostile.items():
        _case(cases, name, text)
    outputs = [tmp_path / f"r.{ext}" for ext in ("json", "xml", "md", "csv", "html")]
    argv = ["verify", str(cases), "--workers", "1"]
    for out in outputs:
        argv += ["--output", str(out)]
    assert main(argv) == EXIT_ERROR
    assert "Traceback" not in capsys.readouterr().err
    for out in outputs:
        assert out.stat().st_size > 0, out
    document = json.loads(outputs[0].read_text(encoding="utf-8"))
    by_name = {Path(c["case"]).stem: c for c in document["cases"]}
    assert by_name["good_a"]["verdict"] == "pass" and by_name["good_b"]["verdict"] == "pass"
    for name, (_, reason) in hostile.items():
        assert by_name[name]["verdict"] == "error", name
        assert reason in by_name[name]["error"], (name, by_name[name]["error"])


# --------------------------------------------------------------------------- numbers


@pytest.mark.parametrize(
    "frequencies",
    ['["1e' + "9" * 5000 + 'k"]', "[" + "9" * 400 + "]", '["' + "1" * 150 + '"]'],
    ids=["5000-digit exponent", "400-digit integer", "150-digit number"],
)
def test_overlong_numbers_are_refused_with_the_key(tmp_path, frequencies):
    """A number too long to mean anything is refused, naming the frequencies key, instead of a traceback."""
    _refused(tmp_path, GOOD + f"frequencies = {frequencies}\n", "frequencies[0]")


@pytest.mark.parametrize(
    ("tail", "key"),
    [
        ('frequencies = ["1e308"]\n', "frequencies[0]"),
        ('sweep = { start = "1e-300", stop = "1e300", per_decade = 10 }\n', "sweep.stop"),
        ('frequencies = ["1k"]\n[[expect]]\nat = "-5"\nvth = "0.5"\n', "expect[1].at"),
        ('frequencies = ["1k"]\n[[expect]]\nat = "1e308"\nvth = "0.5"\n', "expect[1].at"),
        ('frequencies = ["1k"]\n[[limit]]\nquantity = "abs(zth)"\nmax = 1\nband = [1, "1e300"]\n', "band[1]"),
    ],
    ids=["huge frequency", "huge sweep", "negative expect at", "huge expect at", "huge band"],
)
def test_frequencies_outside_the_documented_range_are_refused(tmp_path, tail, key):
    """Every frequency (list, sweep, [[expect]] at, [[limit]] band) must lie in 0 .. 1e15 Hz."""
    _refused(tmp_path, GOOD + tail, key, "1e+15")


def test_a_subnormal_resistance_is_the_case_error_naming_the_element(tmp_path):
    """R = 1e-320 (1/R overflows) is an error result naming r1, not an exception out of run_cases."""
    text = 'netlist = "t\\nV1 1 0 AC 1\\nR1 1 2 1e-320\\nR2 2 0 1k\\n"\nport = ["2", "0"]\nfrequencies = ["1k"]\n'
    [result] = run_cases([load_case(_case(tmp_path, "tiny", text))], engine="own")
    assert result.verdict == Verdict.ERROR
    assert "r1" in result.error and "1e-100" in result.error


# --------------------------------------------------------------------------- types, counts, structure


@pytest.mark.parametrize("key", ["tags", "expect", "limit", "tolerance", "title", "allow_negative", "sources"])
def test_a_key_of_the_wrong_type_is_refused_by_name(tmp_path, key):
    """`key = 5` is refused with a message naming that key."""
    _refused(tmp_path, GOOD + f'frequencies = ["1k"]\n{key} = 5\n', f"'{key}'")


def test_deep_nesting_is_refused(tmp_path):
    """3,000 nested arrays are refused as too deep, not a RecursionError."""
    _refused(tmp_path, GOOD + 'frequencies = ["1k"]\nabout = ' + "[" * 3000 + "]" * 3000 + "\n", "nested")


def test_moderate_nesting_beyond_the_limit_names_the_key(tmp_path):
    """Ten nested arrays parse but exceed the documented depth: refused naming the key."""
    _refused(tmp_path, GOOD + 'frequencies = ["1k"]\nabout = ' + "[" * 10 + "]" * 10 + "\n", "about", "nested")


def test_too_many_limits_are_refused_quickly(tmp_path):
    """20,000 [[limit]] tables are refused with the documented cap."""
    entry = '[[limit]]\nquantity = "abs(zth)"\nmin = 1\n'
    _refused(tmp_path, GOOD + 'frequencies = ["1k"]\n' + entry * 20_000, "'limit'", f"at most {MAX_ENTRIES}")


def test_expect_frequencies_count_against_the_point_limit(tmp_path):
    """A full frequency list plus two new [[expect]] frequencies exceeds MAX_POINTS and is refused."""
    freqs = ", ".join(str(f) for f in range(1, MAX_POINTS + 1))
    tail = "".join(f'[[expect]]\nat = "{MAX_POINTS + k}.5"\nvth = "0.5"\n' for k in (1, 2))
    _refused(tmp_path, GOOD + f"frequencies = [{freqs}]\n" + tail, "'expect'", str(MAX_POINTS))


def test_oversized_case_file_is_refused_before_parsing(tmp_path):
    """A case file over MAX_CASE_BYTES is refused, naming the limit."""
    _refused(tmp_path, GOOD + 'frequencies = ["1k"]\nabout = "' + "x" * MAX_CASE_BYTES + '"\n', str(MAX_CASE_BYTES))


@pytest.mark.parametrize(
    ("limit", "words"),
    [("min = 10\nmax = 1\n", "above max"), ('max = 1\nband = ["10k", "1k"]\n', "reversed")],
    ids=["min above max", "reversed band"],
)
def test_impossible_limits_are_refused(tmp_path, limit, words):
    """A [[limit]] no value can meet (min > max) or with a reversed band is refused."""
    _refused(tmp_path, GOOD + 'frequencies = ["1k"]\n[[limit]]\nquantity = "abs(zth)"\n' + limit, "limit[1]", words)


def test_control_characters_in_a_title_are_refused(tmp_path):
    """A NUL byte in a plain string key is refused naming the key."""
    _refused(tmp_path, GOOD + 'frequencies = ["1k"]\ntitle = "a\\u0000b"\n', "'title'", "control character")


# --------------------------------------------------------------------------- text encodings


def test_a_byte_order_mark_is_accepted(tmp_path):
    """A case file starting with a UTF-8 byte-order mark reads like one without."""
    path = tmp_path / "bom.toml"
    path.write_bytes(b"\xef\xbb\xbf" + (GOOD + 'frequencies = ["1k"]\n').encode())
    assert load_case(path).port == ("out", "0")


def test_an_inline_netlist_with_carriage_returns_only_is_inline(tmp_path):
    """Inline netlist text whose lines end in CR alone is read as text, not taken for a file name."""
    text = 'netlist = "t\\rV1 1 0 AC 1\\rR1 1 2 1k\\rR2 2 0 1k\\r"\nport = ["2", "0"]\nfrequencies = ["1k"]\n'
    [result] = run_cases([load_case(_case(tmp_path, "cr", text))], engine="own")
    assert result.verdict == Verdict.PASS, result.error


# --------------------------------------------------------------------------- files and paths


@pytest.mark.parametrize(
    ("name", "words"),
    [
        ("sub", "folder"),
        (".", "folder"),
        ("a" * 300, "255"),
        ("a\\u0000b", "control character"),
        ("plain.cir/inner.cir", "netlist"),
    ],
    ids=["folder", "dot", "300 characters", "NUL", "file as a folder"],
)
def test_netlist_names_that_are_not_readable_files_are_refused(tmp_path, name, words):
    """netlist = a folder, '.', an overlong or NUL name, or a path through a file is refused by key."""
    (tmp_path / "sub").mkdir()
    (tmp_path / "plain.cir").write_text(NETLIST)
    _refused(tmp_path, f'netlist = "{name}"\nport = ["out", "0"]\nfrequencies = ["1k"]\n', "'netlist'", words)


def _returns_promptly(fn) -> BaseException | None:
    """Run fn in a thread; fail if it is still blocked after 20 s (generous: it should take milliseconds)."""
    outcome: list[BaseException | None] = []

    def target() -> None:
        try:
            fn()
            outcome.append(None)
        except BaseException as exc:  # handed back to the test
            outcome.append(exc)

    thread = threading.Thread(target=target, daemon=True)
    thread.start()
    thread.join(20)
    assert not thread.is_alive(), "reading blocked on a FIFO"
    return outcome[0]


def test_a_fifo_netlist_or_case_file_is_refused_without_blocking(tmp_path):
    """A FIFO named as netlist, as a case file or read directly is refused at once, never waited on."""
    os.mkfifo(tmp_path / "pipe.cir")
    os.mkfifo(tmp_path / "pipe.toml")
    case = _case(tmp_path, "c", 'netlist = "pipe.cir"\nport = ["out", "0"]\nfrequencies = ["1k"]\n')
    for fn in (lambda: load_case(case), lambda: load_case(tmp_path / "pipe.toml"),
               lambda: read_netlist_text(tmp_path / "pipe.cir")):
        exc = _returns_promptly(fn)
        assert isinstance(exc, CrosscheckError) and "FIFO" in str(exc), exc


@pytest.mark.skipif(os.geteuid() == 0, reason="root reads files whatever their mode")
def test_an_unreadable_case_file_is_refused(tmp_path):
    """A case file without read permission is refused with the reason."""
    path = _case(tmp_path, "locked", GOOD + 'frequencies = ["1k"]\n')
    path.chmod(0)
    with pytest.raises(CaseFileError, match="permission denied"):
        load_case(path)


def test_an_unreadable_subfolder_is_reported_not_skipped(tmp_path, monkeypatch):
    """A subfolder the walk cannot list comes back from find_case_files, and load_case says why."""
    locked = tmp_path / "locked"
    locked.mkdir()
    (locked / "a.toml").write_text(GOOD + 'frequencies = ["1k"]\n')
    _case(tmp_path, "good", GOOD + 'frequencies = ["1k"]\n')
    real = os.scandir

    def scandir(path=".", *args):
        if Path(path) == locked:
            raise PermissionError(13, "Permission denied", str(path))
        return real(path, *args)

    monkeypatch.setattr(os, "scandir", scandir)
    found = find_case_files([tmp_path])
    assert locked in found and tmp_path / "good.toml" in found
    with pytest.raises(CaseFileError, match="folder"):
        load_case(locked)


def test_a_symlinked_case_file_outside_its_folder_is_refused_unless_allowed(tmp_path):
    """A case file that links outside its folder obeys the netlists' rule, and --allow-outside-paths lifts it."""
    outside = tmp_path / "outside"
    inside = tmp_path / "inside"
    outside.mkdir()
    inside.mkdir()
    target = _case(outside, "secret", GOOD + 'frequencies = ["1k"]\n')
    link = inside / "link.toml"
    link.symlink_to(target)
    with pytest.raises(CaseFileError, match="outside"):
        load_case(link)
    assert load_case(link, allow_outside=True).port == ("out", "0")


# --------------------------------------------------------------------------- the run loop


def _two_cases(tmp_path: Path) -> list:
    return [load_case(_case(tmp_path, name, GOOD + 'frequencies = ["1k"]\n')) for name in ("first", "second")]


def test_an_unexpected_exception_in_solving_is_that_case_error(tmp_path, monkeypatch):
    """A non-crosscheck exception from the solver becomes the case's error naming its type; the next case runs."""
    real = check.thevenin
    calls = []

    def flaky(network, port, freqs, *args, **kwargs):
        calls.append(1)
        if len(calls) == 1:
            raise KeyError("boom")
        return real(network, port, freqs, *args, **kwargs)

    monkeypatch.setattr(check, "thevenin", flaky)
    first, second = run_cases(_two_cases(tmp_path), engine="own")
    assert first.verdict == Verdict.ERROR and "KeyError" in first.error and "bug" in first.error
    assert second.verdict == Verdict.PASS


def test_an_unexpected_exception_in_reading_is_that_case_error(tmp_path, monkeypatch):
    """A non-crosscheck exception from the netlist reader becomes that case's error with the case name."""
    monkeypatch.setattr(check, "read_netlist_reading", lambda *a, **k: [][1])
    first, _ = run_cases(_two_cases(tmp_path), engine="own")
    assert first.verdict == Verdict.ERROR and "IndexError" in first.error and "first.toml" in first.error


def test_keyboard_interrupt_still_stops_the_run(tmp_path, monkeypatch):
    """Ctrl-C is not turned into a case error: it stops the run."""

    def interrupted(*args, **kwargs):
        raise KeyboardInterrupt

    monkeypatch.setattr(check, "thevenin", interrupted)
    with pytest.raises(KeyboardInterrupt):
        run_cases(_two_cases(tmp_path), engine="own")


def test_numpy_warnings_from_a_solve_never_reach_the_terminal(tmp_path, monkeypatch):
    """Floating-point warnings raised inside a case's solve are kept in, not printed (or raised as errors)."""
    real = check.thevenin

    def noisy(*args, **kwargs):
        np.float64(1e308) * np.float64(10.0)  # overflow: numpy warns
        return real(*args, **kwargs)

    monkeypatch.setattr(check, "thevenin", noisy)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        results = run_cases(_two_cases(tmp_path), engine="own")
    assert [r.verdict for r in results] == [Verdict.PASS, Verdict.PASS]


def test_continuation_lines_keep_their_line_numbers(tmp_path):
    """A card of 2,000 + lines reads, and an error on its last line names that physical line."""
    body = "".join("+ \n" for _ in range(1999))
    good = read_netlist("t\nV1 a 0 AC 1\nR1 a\n" + body + "+ 0 1k\n")
    assert len(good.elements) == 2
    with pytest.raises(CrosscheckError, match=r":2003:"):
        read_netlist("t\nV1 a 0 AC 1\nR1 a 0\n" + body + "+ bogus=(\n")


def test_an_unexpected_exception_in_a_batch_baseline_step_is_that_case_error(tmp_path, monkeypatch):
    """On an executor, a non-crosscheck exception while applying the baseline ends only that case."""
    from concurrent.futures import ThreadPoolExecutor

    from crosscheck.run import batch

    calls = []

    def broken(result, baseline):
        calls.append(1)
        if len(calls) == 1:
            raise ZeroDivisionError("boom")
        return result

    monkeypatch.setattr(batch, "with_baseline", broken)
    with ThreadPoolExecutor(1) as executor:
        first, second = batch.run_batch(_two_cases(tmp_path), executor, engine="own", baseline=object())
    assert first.verdict == Verdict.ERROR and "ZeroDivisionError" in first.error and "bug" in first.error
    assert second.verdict == Verdict.PASS


def test_overlong_names_are_refused_in_netlists_and_ports(tmp_path):
    """A 300-character node name is refused with its line, and so is a 300-character port name in a case file."""
    with pytest.raises(CrosscheckError, match=r":3: .*300 characters"):
        read_netlist("t\nV1 in 0 AC 1\nR1 in " + "n" * 300 + " 1k\n")
    _refused(tmp_path, NETLIST_CASE_LONG_PORT, "'port'")


NETLIST_CASE_LONG_PORT = GOOD.replace('port = ["out", "0"]', 'port = ["' + "o" * 300 + '", "0"]') + 'frequencies = ["1k"]\n'
