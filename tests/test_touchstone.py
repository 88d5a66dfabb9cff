"""Touchstone export read back by an outside RF library, against crosscheck's own matrices.

The outside reader is scikit-rf (``skrf``, from the package registry; a test extra in pyproject.toml). Each
check compares to the file's printed precision: ``SIGNIFICANT_DIGITS`` = 12 figures per entry, so the
relative error of an entry read back is at most ~5e-12 of the entry and, after scikit-rf's own
Z/Y/S conversions (a solve of a well-conditioned matrix, condition < 100 here), at most ~1e-10 of the
matrix's norm: the tolerance below, RTOL_MATRIX.
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pytest

from crosscheck.report.touchstone import (
    SIGNIFICANT_DIGITS,
    TouchstoneError,
    s_from_z,
    touchstone_text,
    write_touchstone,
)

skrf = pytest.importorskip("skrf", reason="scikit-rf is a test extra: pip install -e '.[test]'")

FREQS = [0.0, 50.0, 1.0e3, 2.5e6]
Z0 = 75.0
#: Relative to the largest entry of the matrix (see the module docstring).
RTOL_MATRIX = 1e-10


def _impedances(n: int, seed: int) -> np.ndarray:
    """A non-reciprocal, well-conditioned Z per frequency (Z != Z^T, so a swapped N12/N21 shows)."""
    rng = np.random.default_rng(seed)
    z = rng.normal(size=(len(FREQS), n, n)) * 30 + 1j * rng.normal(size=(len(FREQS), n, n)) * 20
    return z + np.eye(n) * 250.0


def _kind_matrices(z: np.ndarray, kind: str) -> np.ndarray:
    return {"Z": z, "Y": np.linalg.inv(z), "S": s_from_z(z, Z0)}[kind]


def _read_back(path: Path, kind: str, version: str) -> np.ndarray:
    """The matrices of ``kind`` as scikit-rf reads the file.

    scikit-rf 2.2 de-normalises every non-S kind of a version 1.x file by multiplying by R; for Y the
    standard's normalisation is Y*R, so scikit-rf's Y is R^2 too large and is divided back here (its own
    writer does write Y*R: ``test_normalised_y_matches_scikit_rf_s_own_writer`` holds our numbers to it)."""
    net = skrf.Network(str(path))
    got = {"Z": net.z, "Y": net.y, "S": net.s}[kind]
    if kind == "Y" and version == "1.1":
        got = got / Z0**2
    np.testing.assert_allclose(net.f, FREQS, rtol=10.0 ** -(SIGNIFICANT_DIGITS - 1), atol=0)
    return got


@pytest.mark.parametrize("version", ["1.1", "2.0"])
@pytest.mark.parametrize("kind", ["Z", "Y", "S"])
@pytest.mark.parametrize("ports", [1, 2, 3, 4])
def test_scikit_rf_reads_back_what_was_written(tmp_path: Path, ports: int, kind: str, version: str) -> None:
    """Outside check (scikit-rf reads the file): every entry agrees to the printed precision."""
    z = _impedances(ports, seed=10 * ports + len(kind))
    expected = _kind_matrices(z, kind)
    path = tmp_path / f"net.s{ports}p"
    write_touchstone(path, FREQS, expected, kind, z0=Z0, version=version, comments=["test"])  # type: ignore[arg-type]
    got = _read_back(path, kind, version)
    for f, e, g in zip(FREQS, expected, got, strict=True):
        err = np.max(np.abs(g - e)) / np.max(np.abs(e))
        assert err <= RTOL_MATRIX, f"{ports}-port {kind} v{version} at {f} Hz: relative error {err:.2e} > {RTOL_MATRIX}"


def test_normalised_y_matches_scikit_rf_s_own_writer(tmp_path: Path) -> None:
    """Outside check: scikit-rf's writer, given the same network, prints the same version-1 Y numbers (Y*R)."""
    z = _impedances(2, seed=3)
    ours = tmp_path / "ours.s2p"
    write_touchstone(ours, FREQS[1:], np.linalg.inv(z[1:]), "Y", z0=Z0, version="1.1")
    net = skrf.Network(frequency=skrf.Frequency.from_f(FREQS[1:], unit="hz"), s=s_from_z(z[1:], Z0), z0=Z0, name="pair")
    theirs = net.write_touchstone(return_string=True, form="ri", parameter="Y", r_ref=Z0)
    numbers = [_numbers(text) for text in (ours.read_text(), theirs)]
    np.testing.assert_allclose(numbers[0], numbers[1], rtol=1e-9, atol=1e-12)


def _numbers(text: str) -> np.ndarray:
    rows = [line.split("!")[0] for line in text.splitlines() if line.strip() and line.strip()[0] not in "!#["]
    return np.array([float(x) for row in rows for x in row.split()])


