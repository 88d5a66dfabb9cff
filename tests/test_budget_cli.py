"""The command line's limits reach both routes: --timeout and --memory build one budget per case."""

from __future__ import annotations

from pathlib import Path

from crosscheck import cli

RC = "rc\nV1 in 0 AC 1\nR1 in out 1k\nC1 out 0 100n\n.end\n"


def _case(tmp_path: Path) -> Path:
    (tmp_path / "rc.cir").write_text(RC, encoding="utf-8")
    case = tmp_path / "rc.toml"
    case.write_text('netlist = "rc.cir"\nport = ["out", "0"]\nfrequencies = ["1k"]\n', encoding="utf-8")
    return case


def test_an_unusable_memory_limit_is_a_usage_error(tmp_path: Path, capsys):
    """--memory that is not an amount is refused before any case runs, with exit 2 and the accepted form."""
    assert cli.main(["verify", str(_case(tmp_path)), "--memory", "lots"]) == cli.EXIT_USAGE
    assert "e.g. --memory 4G" in capsys.readouterr().err


def test_an_infinite_timeout_is_a_usage_error(tmp_path: Path, capsys):
    """--timeout inf is refused as a usage error (a gate needs a wall-clock limit), never every case an error."""
    assert cli.main(["verify", str(_case(tmp_path)), "--timeout", "inf"]) == cli.EXIT_USAGE
    assert "--timeout inf" in capsys.readouterr().err


def test_the_budget_reaches_the_own_route_through_a_batch(tmp_path: Path):
    """run_batch hands its budget to the own route: a long sweep over the memory limit is that case's error,
    naming the flag, and the other case still passes (the estimate of 8,001 points is several MiB)."""
    from crosscheck.model.budget import Budget
    from crosscheck.model.cases import load_case
    from crosscheck.run.batch import run_batch

    small = load_case(_case(tmp_path))
    (tmp_path / "long.toml").write_text(
        'netlist = "rc.cir"\nport = ["out", "0"]\nsweep = { start = "10", stop = "100k", per_decade = 2000 }\n',
        encoding="utf-8",
    )
    long = load_case(tmp_path / "long.toml")
    assert len(long.freqs_hz) == 8001
    results = run_batch([small, long], engine="own", budget=Budget(time_s=60.0, memory_bytes=1 << 20))
    assert [r.verdict for r in results] == ["pass", "error"]
    assert "own solver" in results[1].error and "--memory" in results[1].error
