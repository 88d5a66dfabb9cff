"""Seeded fuzz of hostile case files and netlists through the command line: never a traceback, a good case unharmed."""

from __future__ import annotations

import json
import string
import tempfile
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from crosscheck.cli import main
from crosscheck.run import batch

GOOD = (
    'title = "good"\nnetlist = """\ndivider\nV1 in 0 AC 1\nR1 in out 1k\nR2 out 0 1k\n"""\n'
    'port = ["out", "0"]\nfrequencies = ["1k"]\n'
)
KEYS = ("title", "netlist", "port", "frequencies", "sweep", "sources", "tolerance", "expect", "limit",
        "allow_negative", "tags", "about", "bogus")
EXTREMES = ("1e308", "-1e308", "1e-320", "nan", "inf", "-5", "0", "1e" + "9" * 500, "9" * 400, "4k7", "", "\\u0000",
            "a" * 300, ".", "sub", "/etc/passwd", "../x.cir", "abs(zth)", "1k", "3+4j")

_scalars = st.one_of(
    st.integers(min_value=-(10**450), max_value=10**450).map(str),
    st.floats(allow_nan=False, allow_infinity=False).map(repr),
    st.sampled_from(EXTREMES).map(lambda t: f'"{t}"'),
    st.booleans().map(lambda b: "true" if b else "false"),
    st.text(string.printable, max_size=20).map(json.dumps),
)
_values = st.recursive(
    _scalars,
    lambda inner: st.one_of(
        st.lists(inner, max_size=4).map(lambda xs: "[" + ", ".join(xs) + "]"),
        st.dictionaries(st.sampled_from(KEYS + ("start", "stop", "per_decade", "points", "at", "min", "max", "band",
                                                "quantity", "rel", "abs", "vth", "zth")), inner, max_size=4)
        .map(lambda d: "{ " + ", ".join(f"{k} = {v}" for k, v in d.items()) + " }"),
    ),
    max_leaves=12,
)
_toml = st.dictionaries(st.sampled_from(KEYS), _values, max_size=8).map(
    lambda d: "".join(f"{k} = {v}\n" for k, v in d.items())
)
_tables = st.lists(
    st.tuples(st.sampled_from(("expect", "limit")), st.dictionaries(
        st.sampled_from(("at", "vth", "zth", "quantity", "min", "max", "band", "rel", "why")), _scalars, max_size=5)),
    max_size=3,
).map(lambda ts: "".join(f"[[{name}]]\n" + "".join(f"{k} = {v}\n" for k, v in body.items()) for name, body in ts))
_deep = st.integers(1, 4000).map(lambda n: GOOD + "about = " + "[" * n + "]" * n + "\n")
_netlist_lines = st.lists(
    st.one_of(
        st.sampled_from(("R1 in out 1k", "V1 in 0 AC 1", "+ 0", "C1 out 0 1e-320", ".subckt x a b", ".ends",
                         ".param a={1/0}", "L1 a 0 1e308", "X1 a b x", ".include /etc/passwd", "+", "*", "R2 out 0 -1")),
        st.text(string.printable, max_size=30),
    ),
    max_size=12,
).map(lambda lines: "t\n" + "\n".join(lines) + "\n")
_case_texts = st.one_of(
    st.binary(max_size=300).map(lambda b: ("bytes", b)),
    st.tuples(_toml, _tables).map(lambda t: ("toml", (t[0] + t[1]).encode())),
    _deep.map(lambda t: ("deep", t.encode())),
    _netlist_lines.map(lambda n: ("netlist", (
        'netlist = "hostile.cir"\nport = ["out", "0"]\nfrequencies = ["1k"]\n'.encode(), n.encode()))),
    st.binary(max_size=300).map(lambda b: ("netlist", (
        'netlist = "hostile.cir"\nport = ["out", "0"]\nfrequencies = ["1k"]\n'.encode(), b))),
)


_FIXTURES = [HealthCheck.function_scoped_fixture, HealthCheck.too_slow, HealthCheck.data_too_large]


def _check(kind_and_content, capsys) -> None:
    """Write the hostile case beside a good one, run verify, and hold the outcome to the rules."""
    kind, content = kind_and_content
    with tempfile.TemporaryDirectory() as folder:
        root = Path(folder)
        cases = root / "cases"
        cases.mkdir()
        (cases / "sub").mkdir()
        (cases / "good.toml").write_text(GOOD, encoding="utf-8")
        if kind == "netlist":
            case, netlist = content
            (cases / "hostile.toml").write_bytes(case)
            (cases / "hostile.cir").write_bytes(netlist)
        else:
            (cases / "hostile.toml").write_bytes(content)
        report = root / "r.json"
        code = main(["verify", str(cases), "--workers", "1", "--output", str(report)])
        captured = capsys.readouterr()
        assert "Traceback" not in captured.out + captured.err
        assert "RuntimeWarning" not in captured.err
        assert code in {0, 1, 3, 4, 5}
        document = json.loads(report.read_text(encoding="utf-8"))
        verdicts = {Path(c["case"]).name: c["verdict"] for c in document["cases"]}
        assert verdicts["good.toml"] == "pass", verdicts
        assert "hostile.toml" in verdicts


def _own_engine_only(monkeypatch) -> None:
    """verify without ngspice: its run_batch is called with engine='own', the rest of the command line as is."""
    real = batch.run_batch

    def own(items, executor=None, **kwargs):
        kwargs["engine"] = "own"
        return real(items, executor, **kwargs)

    monkeypatch.setattr(batch, "run_batch", own)


@settings(max_examples=30, derandomize=True, database=None, deadline=None, suppress_health_check=_FIXTURES)
@given(kind_and_content=_case_texts)
def test_hostile_inputs_never_raise_and_leave_the_good_case_passing(kind_and_content, capsys, monkeypatch):
    """30 seeded hostile case files or netlists (own engine): main returns an exit code, no traceback or numpy warning, good passes."""
    _own_engine_only(monkeypatch)
    _check(kind_and_content, capsys)


@pytest.mark.slow
@pytest.mark.spice
@settings(max_examples=300, deadline=None, database=None, suppress_health_check=_FIXTURES)
@given(kind_and_content=_case_texts)
def test_hostile_inputs_with_ngspice_long_run(kind_and_content, capsys):
    """300 random hostile inputs through the whole verify, ngspice included: same rules."""
    _check(kind_and_content, capsys)