def test_layout_follows_the_standard() -> None:
    """Option line, 2.0 keywords in order, N21 before N12 for 2 ports, at most four pairs per line for n > 2."""
    z2 = np.array([[[1.0, 2.0], [3.0, 4.0]]], dtype=complex)
    text = touchstone_text([1e3], z2, "Z", version="2.0", comments=["Kläranlage\x1b[31m"])
    lines = text.splitlines()
    keywords = [ln.split("]")[0] + "]" for ln in lines if ln.startswith("[")]
    assert keywords == [
        "[Version]",
        "[Number of Ports]",
        "[Two-Port Data Order]",
        "[Number of Frequencies]",
        "[Reference]",
        "[Network Data]",
        "[End]",
    ]
    assert "# Hz Z RI R 50" in lines and "[Two-Port Data Order] 21_12" in lines
    data = [float(x) for x in lines[lines.index("[Network Data]") + 1].split()]
    assert data[1::2] == [1.0, 3.0, 2.0, 4.0], "2-port order is N11 N21 N12 N22"
    assert all(32 <= ord(c) <= 126 for c in text.replace("\n", "")), "only printable ASCII"
    z5 = np.ones((1, 5, 5), dtype=complex)
    rows = [ln for ln in touchstone_text([1.0], z5, "Z").splitlines() if not ln.startswith(("!", "#"))]
    # per matrix row: 4 pairs then 1 pair; the first line of a frequency also starts with the frequency
    assert [len(r.split()) for r in rows] == [9, 2] + [8, 2] * 4


def test_version_1_normalises_z_and_y_by_the_reference() -> None:
    """1.1 holds Z/R and Y*R; 2.0 holds ohms and siemens (both read in the standard's text)."""
    z = np.array([[[100.0 + 0j]]])
    for version, kind, m, printed in [
        ("1.1", "Z", z, 2.0),
        ("2.0", "Z", z, 100.0),
        ("1.1", "Y", 1 / z, 0.5),
        ("2.0", "Y", 1 / z, 0.01),
    ]:
        text = touchstone_text([1.0], m, kind, version=version)  # type: ignore[arg-type]
        line = next(ln for ln in text.splitlines() if re.match(r"^\d", ln))
        assert float(line.split()[1]) == pytest.approx(printed, rel=1e-12), (version, kind)


def test_s_from_z_matches_the_one_port_reflection_coefficient() -> None:
    """s_from_z of a 1x1 Z is (Z - z0)/(Z + z0) (common practice), to 1e-15 relative."""
    z = np.array([[[30.0 + 40.0j]]])
    assert s_from_z(z, 50.0)[0, 0, 0] == pytest.approx((z[0, 0, 0] - 50) / (z[0, 0, 0] + 50), rel=1e-15)


def test_refusals_say_what_to_do(tmp_path: Path) -> None:
    """Wrong extension, unsorted frequencies, a missing form and writing over an input are refused."""
    z = _impedances(2, seed=1)
    with pytest.raises(TouchstoneError, match=r"\.s2p"):
        write_touchstone(tmp_path / "x.s3p", FREQS, z, "Z")
    with pytest.raises(TouchstoneError, match="increasing"):
        touchstone_text(FREQS[::-1], z, "Z")
    with pytest.raises(TouchstoneError, match="no Y form|infinite"):
        touchstone_text(FREQS, np.full_like(z, np.inf), "Y")
    netlist = tmp_path / "net.s2p"
    netlist.write_text("keep me\n")
    with pytest.raises(TouchstoneError, match="input of this run"):
        write_touchstone(netlist, FREQS, z, "Z", inputs=[netlist])
    assert netlist.read_text() == "keep me\n"


RC_NETLIST = "rc divider\nV1 in 0 AC 1\nR1 in out 1k\nC1 out 0 100n\n.end\n"


def _rc_impedance(f_hz: float) -> complex:
    """1k in parallel with 100 nF (common practice: the divider's source impedance seen from out)."""
    return 1.0 / (1.0 / 1e3 + 2j * np.pi * f_hz * 100e-9)


@pytest.mark.parametrize(("kind", "version"), [("Z", "1.1"), ("S", "2.0"), ("Y", "2.0")])
def test_reduce_writes_a_one_port_file_scikit_rf_reads(tmp_path: Path, kind: str, version: str) -> None:
    """``reduce --touchstone out.s1p``: scikit-rf reads Z_th of the RC divider at each frequency, to 1e-10."""
    from crosscheck.cli import main

    netlist = tmp_path / "rc.cir"
    netlist.write_text(RC_NETLIST)
    out = tmp_path / "out.s1p"
    argv = ["reduce", str(netlist), "--port", "out", "0", "--freq", "100", "1k", "10k", "--engine", "own"]
    code = main([*argv, "--touchstone", str(out), "--touchstone-kind", kind.lower(), "--touchstone-version", version])
    assert code == 0 and out.exists()
    net = skrf.Network(str(out))
    z = np.array([_rc_impedance(f) for f in (100.0, 1e3, 10e3)])
    np.testing.assert_allclose(net.f, [100.0, 1e3, 10e3], rtol=1e-11)
    np.testing.assert_allclose(net.z[:, 0, 0], z, rtol=1e-10)
    assert "crosscheck" in out.read_text().splitlines()[0] and "rc divider" in out.read_text()


