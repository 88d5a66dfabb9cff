"""The reader's size limits: the defaults refuse a netlist over them, naming the flag; the flags and keys admit it."""

from __future__ import annotations

import json
import os
from pathlib import Path

import pytest

from crosscheck.cli import EXIT_ERROR, EXIT_OK, EXIT_USAGE, main
from crosscheck.errors import CaseFileError, NetlistError
from crosscheck.model.cases import load_case
from crosscheck.model.netlist import read_netlist, read_netlist_text
from crosscheck.model.read_limits import DEFAULT_MAX_ELEMENTS, DEFAULT_MAX_NETLIST_MIB, ReadLimits
from crosscheck.run.check import run_cases


def _parallel(count: int) -> str:
    """``count`` element cards: 1 V behind 1 kΩ into node a, and ``count`` - 2 resistors in parallel from a to
    ground, each of (``count`` - 2) kΩ, so 1 kΩ together: V_th = 0.5 V, Z_th = 500 Ω."""
    shunts = count - 2
    return "limits\nV1 s 0 AC 1\nRS s a 1k\n" + "".join(f"R{i} a 0 {shunts}k\n" for i in range(shunts))


@pytest.fixture(scope="module")
def over_default(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """One element card more than the default limit (about 3 MB of text)."""
    path = tmp_path_factory.mktemp("big") / "over.cir"
    path.write_text(_parallel(DEFAULT_MAX_ELEMENTS + 1))
    return path


def test_the_default_element_limit_refuses_and_names_the_flag(over_default: Path, capsys) -> None:
    """reduce without the flag: exit 2 (an error), the message names --max-elements and the case-file key."""
    code = main(["reduce", str(over_default), "--port", "a", "0", "--freq", "1k", "--engine", "own"])
    err = capsys.readouterr().err
    assert code == EXIT_ERROR
    assert f"more than {DEFAULT_MAX_ELEMENTS} element cards" in err
    assert "--max-elements N" in err and "max_elements = N" in err


def test_the_element_flag_admits_the_netlist(over_default: Path, capsys) -> None:
    """--max-elements above the count reads it: V_th = 0.5 V and Z_th = 500 Ω (a divider of two 1 kΩ halves)."""
    code = main(
        ["reduce", str(over_default), "--port", "a", "0", "--freq", "1k", "--engine", "own", "--format", "json"]
        + ["--max-elements", str(2 * DEFAULT_MAX_ELEMENTS)]
    )
    assert code == EXIT_OK
    doc = json.loads(capsys.readouterr().out)
    point = doc["points"][0]
    # recomputed by this project: 1 kΩ source resistance against 1 kΩ of parallel shunts
    assert complex(point["own"]["vth"]["re"], point["own"]["vth"]["im"]) == pytest.approx(0.5, rel=1e-9)
    assert complex(point["own"]["zth"]["re"], point["own"]["zth"]["im"]) == pytest.approx(500.0, rel=1e-9)


def test_the_element_flag_reaches_the_reader(tmp_path: Path, capsys) -> None:
    """The flag is the reader's limit: --max-elements 11 refuses 12 cards naming the flag, 12 reads them."""
    path = tmp_path / "twelve.cir"
    path.write_text(_parallel(12))
    base = ["reduce", str(path), "--port", "a", "0", "--freq", "1k", "--engine", "own", "--format", "json"]
    assert main([*base, "--max-elements", "11"]) == EXIT_ERROR
    assert "more than 11 element cards" in capsys.readouterr().err
    assert main([*base, "--max-elements", "12"]) == EXIT_OK
    zth = json.loads(capsys.readouterr().out)["points"][0]["own"]["zth"]
    assert complex(zth["re"], zth["im"]) == pytest.approx(500.0, rel=1e-9)  # recomputed by this project


def test_the_limits_bound_the_reader_in_the_api() -> None:
    """``ReadLimits`` on ``read_netlist``: exactly the limit reads, one more is refused with the flag named."""
    text = _parallel(10)
    assert len(read_netlist(text, limits=ReadLimits(max_elements=10)).elements) == 10
    with pytest.raises(NetlistError, match="more than 9 element cards.*--max-elements"):
        read_netlist(text, limits=ReadLimits(max_elements=9))


def test_the_default_file_size_refuses_and_names_the_flag(tmp_path: Path) -> None:
    """A file one byte over 64 MiB (sparse on disk) is refused before decoding; the message says what to raise."""
    path = tmp_path / "huge.cir"
    with open(path, "wb") as fh:
        fh.truncate(DEFAULT_MAX_NETLIST_MIB * 2**20 + 1)
    with pytest.raises(NetlistError, match=f"--max-netlist-mib {DEFAULT_MAX_NETLIST_MIB + 1}"):
        read_netlist_text(path)


def test_the_file_size_flag_admits_and_refuses(tmp_path: Path, capsys) -> None:
    """--max-netlist-mib 1 refuses a 1.2 MiB netlist and names the flag; --max-netlist-mib 2 reads it."""
    path = tmp_path / "mid.cir"
    path.write_text(_parallel(60_000))
    assert 2**20 < os.path.getsize(path) < 2 * 2**20
    base = ["reduce", str(path), "--port", "a", "0", "--freq", "1k", "--engine", "own", "--format", "json"]
    assert main([*base, "--max-netlist-mib", "1"]) == EXIT_ERROR
    assert "--max-netlist-mib 2" in capsys.readouterr().err
    assert main([*base, "--max-netlist-mib", "2"]) == EXIT_OK


@pytest.mark.parametrize("value", ["0", "-3", "lots", "1e6"])
def test_bad_limit_values_are_usage_errors(tmp_path: Path, value: str, capsys) -> None:
    """A limit that is not a whole number from 1 up is refused by the command line, with what to write."""
    path = tmp_path / "rc.cir"
    path.write_text(_parallel(3))
    with pytest.raises(SystemExit) as info:
        main(["reduce", str(path), "--port", "a", "0", "--freq", "1k", "--max-elements", value])
    assert info.value.code == EXIT_USAGE
    assert "whole number" in capsys.readouterr().err


def _case(tmp_path: Path, extra: str, count: int = 12) -> Path:
    (tmp_path / "net.cir").write_text(_parallel(count))
    case = tmp_path / "case.toml"
    case.write_text(f'netlist = "net.cir"\nport = ["a", "0"]\nfrequencies = [1000.0]\n{extra}')
    return case


def test_case_file_keys_set_the_limits(tmp_path: Path) -> None:
    """``max_elements`` and ``max_netlist_mib`` in a case file become the case's limits; the defaults otherwise."""
    assert load_case(_case(tmp_path, "")).read_limits == ReadLimits()
    limits = load_case(_case(tmp_path, "max_elements = 5_000_000\nmax_netlist_mib = 300\n")).read_limits
    assert limits == ReadLimits(max_elements=5_000_000, max_netlist_mib=300)


def test_a_case_file_limit_refuses_and_the_command_line_overrides(tmp_path: Path) -> None:
    """A case file's max_elements below its netlist's count makes an error result naming the flag; limits
    given as load_case's ``read_limits`` (the command line's) replace the file's."""
    case = _case(tmp_path, "max_elements = 5\n")
    [refused] = run_cases([load_case(case)], engine="own")
    assert refused.own is None and "more than 5 element cards" in refused.error and "--max-elements" in refused.error
    [admitted] = run_cases([load_case(case, read_limits=ReadLimits(max_elements=20))], engine="own")
    assert not admitted.error and admitted.own is not None
    assert admitted.own[0].zth == pytest.approx(500.0, rel=1e-9)  # recomputed by this project, as above


@pytest.mark.parametrize(
    "extra, words",
    [
        ("max_elements = 0\n", "from 1 to"),
        ('max_elements = "many"\n', "whole number"),
        ("max_netlist_mib = true\n", "whole number"),
        ("max_netlist_mib = 99999999\n", "from 1 to"),
    ],
)
def test_bad_case_file_limits_name_the_key(tmp_path: Path, extra: str, words: str) -> None:
    """A limit key with a wrong type or out of range is refused, naming the file and the key."""
    key = extra.split(" ")[0]
    with pytest.raises(CaseFileError, match=f"key '{key}'.*{words}"):
        load_case(_case(tmp_path, extra))
