"""Multi-port cases end to end: case-file ``ports`` and their errors, ngspice's matrices against the own
route's on random networks, hand values and limits on matrices, and `reduce --port ... --port ...`."""

from __future__ import annotations

import json
import textwrap
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from test_multiport import random_network, random_ports

from crosscheck.cli import main
from crosscheck.errors import CaseFileError
from crosscheck.judge.multiport import element_names
from crosscheck.model.cases import load_case
from crosscheck.own.multiport import reduce_ports
from crosscheck.report.csv_out import csv_report
from crosscheck.report.junit import junit_xml
from crosscheck.report.markdown import markdown_report
from crosscheck.report.results_json import results_document
from crosscheck.run.check import run_cases
from crosscheck.spice.workers import SpicePool

DIVIDER = "V1 in 0 AC 1\nR1 in a 100\nR2 a 0 200\nR3 a b 50\nR4 b 0 300\nG1 b 0 a 0 0.01\n"


def _case(tmp_path: Path, body: str) -> Path:
    path = tmp_path / "case.toml"
    path.write_text(f'netlist = """\n* two ports\n{DIVIDER}.end\n"""\nfrequencies = ["1k"]\n' + textwrap.dedent(body))
    return path


def test_ports_in_both_forms(tmp_path: Path) -> None:
    plain = load_case(_case(tmp_path, 'ports = [["a", "0"], ["b", "0"]]\n'))
    named = load_case(_case(tmp_path, 'ports = [{name = "left", nodes = ["a", "0"]}, {nodes = ["b", "0"]}]\n'))
    assert plain.multiport is not None and [p.name for p in plain.multiport.ports] == ["1", "2"]
    assert named.multiport is not None and [p.name for p in named.multiport.ports] == ["left", "2"]
    assert named.port == ("a", "0") and named.multiport.ports[1].port.a == "b"


@pytest.mark.parametrize(
    ("body", "key"),
    [
        ('ports = [["a", "0"]]\n', "ports"),
        ('ports = [["a", "0"], ["b"]]\n', "ports[2]"),
        ('ports = [["a", "0"], ["b", "b"]]\n', "ports[2]"),
        ('ports = [["a", "0"], {name = "x"}]\n', "ports[2]"),
        ('port = ["a", "0"]\nports = [["a", "0"], ["b", "0"]]\n', "port"),
        ('ports = [{name = "p", nodes = ["a", "0"]}, {name = "p", nodes = ["b", "0"]}]\n', "ports"),
        ('ports = [["a", "0"], ["b", "0"]]\n[[expect]]\nat = "1k"\nz13 = "5"\n', "expect[1].z13"),
        ('ports = [["a", "0"], ["b", "0"]]\n[[expect]]\nat = "1k"\nz0 = "5"\n', "expect[1].z0"),
        ('ports = [["a", "0"], ["b", "0"]]\n[[limit]]\nquantity = "abs(z3)"\nmax = 1\n', "limit[1].quantity"),
    ],
)
def test_case_file_errors_name_the_key(tmp_path: Path, body: str, key: str) -> None:
    with pytest.raises(CaseFileError) as caught:
        load_case(_case(tmp_path, body))
    assert f"'{key}'" in str(caught.value) or f"key {key}" in str(caught.value) or key in str(caught.value)


