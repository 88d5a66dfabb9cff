"""The notebook API re-exported by `crosscheck`: reduce a netlist (text or file), run case files, get a frame."""

from __future__ import annotations

from pathlib import Path

import pytest

import crosscheck

DIVIDER = "divider\nV1 in 0 AC 10\nR1 in out 3k\nR2 out 0 1k\n.end\n"


def test_reduce_netlist_text_gives_the_divider_equivalent():
    """A resistive divider (common practice): V_th = V·R2/(R1+R2) = 2.5 V, Z_th = R1‖R2 = 750 Ω."""
    result = crosscheck.reduce_netlist(DIVIDER, ("out", "0"), [50.0], engine="own")
    [eq] = result.own
    assert eq.vth == pytest.approx(2.5, rel=1e-12, abs=1e-12)
    assert eq.zth == pytest.approx(750.0, rel=1e-12)
    assert result.verdict == "pass" and result.points == ()  # own route only: nothing compared


def test_reduce_netlist_reads_a_path_as_a_file(tmp_path: Path):
    """A Path is a file to read; the same network gives the same numbers as its text."""
    path = tmp_path / "divider.cir"
    path.write_text(DIVIDER, encoding="utf-8")
    from_file = crosscheck.reduce_netlist(path, ("out", "0"), [50.0], engine="own")
    from_text = crosscheck.reduce_netlist(DIVIDER, ("out", "0"), [50.0], engine="own")
    assert from_file.own == from_text.own and from_file.name == str(path)


@pytest.mark.spice
def test_run_case_files_reports_a_bad_file_and_goes_on(tmp_path: Path):
    """An unreadable case file becomes an error result; the good case still runs through both routes and
    agrees; the frame has the error row and the good case's compared quantities."""
    (tmp_path / "divider.cir").write_text(DIVIDER, encoding="utf-8")
    good = tmp_path / "good.toml"
    good.write_text('netlist = "divider.cir"\nport = ["out", "0"]\nfrequencies = ["50"]\n', encoding="utf-8")
    bad = tmp_path / "bad.toml"
    bad.write_text("port = 5\n", encoding="utf-8")
    results = crosscheck.run_case_files([bad, good])
    assert [r.verdict for r in results] == ["error", "pass"]
    frame = crosscheck.results_frame(results)
    assert set(frame["verdict"]) == {"error", "pass"}
    good_rows = frame[frame["case"] == str(good)]
    assert sorted(good_rows["quantity"]) == ["in", "vth", "zth"] and set(good_rows["check"]) == {"spice"}


def test_unknown_engine_is_refused():
    """An engine name that does not exist is refused with the choices."""
    with pytest.raises(ValueError, match="own, spice, both"):
        crosscheck.reduce_netlist(DIVIDER, ("out", "0"), [50.0], engine="ngspice")