def test_reduce_refuses_to_write_over_its_netlist(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """A --touchstone path that is the netlist itself is refused and the netlist is left as it was."""
    from crosscheck.cli import main

    netlist = tmp_path / "rc.s1p"
    netlist.write_text(RC_NETLIST)
    code = main(["reduce", str(netlist), "--port", "out", "0", "--freq", "1k", "--engine", "own",
                 "--touchstone", str(netlist)])  # fmt: skip
    assert code != 0 and "input of this run" in capsys.readouterr().err
    assert netlist.read_text() == RC_NETLIST


PI_NETLIST = "pi pad\nVs s 0 AC 1\nRs s p1 50\nRa p1 0 220\nRb p2 0 470\nRc p1 p2 100\n.end\n"


@pytest.mark.parametrize("version", ["1.1", "2.0"])
def test_reduce_with_two_ports_writes_an_s2p_scikit_rf_reads(tmp_path: Path, version: str) -> None:
    """``reduce --port p1 0 --port p2 0 --touchstone pi.s2p``: scikit-rf reads the Pi network's Z
    (Ra || (Rc + Rb) etc., with Rs in parallel at port 1 since Vs is zeroed; common practice), to 1e-10."""
    from crosscheck.cli import main

    netlist = tmp_path / "pi.cir"
    netlist.write_text(PI_NETLIST)
    out = tmp_path / "pi.s2p"
    argv = ["reduce", str(netlist), "--port", "p1", "0", "--port", "p2", "0", "--freq", "1k", "--engine", "own"]
    assert main([*argv, "--touchstone", str(out), "--touchstone-version", version]) == 0
    ra, rb, rc = 1 / (1 / 220 + 1 / 50), 470.0, 100.0  # Rs (Vs zeroed) lies across port 1 with Ra
    total = ra + rb + rc
    z = np.array([[ra * (rb + rc), ra * rb], [ra * rb, rb * (ra + rc)]]) / total
    np.testing.assert_allclose(skrf.Network(str(out)).z[0], z, rtol=1e-10)
    assert "1 = 1 (p1, 0), 2 = 2 (p2, 0)" in out.read_text()


@pytest.mark.spice
def test_verify_writes_one_file_per_case_into_a_folder(tmp_path: Path) -> None:
    """``verify A.toml B.toml --touchstone DIR``: one <stem>.sNp per case (3 and 2 ports), each read back by
    scikit-rf equal to the own route's Z to 1e-10 (the printed precision, see the module docstring)."""
    from crosscheck.cli import main
    from crosscheck.model.cases import load_case
    from crosscheck.model.netlist import read_netlist
    from crosscheck.own.multiport import reduce_ports

    corpus = Path(__file__).resolve().parent.parent / "corpus"
    cases = [corpus / "power_distribution" / "cold_store_feeder.toml", corpus / "audio" / "chapel_mic_input.toml"]
    out = tmp_path / "touchstone"
    assert main(["verify", *map(str, cases), "--touchstone", str(out), "--format", "json"]) == 0
    assert sorted(p.name for p in out.iterdir()) == ["chapel_mic_input.s2p", "cold_store_feeder.s3p"]
    for path in cases:
        case = load_case(path)
        assert case.multiport is not None
        network = read_netlist(case.netlist_text, file=case.netlist_file)
        own = np.array([p.z for p in reduce_ports(network, case.multiport.ports, case.freqs_hz)])
        got = skrf.Network(str(out / f"{path.stem}.s{len(case.multiport.ports)}p")).z
        err = np.max(np.abs(got - own)) / np.max(np.abs(own))
        assert err <= RTOL_MATRIX, f"{path.stem}: relative error {err:.2e}"


def test_reduce_refuses_touchstone_with_spice_alone(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """--engine spice computes no own matrices: --touchstone with it is a usage error (exit 2), nothing written."""
    from crosscheck.cli import EXIT_USAGE, main

    netlist = tmp_path / "rc.cir"
    netlist.write_text(RC_NETLIST)
    out = tmp_path / "x.s1p"
    argv = ["reduce", str(netlist), "--port", "out", "0", "--freq", "1k", "--engine", "spice", "--touchstone", str(out)]
    assert main(argv) == EXIT_USAGE and not out.exists()
    assert "--engine own or both" in capsys.readouterr().err