def test_hand_values_and_limits_on_matrices(tmp_path: Path) -> None:
    """By hand (nodal analysis of DIVIDER at a and b): z11 = 37.84, z21 = 16.22, z12 = 32.43; isc1 = 10 mA."""
    body = """
    ports = [["a", "0"], ["b", "0"]]
    [[expect]]
    at = "1k"
    z11 = "37.84"
    z21 = "16.22"
    isc1 = "10m"
    [[expect]]
    at = "1k"
    z12 = "16.22"
    [[limit]]
    quantity = "abs(z21)"
    max = 20
    [[limit]]
    quantity = "re(zdiff)"
    min = 100
    """
    [result] = run_cases([load_case(_case(tmp_path, body))], engine="own")
    part = result.multiport
    assert part is not None
    verdicts = {(e.index, e.quantity): e.verdict for e in part.expectations}
    assert verdicts == {(1, "z11"): "pass", (1, "z21"): "pass", (1, "isc1"): "pass", (2, "z12"): "fail"}
    # zdiff = z11 - z12 - z21 + z22 = 37.84 - 32.43 - 16.22 + 56.76 = 45.95 < 100
    assert [x.verdict for x in part.limits] == ["pass", "fail"]
    assert result.verdict == "fail" and "z12" in result.explanation
    doc = results_document([result])["cases"][0]["multiport"]
    assert [e["verdict"] for e in doc["expectations"]] == ["pass", "pass", "pass", "fail"]
    assert "failure" in junit_xml([result]) and "z12" in markdown_report([result])
    assert "z12" in csv_report([result])


@pytest.mark.spice
def test_own_route_matches_ngspice_on_random_multiports() -> None:
    """Every element of voc, Z, isc and Y within the default 1e-6 tolerance, with the element verdicts."""
    from crosscheck.model.cases import Case
    from crosscheck.model.netlist_writer import write_netlist
    from crosscheck.model.port_matrices import port_list
    from crosscheck.model.port_spec import MultiportSpec

    cases = []
    for seed in range(6):
        network = random_network(seed, controlled=seed % 2 == 1)
        ports = random_ports(seed, 2 + seed % 2)
        pairs = [(p.a, p.b) for p in ports]
        case = Case(Path(f"random{seed}"), "", write_netlist(network), f"random{seed}.cir", pairs[0], (0.0, 1e3, 1e5))
        cases.append(replace(case, multiport=MultiportSpec(port_list(pairs))))
    with SpicePool(workers=2) as pool:
        results = run_cases(cases, engine="both", pool=pool)
    for result in results:
        part = result.multiport
        assert result.error is None and part is not None and part.spice is not None, result.error
        for check in part.checks:
            assert [q.quantity for q in check.quantities] == element_names(len(part.port_names))
            assert check.verdict == "pass", check.explanation
            assert check.z_norm_error is not None and check.z_norm_error <= 1e-9
        for own, spice in zip(part.own, part.spice, strict=True):
            assert own.isc is not None and spice.isc is not None  # ngspice's own short-circuit run
            assert np.linalg.norm(own.isc - spice.isc) <= 1e-9 * np.linalg.norm(own.isc)


@pytest.mark.spice
def test_ngspice_degenerate_ports_agree() -> None:
    """Two ports joined by a voltage source: ngspice makes no short run either, and gives no Norton form."""
    from crosscheck.model.netlist import read_netlist
    from crosscheck.model.network import Port
    from crosscheck.spice.multiport import shorts_close_a_loop

    network = read_netlist("j\nV1 a b AC 1\nR1 a 0 100\nR2 b 0 200\n.end\n")
    ports = [Port("a", "0"), Port("b", "0")]
    assert shorts_close_a_loop(network, ports)
    with SpicePool(workers=1) as pool:
        spice = pool.submit(network, ports[0], [1e3], ports=ports).result()
    [point] = spice.points
    [own] = reduce_ports(network, ports, [1e3])
    assert point.y is None and point.isc is None and own.y is None
    assert point.z is not None and own.z is not None and np.allclose(point.z, own.z, rtol=1e-9)


