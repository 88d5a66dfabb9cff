"""Report text that does not go to a terminal (a CI log, a pipe) is wide enough to print paths, headers and
explanations whole, and never cuts a word with "…"."""

from __future__ import annotations

import io
import os
import subprocess
import sys
from pathlib import Path

import pytest

from crosscheck.judge.result import error_result
from crosscheck.report.results_text import PIPE_WIDTH, print_results, report_console, whole_words

LONG_TITLE = "Quarter-bridge strain gauge on hoist_load_cell_channel_7_with_shielded_cable_run as seen by the amplifier " * 2


def test_pipe_width_without_columns(monkeypatch):
    """With COLUMNS unset, a console on a non-terminal is PIPE_WIDTH (200) wide, not 80."""
    monkeypatch.delenv("COLUMNS", raising=False)
    assert PIPE_WIDTH >= 160
    assert report_console(file=io.StringIO()).width == PIPE_WIDTH


def test_pipe_width_follows_columns(monkeypatch):
    """With COLUMNS set, a console on a non-terminal is that wide."""
    monkeypatch.setenv("COLUMNS", "123")
    assert report_console(file=io.StringIO()).width == 123


def test_summary_keeps_long_paths_and_explanations_whole(monkeypatch):
    """A long case path prints on one line and a long explanation is never cut mid-word or with "…"."""
    monkeypatch.delenv("COLUMNS", raising=False)
    name = "corpus/power_distribution/substation_feeder_with_capacitor_bank_and_long_cable.toml"
    words = " ".join(f"word{i:03d}" for i in range(60))
    buffer = io.StringIO()
    print_results(report_console(file=buffer), [error_result(name, words)], detail=False)
    out = buffer.getvalue()
    assert name in out
    folded = " ".join(out.split())
    for i in range(60):
        assert f"word{i:03d}" in folded  # every word whole, none cut
    assert "…" not in out


def test_narrow_table_folds_instead_of_cutting():
    """At 40 columns the summary table folds its cells and never truncates a header or a value with "…"."""
    buffer = io.StringIO()
    from rich.console import Console

    print_results(Console(file=buffer, width=40), [error_result("a/b/c.toml", "short reason")], detail=False)
    assert "…" not in buffer.getvalue()


def test_whole_words_never_cuts_a_word():
    """Shortening stops at a space and marks the cut; text within the limit is unchanged."""
    assert whole_words("alpha beta gamma", 100) == "alpha beta gamma"
    assert whole_words("alpha beta gamma", 12) == "alpha beta …"


def _reduce_through_a_pipe(tmp_path: Path, columns: str | None) -> str:
    netlist = tmp_path / "long.cir"
    netlist.write_text(f"{LONG_TITLE.strip()}\nV1 in 0 AC 1\nR1 in out 1k\nC1 out 0 100n\n.end\n")
    env = {k: v for k, v in os.environ.items() if k != "COLUMNS"}
    if columns is not None:
        env["COLUMNS"] = columns
    argv = [sys.executable, "-m", "crosscheck", "reduce", str(netlist), "--port", "out", "0", "--freq", "1k"]
    done = subprocess.run([*argv, "--engine", "own"], capture_output=True, text=True, env=env, check=False)
    assert done.returncode == 0, done.stderr
    return done.stdout


@pytest.mark.parametrize("columns", [None, "250"])
def test_reduce_through_a_pipe_prints_the_title_and_table_whole(tmp_path, columns):
    """Through a pipe (COLUMNS unset, or wide), the netlist title prints on one line and the table headers whole."""
    out = _reduce_through_a_pipe(tmp_path, columns)
    for word in LONG_TITLE.split():
        assert word in out.split()  # the title wraps at spaces, if at all: no word cut
    assert "Z_th as R + L or C" in out  # the table, not the 80-column blocks
    assert "…" not in out


def test_reduce_through_a_pipe_respects_columns(tmp_path):
    """With COLUMNS=100 set, no line of the output is wider than 100 columns and nothing is cut with "…"."""
    out = _reduce_through_a_pipe(tmp_path, "100")
    assert max(len(line) for line in out.splitlines()) <= 100
    assert "…" not in out


@pytest.mark.parametrize("width", [80, 60])
def test_fuzz_error_table_headers_are_never_cut(width):
    """The fuzz summary's error table on a narrow console folds its headers; "quantity" is never "quanti…"."""
    from rich.console import Console

    from crosscheck.fuzz.loop import FuzzOptions
    from crosscheck.fuzz.summary import FuzzSummary
    from crosscheck.report.fuzz_summary import print_summary

    summary = FuzzSummary(options=FuzzOptions(count=1), faults=())
    for q in summary.errors:
        summary.errors[q].extend([1.25e-13, 3.5e-12])
        summary.worst[q] = (3.5e-12, 123456789012, 10.7e6)
    buffer = io.StringIO()
    print_summary(Console(file=buffer, width=width), summary)
    out = buffer.getvalue()
    assert "…" not in out
    if width >= 80:  # at 80 columns the header fits whole; narrower it may fold, but loses no letter
        assert "quantity" in out.replace("│", " ").replace("┃", " ").split()
