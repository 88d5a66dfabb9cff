"""DC excitation: the sources' DC values drive the network, at 0 Hz, on both routes (ngspice by ``.op``).

Expected values are measured in each test by running ngspice's operating point on the test's own text
(``ngspice_direct.ngspice_op``), or are closed forms written out beside the check (common practice:
voltage divider, Wheatstone bridge, Thevenin of a source with internal resistance).
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

from crosscheck.cli import main
from crosscheck.model.cases import load_case
from crosscheck.model.netlist import read_netlist, read_netlist_reading
from crosscheck.model.network import Port, dc_view
from crosscheck.own.equivalent import thevenin

REL = 1e-9

NETWORKS = {  # name: (netlist, port a, port b)
    "divider": ("divider\nV1 in 0 DC 12\nR1 in out 3.3k\nR2 out 0 6.8k\n", "out", "0"),
    "bridge": (
        "bridge with DC excitation\nVex top 0 5\nR1 top l 1.2k\nR2 l 0 1.5k\nR3 top r 2.2k\nR4 r 0 1.8k\n",
        "l",
        "r",
    ),
    "battery string": (
        "three cells, each with internal resistance\nV1 a 0 dc=12.6\nRi1 a b 0.02\nV2 c b DC 12.4\nRi2 c d 0.03\n"
        "V3 e d 12.5\nRi3 e f 0.025\nRload f 0 10\nRmon f g 1k\nRg g 0 2.2k\n",
        "g",
        "0",
    ),
    "current source": (
        "with a current source\nI1 0 a DC 2m\nR1 a 0 4.7k\nR2 a b 1k\nR3 b 0 3.3k\nV1 c b 1.5\nR4 c 0 680\n",
        "b",
        "0",
    ),
    "dependent source": (
        "with a dependent source\nV1 in 0 PULSE(2 5 1u 1u 1u 1m 2m)\nR1 in x 1k\nR2 x 0 2k\nE1 y 0 x 0 3.5\n"
        "R3 y out 470\nR4 out 0 1k\nG1 0 out x 0 1m\n",
        "out",
        "0",
    ),
}


def own_dc(text: str, a: str, b: str):
    network = read_netlist_reading(text, excitation="dc")[0]
    return thevenin(network, Port(a, b), [0.0])[0]


@pytest.mark.spice
@pytest.mark.parametrize("name", sorted(NETWORKS))
def test_dc_vth_is_ngspice_operating_point_voltage(name: str) -> None:
    """A DC network's V_th equals its node voltage from ngspice's operating point to 1e-9 relative."""
    from ngspice_direct import ngspice_op

    text, a, b = NETWORKS[name]
    measured = ngspice_op(text, [a, b])  # measured: ngspice's .op on the same text, in this test
    eq = own_dc(text, a, b)
    assert eq.vth is not None and eq.vth.imag == 0.0
    assert eq.vth.real == pytest.approx(measured[a] - measured[b], rel=REL)
    assert abs(measured[a] - measured[b]) > 0.1  # the network is driven: the check could fail


def test_wheatstone_bridge_against_its_closed_form() -> None:
    """Bridge top node at V, arms R1–R2 (node l) and R3–R4 (node r); port l–r. Common practice:
    V_th = V·(R2/(R1+R2) − R4/(R3+R4)), R_th = R1‖R2 + R3‖R4."""
    text, a, b = NETWORKS["bridge"]
    v, r1, r2, r3, r4 = 5.0, 1.2e3, 1.5e3, 2.2e3, 1.8e3
    eq = own_dc(text, a, b)
    assert eq.vth.real == pytest.approx(v * (r2 / (r1 + r2) - r4 / (r3 + r4)), rel=1e-12)
    assert eq.zth.real == pytest.approx(r1 * r2 / (r1 + r2) + r3 * r4 / (r3 + r4), rel=1e-12)


def test_zth_under_dc_is_the_ac_route_zth_at_zero_hertz() -> None:
    """Z_th does not depend on the excitation (sources are zeroed for it): DC and AC at 0 Hz agree."""
    for text, a, b in NETWORKS.values():
        dc = own_dc(text, a, b)
        ac = thevenin(read_netlist(text), Port(a, b), [0.0])[0]
        assert dc.zth == pytest.approx(ac.zth, rel=1e-12)


def test_the_ac_run_ignores_dc_values_and_dc_run_ignores_ac_values() -> None:
    text = "t\nV1 a 0 DC 10 AC 1\nR1 a b 1k\nR2 b 0 1k\n"
    assert thevenin(read_netlist(text), Port("b", "0"), [0.0])[0].vth == pytest.approx(0.5)
    assert own_dc(text, "b", "0").vth == pytest.approx(5.0)


@pytest.mark.parametrize(
    ("card", "dc"),
    [  # measured with ngspice .op (see netlist_cards.time_zero_value); here the reader's rule is held to it
        ("V1 a 0 DC 7 SIN(1 2 1k)", 7.0),
        ("V1 a 0 SIN(1 2 1k)", 1.0),
        ("V1 a 0 PULSE(3 5 0 1u 1u 1m 2m)", 3.0),
        ("V1 a 0 PWL(1m 4 2m 6)", 4.0),
        ("V1 a 0 -3 AC 1", -3.0),
        ("V1 a 0 dc=5", 5.0),
    ],
)
@pytest.mark.spice
def test_reader_dc_value_is_ngspice_operating_point(card: str, dc: float) -> None:
    from ngspice_direct import ngspice_op

    text = f"t\n{card}\nR1 a 0 1k\n"
    assert read_netlist(text).elements[0].dc_value == dc
    assert ngspice_op(text, ["a"])["a"] == pytest.approx(dc, rel=1e-12)  # measured: ngspice, this test


def test_an_unknown_time_zero_value_is_refused_under_dc_only() -> None:
    text = "t\nV1 a 0 AM(2 1.5 1k 1k)\nR1 a b 1k\nR2 b 0 1k\n"
    assert read_netlist(text).elements[0].dc_unknown is not None
    with pytest.raises(ValueError, match="DC v"):
        dc_view(read_netlist_reading(text, excitation="dc")[0])


def test_warnings_follow_the_excitation() -> None:
    text = "t\nV1 a 0 DC 5\nR1 a 0 1k\n"
    assert [w.code for w in read_netlist_reading(text)[1].warnings] == ["no-ac-source"]
    assert [w.code for w in read_netlist_reading(text, excitation="dc")[1].warnings] == []
    ac_only = "t\nV1 a 0 AC 1\nR1 a 0 1k\n"
    assert [w.code for w in read_netlist_reading(ac_only, excitation="dc")[1].warnings] == ["no-dc-source"]


def test_own_route_refuses_a_frequency_under_dc() -> None:
    network = read_netlist_reading(NETWORKS["divider"][0], excitation="dc")[0]
    with pytest.raises(ValueError, match="0 Hz only"):
        thevenin(network, Port("out", "0"), [50.0])


def write(tmp_path: Path, name: str, text: str) -> Path:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def test_usage_errors(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    net = write(tmp_path, "d.cir", NETWORKS["divider"][0])
    assert main(["reduce", str(net), "--port", "out", "0", "--excitation", "dc", "--freq", "50"]) == 2
    assert "--excitation dc with --freq 50" in capsys.readouterr().err
    assert main(["reduce", str(net), "--port", "out", "0"]) == 2
    assert "--freq" in capsys.readouterr().err
    assert main(["verify", str(net), "--port", "out", "0", "--excitation", "dc", "--freq", "1k"]) == 2
    assert "0 Hz only" in capsys.readouterr().err


def test_case_file_key(tmp_path: Path) -> None:
    write(tmp_path, "d.cir", NETWORKS["divider"][0])
    ok = write(tmp_path, "ok.toml", 'netlist = "d.cir"\nport = ["out", "0"]\nexcitation = "dc"\n')
    case = load_case(ok)
    assert (case.excitation, case.freqs_hz) == ("dc", (0.0,))
    assert (
        load_case(
            write(tmp_path, "ac.toml", 'netlist = "d.cir"\nport = ["out", "0"]\nfrequencies = ["50"]\n')
        ).excitation
        == "ac"
    )
    bad = write(
        tmp_path, "bad.toml", 'netlist = "d.cir"\nport = ["out", "0"]\nexcitation = "dc"\nfrequencies = ["50"]\n'
    )
    with pytest.raises(ValueError, match="frequencies.*0 Hz only"):
        load_case(bad)
    odd = write(tmp_path, "odd.toml", 'netlist = "d.cir"\nport = ["out", "0"]\nexcitation = "pulse"\n')
    with pytest.raises(ValueError, match="excitation"):
        load_case(odd)


def test_hand_expectation_at_zero_hertz(tmp_path: Path) -> None:
    """A hand value at 0 Hz is held against the DC answer: 12·6.8/(3.3+6.8) V (common practice: divider)."""
    write(tmp_path, "d.cir", NETWORKS["divider"][0])
    right = 12 * 6.8 / (3.3 + 6.8)
    for value, verdict in ((right, "pass"), (right * 1.01, "fail")):
        toml = (
            f'netlist = "d.cir"\nport = ["out", "0"]\nexcitation = "dc"\n'
            f'[[expect]]\nat = "0"\nvth = "{value!r}"\nrel = 1e-6\n'
        )
        path = write(tmp_path, f"e{verdict}.toml", toml)
        from crosscheck.api import run_case_files

        [result] = run_case_files([path], engine="own")
        assert result.verdict == verdict, result.expectations


@pytest.mark.spice
def test_both_routes_agree_and_json_records_the_excitation(tmp_path: Path) -> None:
    net = write(tmp_path, "bridge.cir", NETWORKS["bridge"][0])
    done = subprocess.run(
        [
            sys.executable,
            "-m",
            "crosscheck",
            "reduce",
            str(net),
            "--port",
            "l",
            "r",
            "--excitation",
            "dc",
            "--engine",
            "both",
            "--format",
            "json",
        ],
        capture_output=True,
        text=True,
        check=False,
        timeout=300,
    )
    assert done.returncode == 0, done.stderr
    doc = json.loads(done.stdout)
    assert doc["verdict"] == "pass" and doc["excitation"] == "dc"
    [case] = doc["cases"]
    assert case["excitation"] == "dc"
    assert [p["freq_hz"] for p in doc["points"]] == [0.0]


def test_baseline_records_the_excitation_and_a_change_of_it_is_said(tmp_path: Path) -> None:
    from crosscheck.api import run_case_files
    from crosscheck.judge.baseline import compare_with_baseline, updated_baseline
    from crosscheck.judge.baseline_file import baseline_document, load_baseline, write_baseline

    write(tmp_path, "d.cir", "d\nV1 in 0 DC 12 AC 1\nR1 in out 3.3k\nR2 out 0 6.8k\n")
    case = write(tmp_path, "d.toml", 'netlist = "d.cir"\nport = ["out", "0"]\nexcitation = "dc"\n')
    [dc] = run_case_files([case], engine="own")
    path = tmp_path / "base.json"
    write_baseline(updated_baseline([dc], path)[0], path)
    stored = load_baseline(path)
    [entry] = baseline_document(stored)["cases"].values()
    assert entry["excitation"] == "dc"
    assert compare_with_baseline(dc, stored)[0] and all(
        c.verdict == "pass" for c in compare_with_baseline(dc, stored)[0]
    )
    case.write_text('netlist = "d.cir"\nport = ["out", "0"]\nfrequencies = ["0"]\n', encoding="utf-8")
    [ac] = run_case_files([case], engine="own")
    checks, _ = compare_with_baseline(ac, stored)
    drifted = [c for c in checks if c.verdict == "drift"]
    assert (
        drifted and "excitation changed since the baseline was written (baseline dc, now ac)" in drifted[0].explanation
    )