def test_reduce_with_two_ports_gives_matrices_in_json(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    net = tmp_path / "net.cir"
    net.write_text(f"two ports\n{DIVIDER}.end\n")
    code = main(["reduce", str(net), "--port", "a", "0", "--port", "b", "0", "--freq", "1k", "--engine", "own",
                 "--format", "json"])  # fmt: skip
    doc = json.loads(capsys.readouterr().out)
    assert code == 0 and [p["name"] for p in doc["ports"]] == ["1", "2"]
    [point] = doc["points"]
    z = point["own"]["z"]
    assert len(z) == 2 and len(z[0]) == 2 and set(z[1][0]) == {"re", "im"}
    assert abs(z[1][0]["re"] - 16.216216216216) <= 1e-9 and abs(z[0][1]["re"] - 32.432432432432) <= 1e-9
    assert len(point["own"]["voc"]) == 2 and point["own"]["isc"] is not None and point["own"]["y"] is not None
    assert point["own"]["reciprocity"] > 0.1


def test_reduce_refuses_one_port_expect_with_several_ports(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    net = tmp_path / "net.cir"
    net.write_text(f"two ports\n{DIVIDER}.end\n")
    code = main(["reduce", str(net), "--port", "a", "0", "--port", "b", "0", "--freq", "1k", "--expect", "zth=5"])
    assert code == 2 and "[[expect]]" in capsys.readouterr().err


@pytest.mark.spice
def test_floating_secondary_as_second_port(tmp_path: Path) -> None:
    """A transformer whose secondary has no ground, across port 2: both routes refer it to its b node and agree."""
    path = tmp_path / "xfmr.toml"
    path.write_text(
        textwrap.dedent('''
        netlist = """
        * isolating transformer
        V1 in 0 AC 10
        R1 in p 5
        L1 p 0 10m
        L2 s1 s2 40m
        K1 L1 L2 0.98
        R2 s1 s2 2k
        """
        ports = [{name = "primary", nodes = ["p", "0"]}, {name = "secondary", nodes = ["s1", "s2"]}]
        frequencies = ["50", "1k"]
        ''')
    )
    with SpicePool(workers=1) as pool:
        [result] = run_cases([load_case(path)], engine="both", pool=pool)
    part = result.multiport
    assert result.error is None and part is not None and part.spice is not None, result.error
    assert [c.verdict for c in part.checks] == ["pass", "pass"], [c.explanation for c in part.checks]
    assert part.port_names == ("primary", "secondary")
    own = part.own[1]
    assert own.z is not None and abs(own.z[1, 0] - own.z[0, 1]) <= 1e-9 * abs(own.z[0, 1])  # reciprocal coupling


@pytest.mark.spice
def test_text_reports_show_the_matrices_and_the_degenerate_note(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    """`reduce` text with an inductor joining the ports at DC: both routes say Z is singular for ports 1 and 2,
    and agree element by element (DC excitation: ngspice's AC analysis at 0 Hz with the DC values)."""
    net = tmp_path / "dc.cir"
    net.write_text("dc two ports\nV1 in 0 DC 12\nR1 in a 100\nR2 a 0 200\nL1 a b 1m\nR4 b 0 300\nC1 b 0 1u\n.end\n")
    code = main(["reduce", str(net), "--port", "a", "0", "--port", "b", "0", "--excitation", "dc"])
    out = capsys.readouterr().out
    assert code == 0 and "own Z (Ω)" in out and "ngspice Z (Ω)" in out and "own vs ngspice: pass" in out
    assert "ports 1 and 2 together" in out and "own Y (S)" not in out  # 1 m H is a short at DC: no Norton form
    case = tmp_path / "pair.toml"
    case.write_text(_case(tmp_path, 'ports = [{name = "p", nodes = ["a", "0"]}, {name = "m", nodes = ["b", "0"]}]\n')
                    .read_text())  # fmt: skip
    assert main(["verify", str(case), "--detail"]) == 0
    out = capsys.readouterr().out
    assert "2 ports: p = (a, 0), m = (b, 0)" in out and "(not reciprocal)" in out


def test_multiport_deck_carries_no_user_names() -> None:
    """The deck is written from the model under our own names (n<k>, kind + number, VPORT, ITEST): no node or
    element name, title or comment of the user's reaches ngspice; every run is one copy with its own nodes."""
    from crosscheck.model.netlist import read_netlist
    from crosscheck.model.network import Port
    from crosscheck.spice.multiport import multiport_deck

    text = "* title shell_out\nVsecret in 0 AC 1\nRuser in tap_left 100\nRx tap_left 0 200\nRy tap_left tap_right 50\n"
    network = read_netlist(text + "Rz tap_right 0 300\n.end\n")
    ports = [Port("tap_left", "0"), Port("tap_right", "tap_left")]
    deck, wanted = multiport_deck(network, ports, [1e3, 2e3], ["open", "test0", "test1", "short"])
    lowered = deck.text.lower()
    for word in ("secret", "user", "tap_left", "tap_right", "shell_out", "rx", "ry", "rz"):
        assert word not in lowered, word
    assert deck.text.count("ITEST") == 2 and deck.text.count("VPORT") == 2 and deck.text.endswith(".end\n")
    assert len({v for vs in wanted.values() for v in vs if v != "0"}) == 2 * 3 + 2  # 2 port nodes x 3 runs + shorts


def test_spread_over_several_ports_is_refused_in_a_case_file(tmp_path: Path) -> None:
    body = 'ports = [["a", "0"], ["b", "0"]]\n[[vary]]\nparts = ["R*"]\ntol = "1%"\n'
    with pytest.raises(CaseFileError) as caught:
        load_case(_case(tmp_path, body))
    assert "vary" in str(caught.value) and "one port" in str(caught.value)


def test_spread_over_several_ports_is_refused_on_the_command_line(tmp_path: Path, capsys) -> None:
    from crosscheck.cli import EXIT_USAGE, main

    netlist = tmp_path / "two.cir"
    netlist.write_text("two ports\nV1 a 0 AC 1\nR1 a b 1k\nR2 b 0 1k\n", encoding="utf-8")
    code = main(["reduce", str(netlist), "--port", "a", "0", "--port", "b", "0", "--freq", "1k", "--vary", "R*=1%"])
    assert code == EXIT_USAGE
    assert "--vary is computed at one port" in capsys.readouterr().err


def test_a_misread_frequency_is_refused_in_a_multiport_case_too(tmp_path: Path) -> None:
    """``1MHz`` is 1 mHz to SPICE: refused with the fix in a several-port [[expect]] as in a one-port one."""
    body = 'ports = [["a", "0"], ["b", "0"]]\n[[expect]]\nat = "1MHz"\nz11 = 100\n'
    with pytest.raises(CaseFileError) as caught:
        load_case(_case(tmp_path, body))
    assert "expect[1].at" in str(caught.value) and "1meg" in str(caught.value)


@pytest.mark.spice
@pytest.mark.parametrize("fault", ["f-for-omega", "capacitor-inverted", "injection-node"])
def test_ngspice_multiport_route_stays_independent_of_the_own_stamps(fault: str) -> None:
    """The own route with a deliberately broken stamp (``fuzz.faults``) against ngspice's own runs: elements fail.
    Were the reference route to hand back the own route's numbers, the broken route would agree with it and
    this would pass silently; with the correct stamps every element passes."""
    from crosscheck.fuzz.faults import faulty_stamps
    from crosscheck.judge.multiport import MultiportResult, judge_multiport
    from crosscheck.model.netlist import read_netlist
    from crosscheck.model.network import Port
    from crosscheck.model.tolerance import SOLVER_VS_SPICE

    network = read_netlist("rc pair\nV1 a 0 AC 1\nR1 a b 1k\nC1 b 0 100n\nL1 b c 10m\nR2 c 0 470\nC2 c d 47n\nR3 d 0 2.2k\n")
    ports = [Port("b", "0"), Port("d", "0")]
    with SpicePool(workers=1) as pool:
        spice = pool.submit(network, ports[0], [1e3, 1e4], ports=ports).result().points
    pairs = tuple((p.a, p.b) for p in ports)
    verdicts = {}
    for label, own in (
        ("right", reduce_ports(network, ports, [1e3, 1e4])),
        ("broken", reduce_ports(network, ports, [1e3, 1e4], stamps=faulty_stamps(fault))),
    ):
        part = judge_multiport(MultiportResult(("1", "2"), pairs, own, tuple(spice)), None, SOLVER_VS_SPICE, compare=True)
        verdicts[label] = {q.verdict for check in part.checks for q in check.quantities}
    assert verdicts["right"] == {"pass"}
    assert "fail" in verdicts["broken"]
