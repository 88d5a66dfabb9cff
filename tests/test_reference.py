"""ngspice as the independent reference: the decks we write and the equivalents ngspice returns.

Deck tests run without ngspice. Tests marked ``spice`` need ngspice's shared library and fail
(never skip) without it. Every comparison states its tolerance and where its expected value comes from.
"""

from __future__ import annotations

import cmath
import math
import re
import subprocess
import sys
import textwrap

import numpy as np
import pytest

from crosscheck.errors import EngineUnavailableError, NetworkError, ReferenceEngineError
from crosscheck.model.network import Network, Port, make_element as el
from crosscheck.spice.engine import SpicePoint, SpiceResult, ngspice_available, route_mismatch
from crosscheck.spice.deck import analysis_cards, build_combined_deck, build_deck, port_is_voltage_defined
from crosscheck.spice.workers import SpicePool, spice_equivalent

#: ngspice against an exact formula: double-precision agreement, with room for conditioning.
EXACT = 1e-9


def rel(got: complex, want: complex) -> float:
    return abs(got - want) / abs(want)


def assert_close(got: complex | None, want: complex, tol: float = EXACT, what: str = "") -> None:
    assert got is not None, f"{what}: ngspice gave no value"
    assert rel(got, want) <= tol, f"{what}: got {got}, want {want}, relative error {rel(got, want):.3e} > {tol:g}"


@pytest.fixture(scope="module")
def pool():
    with SpicePool(workers=2) as p:
        yield p


# --------------------------------------------------------------------------- networks


R_DIV, C_DIV, VIN = 1_000.0, 1e-6, 5.0


def rc_divider() -> tuple[Network, Port]:
    """V_in in series with R, C across the output."""
    net = Network("rc divider", (
        el("V1", "V", ("in", "0"), ac_mag=VIN),
        el("R1", "R", ("in", "out"), R_DIV),
        el("C1", "C", ("out", "0"), C_DIV),
    ))
    return net, Port("out", "0")


def rc_expected(f: float) -> tuple[complex, complex, complex]:
    """published: D. H. Johnson, OpenStax CNX m0030, "Equivalent Circuits: Impedances and Sources" (exact)."""
    d = 1 + 2j * math.pi * f * R_DIV * C_DIV
    return VIN / d, R_DIV / d, VIN / R_DIV


F_VCCS = 1_000.0
C_VCCS = 1 / (2 * math.pi * F_VCCS * 10.0)  # -j10 Ω at 1 kHz


def vccs_example() -> tuple[Network, Port]:
    """100∠0° V; 20 Ω to a; -j10 Ω from a to ground; 0.02·Vx into a with Vx = 100 - Va."""
    net = Network("vccs", (
        el("V1", "V", ("s", "0"), ac_mag=100.0),
        el("R1", "R", ("s", "a"), 20.0),
        el("C1", "C", ("a", "0"), C_VCCS),
        # G drives gm·V(nc+, nc-) from n+ through itself to n-: from ground into a.
        el("G1", "G", ("0", "a", "s", "a"), 0.02),
    ))
    return net, Port("a", "0")


W_XFMR = 400.0
F_XFMR = W_XFMR / (2 * math.pi)


def transformer(grounded: bool, reversed_dot: bool = False) -> tuple[Network, Port]:
    """Source with 500 + j100 Ω internal impedance, R1 and L1 on the primary; L2 and R2 to the port."""
    b = "0" if grounded else "sb"
    secondary = ("sb", "x") if reversed_dot else ("x", "sb")
    if grounded:
        secondary = tuple("0" if n == "sb" else n for n in secondary)
    net = Network("linear transformer", (
        el("Vs", "V", ("p1", "0"), ac_mag=300.0),
        el("Rs", "R", ("p1", "p2"), 500.0),
        el("Ls", "L", ("p2", "p3"), 100.0 / W_XFMR),  # j100 Ω at ω = 400 rad/s
        el("R1", "R", ("p3", "p4"), 200.0),
        el("L1", "L", ("p4", "0"), 9.0),
        el("L2", "L", secondary, 4.0),
        el("K1", "K", (), 0.5, coupled=("L1", "L2")),
        el("R2", "R", ("x", "out"), 100.0),
    ))
    return net, Port("out", b)


def transformer_expected() -> tuple[complex, complex]:
    """Hand formula (reflected impedance): V_th = jωM·I1, Z_th = R2 + jωL2 + (ωM)²/Z11."""
    wm = W_XFMR * 0.5 * math.sqrt(9.0 * 4.0)
    z11 = 500 + 100j + 200 + 1j * W_XFMR * 9.0
    return 1j * wm * 300.0 / z11, 100 + 1j * W_XFMR * 4.0 + wm**2 / z11


def ideal_short() -> tuple[Network, Port]:
    net = Network("r0", (
        el("V1", "V", ("s", "0"), ac_mag=10.0),
        el("R1", "R", ("s", "m"), 100.0),
        el("R0", "R", ("m", "a"), 0.0),
        el("R2", "R", ("a", "0"), 100.0),
        el("R3", "R", ("m", "0"), 1e-3),
    ))
    return net, Port("a", "0")


C1_ONLY, C2_ONLY = 1e-6, 3e-6


def capacitor_only_node() -> tuple[Network, Port]:
    net = Network("c only", (
        el("V1", "V", ("s", "0"), ac_mag=4.0),
        el("C1", "C", ("s", "x"), C1_ONLY),
        el("C2", "C", ("x", "0"), C2_ONLY),
    ))
    return net, Port("x", "0")


def inductor_across_source() -> tuple[Network, Port]:
    net = Network("l across v", (
        el("V1", "V", ("s", "0"), ac_mag=2.0, ac_phase_deg=-45.0),
        el("L1", "L", ("s", "0"), 1e-3),
        el("R1", "R", ("s", "a"), 30.0),
        el("R2", "R", ("a", "0"), 60.0),
    ))
    return net, Port("a", "0")


def floating_port() -> tuple[Network, Port]:
    """A port in a part with no ground, driven by a VCVS that senses the grounded part."""
    net = Network("floating", (
        el("V1", "V", ("s", "0"), ac_mag=1.0),
        el("R1", "R", ("s", "m"), 1e3),
        el("R2", "R", ("m", "0"), 1e3),
        el("E1", "E", ("x", "y", "m", "0"), 4.0),
        el("R3", "R", ("x", "a"), 250.0),
        el("C3", "C", ("a", "y"), 1e-6),
    ))
    return net, Port("a", "y")


def current_controlled() -> tuple[Network, Port]:
    net = Network("cccs", (
        el("V1", "V", ("s", "0"), ac_mag=1.0),
        el("Vsense", "V", ("s", "k"), 0.0),
        el("R1", "R", ("k", "0"), 10.0),                    # I(Vsense) = 0.1 A from s to k
        el("F1", "F", ("0", "a"), 5.0, control="Vsense"),  # 0.5 A into a
        el("H1", "H", ("a", "h"), 20.0, control="Vsense"),  # V(a) − V(h) = 2 V
        el("R2", "R", ("h", "0"), 100.0),
    ))
    return net, Port("a", "0")


def dc_network() -> tuple[Network, Port]:
    net = Network("dc", (
        el("V1", "V", ("s", "0"), ac_mag=6.0, ac_phase_deg=30.0),
        el("L1", "L", ("s", "m"), 1e-3),
        el("R1", "R", ("m", "a"), 10.0),
        el("R2", "R", ("a", "0"), 10.0),
        el("C1", "C", ("a", "0"), 1e-6),
    ))
    return net, Port("a", "0")


# --------------------------------------------------------------------------- decks (no ngspice needed)


def test_deck_never_contains_user_names():
    """Node and element names from the user never reach ngspice; only our n<k>, kind+index and port sources do."""
    net = Network("weird names", (
        el("Vsrc.main", "V", ("x1.n3", "gnd"), ac_mag=1.0),
        el("Rload+", "R", ("x1.n3", "out+"), 50.0),
        el("Lcoil", "L", ("out+", "mid-1"), 1e-3),
        el("Lpick", "L", ("mid-1", "0"), 2e-3),
        el("Kxfmr", "K", (), 0.3, coupled=("Lcoil", "Lpick")),
        el("Fmirror", "F", ("out+", "0"), 2.0, control="Vsrc.main"),
        el("Hsense", "H", ("h.node", "0"), 10.0, control="Vsrc.main"),
        el("Rh", "R", ("h.node", "0"), 1e3),
        el("Eamp", "E", ("e$1", "0", "out+", "0"), 3.0),
        el("Re", "R", ("e$1", "0"), 1e3),
        el("Rzero", "R", ("out+", "tap"), 0.0),
        el("Ctap", "C", ("tap", "0"), 1e-9),
    ))
    port = Port("out+", "0")
    element = re.compile(r"^([RLCVIEFGHK]\d+|VPORT|ITEST)$")
    node = re.compile(r"^(n\d+|0)$")
    user_words = {"x1.n3", "out+", "mid-1", "h.node", "e$1", "tap", "vsrc", "main", "rload", "lcoil", "lpick",
                  "kxfmr", "fmirror", "hsense", "eamp", "rzero", "ctap", "weird", "+", "$", "-1"}
    for deck in [build_deck(net, port, [1e3], run) for run in ("open", "short", "test")] + [
            build_combined_deck(net, port, [1e3, 2e3])]:
        lowered = deck.text.lower()
        assert not [w for w in user_words if w in lowered], deck.text
        for line in deck.text.splitlines()[1:]:
            if line.startswith("."):
                continue
            words = line.split()
            assert element.match(words[0]), line
            kind = words[0][0]
            if kind == "K":
                assert all(element.match(w) and w[0] == "L" for w in words[1:3]), line
            elif kind in "FH":
                assert all(node.match(w) for w in words[1:3]) and re.match(r"^V\d+$", words[3]), line
            else:
                n = 4 if kind in "EG" else 2
                assert all(node.match(w) for w in words[1:1 + n]), line
        # every deck name maps back to a model name
        assert set(deck.names.values()) >= {"x1.n3", "out+", "rload+", "rzero"}


def test_deck_writes_sources_shorts_and_couplings_in_spice_form():
    """R = 0 becomes a 0 V source, sources carry DC 0, K names renamed inductors, F names the renamed V."""
    net = Network("forms", (
        el("V1", "V", ("a", "0"), ac_mag=2.0, ac_phase_deg=30.0),
        el("R1", "R", ("a", "b"), 0.0),
        el("L1", "L", ("b", "0"), 1e-3),
        el("L2", "L", ("c", "0"), 4e-3),
        el("K1", "K", (), 0.5, coupled=("L1", "L2")),
        el("F1", "F", ("c", "0"), 2.0, control="V1"),
        el("I1", "I", ("0", "c"), ac_mag=1e-3),
    ))
    text = build_deck(net, Port("c", "0"), [50.0], "open").text.splitlines()
    assert "V1 n1 0 DC 0 AC 2.0 30.0" in text
    assert "V2 n1 n2 DC 0 AC 0.0 0.0" in text  # the ideal short, never a 1 mΩ resistor
    assert "K5 L3 L4 0.5" in text
    assert "F6 n3 0 V1 2.0" in text
    assert "I7 0 n3 DC 0 AC 0.001 0.0" in text
    # One frequency: no pivot order is reused, so ngspice's default pivrel (see deck's docstring).
    assert ".options noopac" in text
    swept = build_deck(net, Port("c", "0"), [50.0, 60.0], "open").text.splitlines()
    assert ".options noopac pivrel=1" in swept  # largest pivot per column along a sweep: see deck's docstring


def test_runs_add_their_port_source_and_zero_only_independent_sources():
    """short adds VPORT a b; test zeroes V and I (not E, F, G, H) and drives 1 A from b into a."""
    net, port = vccs_example()
    short = build_deck(net, port, [1e3], "short").text.splitlines()
    assert "VPORT n2 0 DC 0 AC 0.0 0.0" in short
    test = build_deck(net, port, [1e3], "test").text.splitlines()
    assert "V1 n1 0 DC 0 AC 0.0 0.0" in test
    assert "G4 0 n2 n1 n2 0.02" in test
    assert "ITEST 0 n2 DC 0 AC 1.0 0.0" in test
    assert build_deck(net, port, [1e3], "test").probes["test"].plus == "n2"
    assert build_deck(net, port, [1e3], "short").probes["short"].current == "vport#branch"


def test_floating_port_reference_becomes_ground():
    """A port in a part with no ground is referred to its b node, written as node 0."""
    net, port = transformer(grounded=False)
    deck = build_deck(net, port, [F_XFMR], "open")
    assert "L6 n5 0 4.0" in deck.text.splitlines()  # secondary: x -> n5, sb -> 0
    assert deck.probes["open"].minus is None


def test_combined_deck_holds_disjoint_copies_sharing_only_ground():
    """Each run's copy has its own nodes and elements; the copies meet only at node 0."""
    net, port = rc_divider()
    deck = build_combined_deck(net, port, [1e3])
    nodes_per_copy = []
    for first, last in ((0, 3), (3, 7), (7, 11)):  # open: 3 lines, short: 3 + VPORT, test: 3 + ITEST
        lines = deck.text.splitlines()[2 + first:2 + last]
        nodes_per_copy.append({w for line in lines for w in line.split()[1:3] if w != "0"})
    assert nodes_per_copy == [{"n1", "n2"}, {"n3", "n4"}, {"n5", "n6"}]
    assert deck.runs == ("open", "short", "test")
    assert re.search(r"^\.save v\(n2\) v\(n6\) i\(vport\)$", deck.text, re.M)


def test_analysis_cards_use_one_sweep_card_only_for_exact_grids():
    """Decade and linear grids of 3+ points are one card; anything else is one card per distinct frequency."""
    assert analysis_cards([10 * 10 ** (i / 5) for i in range(11)]) == (".ac dec 5 10.0 1000.0",)
    assert analysis_cards([100.0, 200.0, 300.0, 400.0]) == (".ac lin 4 100.0 400.0",)
    # ngspice 39 turns ".ac lin 2 f1 f2" into one point, so two frequencies are two cards
    assert analysis_cards([100.0, 300.0]) == (".ac lin 1 100.0 100.0", ".ac lin 1 300.0 300.0")
    assert analysis_cards([300.0, 100.0, 100.0, 7.5]) == (
        ".ac lin 1 7.5 7.5", ".ac lin 1 100.0 100.0", ".ac lin 1 300.0 300.0")
    assert len(analysis_cards([10.0, 100.0, 1000.0, 10001.0])) == 4
    assert analysis_cards([0.1 * 3 ** 0.5]) == (f".ac lin 1 {0.1 * 3 ** 0.5!r} {0.1 * 3 ** 0.5!r}",)


@pytest.mark.parametrize("bad", [-1.0, math.nan, math.inf, "ten"])
def test_bad_frequencies_are_refused(bad):
    """A frequency must be a finite number >= 0; the message names the value."""
    with pytest.raises(ValueError, match="frequenc"):
        analysis_cards([bad])


def test_port_across_voltage_path_is_recognised():
    """Voltage sources and ideal shorts joining a and b mean Z_th = 0 everywhere: no Norton form."""
    net = Network("v across port", (
        el("V1", "V", ("a", "m"), ac_mag=1.0),
        el("R0", "R", ("m", "0"), 0.0),
        el("R1", "R", ("a", "0"), 10.0),
    ))
    assert port_is_voltage_defined(net, Port("a", "0"))
    assert not port_is_voltage_defined(*rc_divider())


def test_route_mismatch_is_relative_and_none_without_a_route():
    """route_mismatch = |V/Z − I| / max(|V/Z|, |I|); None when a route is missing or Z = 0."""
    assert route_mismatch(2.0, 1.0, 2.0) == 0.0
    assert route_mismatch(2.0, 1.0, 1.0) == pytest.approx(0.5, rel=1e-15)
    assert route_mismatch(0j, 1.0, 0j) == 0.0
    assert route_mismatch(None, 1.0, 1.0) is None
    assert route_mismatch(1.0, 0.0, 1.0) is None


def test_result_arrays_mark_missing_values_with_nan():
    """SpiceResult's arrays are complex128 with NaN where ngspice gave no value."""
    result = SpiceResult(points=(SpicePoint(1.0, 1.0, 1 + 1j, 2.0, None, None),), ngspice_version="x",
                         strategy="combined", elapsed_s=0.0)
    assert result.vth.dtype == np.complex128
    assert result.vth[0] == 1 + 1j
    assert np.isnan(result.isc[0])
    assert np.isnan(result.route_mismatch[0])


def test_missing_library_is_reported_with_the_install_command():
    """A library that cannot be loaded gives the exact apt-get command."""
    problem = ngspice_available("/nonexistent/libngspice.so.0")
    assert problem is not None and "sudo apt-get install -y libngspice0 libngspice0-dev" in problem


# --------------------------------------------------------------------------- ngspice


@pytest.mark.spice
def test_rc_divider_matches_the_published_formula(pool):
    """V_th, Z_th and I_N of the RC divider at scattered frequencies, 0 Hz included, to 1e-9."""
    net, port = rc_divider()
    freqs = [0.0, 1.0, 50.0, 159.15494309189535, 1e3, 12345.678, 1e6]
    result = pool.submit(net, port, freqs).result()
    assert [p.requested_hz for p in result.points] == freqs
    for p in result.points:
        vth, zth, isc = rc_expected(p.freq_hz)
        assert_close(p.vth, vth, what=f"vth at {p.freq_hz}")
        assert_close(p.zth, zth, what=f"zth at {p.freq_hz}")
        assert_close(p.isc, isc, what=f"isc at {p.freq_hz}")
        assert p.route_mismatch is not None and p.route_mismatch <= EXACT
    assert result.ngspice_version.startswith("ngspice-")


@pytest.mark.spice
def test_rc_divider_over_a_decade_sweep_uses_one_card(pool):
    """A decade grid is one .ac dec card; each row is judged at the frequency ngspice reports, to 1e-9."""
    net, port = rc_divider()
    freqs = list(10 * 10 ** (np.arange(26) / 5))  # 10 Hz .. 1 MHz, 5 per decade
    for strategy in ("combined", "separate"):
        result = pool.submit(net, port, freqs, strategy=strategy).result()
        assert result.strategy == strategy
        assert all(".ac dec 5 10.0 1000000.0" in deck for deck in result.decks)
        for p, f in zip(result.points, freqs):
            assert p.freq_hz == pytest.approx(f, rel=1e-12)
            vth, zth, isc = rc_expected(p.freq_hz)
            assert_close(p.vth, vth, what=f"vth at {p.freq_hz}")
            assert_close(p.zth, zth, what=f"zth at {p.freq_hz}")
            assert_close(p.isc, isc, what=f"isc at {p.freq_hz}")


@pytest.mark.spice
def test_linear_sweep_and_repeated_frequencies(pool):
    """A linear grid is one card; a frequency asked for twice gets the same answer twice."""
    net, port = rc_divider()
    result = pool.submit(net, port, [100.0, 200.0, 300.0, 400.0, 200.0]).result()
    assert ".ac lin 4 100.0 400.0" in result.decks[0]
    assert [p.requested_hz for p in result.points] == [100.0, 200.0, 300.0, 400.0, 200.0]
    assert result.points[1].vth == result.points[4].vth
    for p in result.points:
        assert_close(p.vth, rc_expected(p.freq_hz)[0], what=f"vth at {p.freq_hz}")


@pytest.mark.spice
def test_vccs_example_matches_published_values(pool):
    """Dependent-source example; published: exam-style problem with a VCCS (GATE-style, quoted at byjus.com)."""
    net, port = vccs_example()
    p = pool.submit(net, port, [F_VCCS]).result().points[0]
    # published: V_th = 57.34∠−55° V, Z_th = 4.7 − j6.7 Ω; tolerances from the printed digits
    assert abs(p.vth) == pytest.approx(57.34, rel=2e-3)
    assert math.degrees(cmath.phase(p.vth)) == pytest.approx(-55.0, abs=0.05)
    assert p.zth.real == pytest.approx(4.7, abs=0.05)
    assert p.zth.imag == pytest.approx(-6.7, abs=0.05)
    # hand formula (KCL at a): V_th = 0.07·100 / (0.07 + j0.1), Z_th = 1 / (0.07 + j0.1)
    y = 1 / 20 + 0.02 + 1j * 2 * math.pi * F_VCCS * C_VCCS
    assert_close(p.vth, 0.07 * 100 / y, what="vth")
    assert_close(p.zth, 1 / y, what="zth")
    assert_close(p.isc, 0.07 * 100, what="isc")
    assert p.route_mismatch <= EXACT


@pytest.mark.spice
@pytest.mark.parametrize("grounded", [False, True], ids=["floating-secondary", "grounded-secondary"])
def test_transformer_matches_published_values(pool, grounded):
    """Linear transformer; published: Nilsson & Riedel, Electric Circuits, ch. 9, linear transformer example."""
    net, port = transformer(grounded)
    p = pool.submit(net, port, [F_XFMR]).result().points[0]
    # published: V_th = 95.60∠10.71° V, Z_th = 171.09 + j1224.26 Ω (half a unit of the last printed digit)
    assert abs(p.vth) == pytest.approx(95.60, abs=0.005)
    assert math.degrees(cmath.phase(p.vth)) == pytest.approx(10.71, abs=0.005)
    assert p.zth.real == pytest.approx(171.09, abs=0.005)
    assert p.zth.imag == pytest.approx(1224.26, abs=0.005)
    vth, zth = transformer_expected()
    assert_close(p.vth, vth, what="vth")
    assert_close(p.zth, zth, what="zth")
    assert_close(p.isc, vth / zth, what="isc")
    assert p.route_mismatch <= EXACT


@pytest.mark.spice
def test_transformer_with_reversed_dot_turns_vth_by_180_degrees(pool):
    """Recomputed by this project from the published example's data (Nilsson & Riedel, as above); the published
    example prints only the normal dot orientation: a reversed dot gives 95.60∠−169.29° V, Z_th unchanged."""
    net, port = transformer(grounded=False, reversed_dot=True)
    p = pool.submit(net, port, [F_XFMR]).result().points[0]
    assert abs(p.vth) == pytest.approx(95.60, abs=0.005)
    assert math.degrees(cmath.phase(p.vth)) == pytest.approx(-169.29, abs=0.005)
    assert_close(p.zth, transformer_expected()[1], what="zth")


@pytest.mark.spice
def test_ideal_short_is_a_short(pool):
    """R = 0 joins two nodes exactly (ngspice alone would make it 1 mΩ): hand formula to 1e-9."""
    net, port = ideal_short()
    p = pool.submit(net, port, [60.0]).result().points[0]
    # hand: R2 ∥ R3 after the short; divider with R1; Z_th = R1 ∥ R3 ∥ R2
    r23 = 100.0 * 1e-3 / (100.0 + 1e-3)
    assert_close(p.vth, 10.0 * r23 / (100.0 + r23), what="vth")
    assert_close(p.zth, 1 / (1 / 100.0 + 1 / 1e-3 + 1 / 100.0), what="zth")
    assert_close(p.isc, 10.0 / 100.0, what="isc")
    assert p.route_mismatch <= EXACT


@pytest.mark.spice
@pytest.mark.parametrize("across", ["voltage source", "ideal short"])
def test_port_with_zero_impedance_has_no_norton_form(pool, across):
    """Z_th = 0 (a voltage source or R = 0 across the port): I_N is None with the reason, not an error."""
    v = cmath.rect(3.0, math.radians(20.0))
    first = (el("V1", "V", ("a", "0"), ac_mag=3.0, ac_phase_deg=20.0) if across == "voltage source"
             else el("R0", "R", ("a", "0"), 0.0))
    net = Network("zth zero", (first, el("R1", "R", ("a", "b"), 10.0), el("I1", "I", ("0", "b"), ac_mag=1.0),
                               el("R2", "R", ("b", "0"), 5.0)))
    result = pool.submit(net, Port("a", "0"), [50.0, 0.0]).result()
    for p in result.points:
        assert p.isc is None
        assert abs(p.zth) <= 1e-12, p.zth  # absolute: round-off against the network's 1-10 Ω scale
        assert p.route_mismatch is None
        assert any("no Norton form" in n for n in p.notes), p.notes
        if across == "voltage source":
            assert_close(p.vth, v, what="vth")
        else:
            assert abs(p.vth) <= 1e-12, p.vth  # absolute: round-off against the network's 5 V scale


@pytest.mark.spice
def test_capacitor_only_node_runs_in_ac_and_is_unavailable_at_dc(pool):
    """A node reached only through capacitors works at f > 0 (noopac); at 0 Hz it has no DC path: None, reason."""
    c1, c2 = C1_ONLY, C2_ONLY
    net, port = capacitor_only_node()
    result = pool.submit(net, port, [0.0, 100.0, 1e4]).result()
    dc, *ac = result.points
    # at 0 Hz both capacitors are open: the port has Y_N = 0, so V_th and Z_th do not exist but I_N = 0 does
    assert dc.vth is None and dc.zth is None
    assert any("no DC path" in n for n in dc.notes), dc.notes
    assert dc.isc == 0
    for p in ac:
        w = 2 * math.pi * p.freq_hz
        # hand: capacitive divider; Z_th = 1 / (jω(C1 + C2)); I_N = jωC1·V
        assert_close(p.vth, 4.0 * c1 / (c1 + c2), what="vth")
        assert_close(p.zth, 1 / (1j * w * (c1 + c2)), what="zth")
        assert_close(p.isc, 4.0 * 1j * w * c1, what="isc")
        assert p.route_mismatch <= EXACT


@pytest.mark.spice
def test_inductor_across_voltage_source(pool):
    """An inductor across an ideal source changes nothing at the port for f > 0; at 0 Hz it shorts the source."""
    net, port = inductor_across_source()
    result = pool.submit(net, port, [1e3, 0.0]).result()
    p, dc = result.points
    v = cmath.rect(2.0, math.radians(-45.0))
    assert_close(p.vth, v * 60 / 90, what="vth")
    assert_close(p.zth, 30 * 60 / 90, what="zth")
    assert_close(p.isc, v / 30, what="isc")
    assert dc.vth is None and dc.notes


@pytest.mark.spice
def test_dc_point_keeps_the_phasor_of_each_source(pool):
    """At 0 Hz the sources keep their phasors (L short, C open): a 30° source gives a 30° V_th."""
    v = cmath.rect(6.0, math.radians(30.0))
    net, port = dc_network()
    p = pool.submit(net, port, [0.0]).result().points[0]
    # hand: divider R1, R2 (L shorts, C opens); Z_th = R1 ∥ R2; I_N = V / R1
    assert_close(p.vth, v / 2, what="vth")
    assert_close(p.zth, 5.0, what="zth")
    assert_close(p.isc, v / 10, what="isc")
    assert p.route_mismatch <= EXACT


@pytest.mark.spice
def test_inductor_shorting_the_port_at_dc_leaves_no_norton_form_there(pool):
    """At 0 Hz an inductor from a source to the port makes Z_th = 0: I_N is None at 0 Hz only."""
    net = Network("l to port", (
        el("V1", "V", ("s", "0"), ac_mag=1.0),
        el("L1", "L", ("s", "a"), 1e-3),
        el("R1", "R", ("a", "0"), 10.0),
    ))
    dc, ac = pool.submit(net, Port("a", "0"), [0.0, 1e3]).result().points
    assert_close(dc.vth, 1.0, what="vth at 0 Hz")
    assert abs(dc.zth) <= 1e-12, dc.zth
    assert dc.isc is None and any("no Norton form" in n for n in dc.notes), dc.notes
    zl = 2j * math.pi * 1e3 * 1e-3
    assert_close(ac.isc, 1.0 / zl, what="isc at 1 kHz")
    assert_close(ac.zth, zl * 10 / (zl + 10), what="zth at 1 kHz")


@pytest.mark.spice
def test_floating_port_behind_a_controlled_source(pool):
    """A port in a part with no ground (driven by a VCVS sensing the grounded part): referred to its b node."""
    net, port = floating_port()
    f = 500.0
    p = pool.submit(net, port, [f]).result().points[0]
    zc = 1 / (2j * math.pi * f * 1e-6)
    # hand: V(x, y) = 4 · 0.5 = 2; divider R3 with C3; Z_th = R3 ∥ Zc
    assert_close(p.vth, 2.0 * zc / (250 + zc), what="vth")
    assert_close(p.zth, 250 * zc / (250 + zc), what="zth")
    assert_close(p.isc, 2.0 / 250, what="isc")
    assert p.route_mismatch <= EXACT


@pytest.mark.spice
def test_current_controlled_sources_follow_the_renamed_control(pool):
    """F and H read the current of the renamed V; hand formulas to 1e-9."""
    net, port = current_controlled()
    p = pool.submit(net, port, [10.0]).result().points[0]
    # hand: V(a) = 2 + V(h), V(h) = 100·0.5 (F's current flows on through H into R2) → 52 V;
    # with sources zeroed, I(Vsense) = 0: F and H vanish, Z_th = R2.
    assert_close(p.vth, 52.0, what="vth")
    assert_close(p.zth, 100.0, what="zth")
    assert_close(p.isc, 0.52, what="isc")


ROUTE_CASES = {
    "rc divider": (rc_divider, [0.0, 50.0, 1e3, 1e6]),
    "vccs": (vccs_example, [10.0, F_VCCS, 1e5]),
    "transformer, floating secondary": (lambda: transformer(False), [F_XFMR, 1e3]),
    "transformer, grounded secondary": (lambda: transformer(True), [F_XFMR, 1e3]),
    "ideal short": (ideal_short, [0.0, 60.0]),
    "capacitor-only node": (capacitor_only_node, [100.0, 1e4]),
    "inductor across source": (inductor_across_source, [1.0, 1e3]),
    "floating port": (floating_port, [0.0, 500.0, 1e5]),
    "current-controlled sources": (current_controlled, [0.0, 10.0]),
    "dc": (dc_network, [0.0, 1e3]),
}


@pytest.mark.spice
@pytest.mark.parametrize("name", ROUTE_CASES)
def test_three_routes_agree(pool, name):
    """V_th/Z_th equals I_N to 1e-9 at every point where all three runs give a value (Thevenin/Norton)."""
    build, freqs = ROUTE_CASES[name]
    net, port = build()
    result = pool.submit(net, port, freqs).result()
    mismatches = [p.route_mismatch for p in result.points]
    assert None not in mismatches, [p.notes for p in result.points]
    assert max(mismatches) <= EXACT, mismatches


@pytest.mark.spice
def test_spice_equivalent_single_call(pool):
    """The one-off entry point gives the same numbers as a pool."""
    net, port = rc_divider()
    one = spice_equivalent(net, port, [1e3])
    assert one.points[0].vth == pool.submit(net, port, [1e3]).result().points[0].vth


@pytest.mark.spice
def test_combined_and_separate_runs_agree(pool):
    """The combined deck and three separate decks give the same numbers (to 1e-12) on every example."""
    for net, port, f in [(*rc_divider(), 1e3), (*vccs_example(), F_VCCS), (*transformer(False), F_XFMR)]:
        a = pool.submit(net, port, [f], strategy="combined").result().points[0]
        b = pool.submit(net, port, [f], strategy="separate").result().points[0]
        for q in ("vth", "zth", "isc"):
            assert rel(getattr(a, q), getattr(b, q)) <= 1e-12, (net.title, q)


def test_invalid_network_arrives_through_the_future(pool):
    """An ill-posed network is refused before ngspice sees it; the error comes from the case's future."""
    net = Network("floating part", (
        el("V1", "V", ("s", "0"), ac_mag=1.0),
        el("R1", "R", ("s", "0"), 1.0),
        el("R2", "R", ("p", "q"), 1.0),
    ))
    with pytest.raises(NetworkError, match="floating part"):
        pool.submit(net, Port("s", "0"), [1.0]).result()


def test_engine_unavailable_names_the_install_command():
    """A worker without ngspice answers each case with EngineUnavailableError and the apt-get command."""
    net, port = rc_divider()
    with SpicePool(workers=1, library="/nonexistent/libngspice.so.0") as pool:
        with pytest.raises(EngineUnavailableError, match=re.escape("sudo apt-get install -y libngspice0")):
            pool.submit(net, port, [1.0]).result()


@pytest.mark.spice
def test_ngspice_errors_carry_ngspice_words(tmp_path):
    """A deck ngspice rejects raises ReferenceEngineError quoting ngspice's own lines (deck corrupted on purpose)."""
    script = textwrap.dedent("""
        import dataclasses
        from crosscheck.spice import engine as reference
        from crosscheck.errors import ReferenceEngineError
        from crosscheck.model.network import Network, Port, make_element as el

        real = reference.build_deck
        def corrupted(*args, **kwargs):
            deck = real(*args, **kwargs)
            return dataclasses.replace(deck, text=deck.text.replace(" 1000.0", " abc"))
        reference.build_deck = corrupted
        net = Network("t", (el("V1", "V", ("a", "0"), ac_mag=1.0), el("R1", "R", ("a", "b"), 1000.0),
                            el("R2", "R", ("b", "0"), 1000.0)))
        try:
            reference.solve(reference.Engine(), net, Port("b", "0"), [1.0], strategy="separate")
        except ReferenceEngineError as exc:
            print("RAISED", exc.ngspice_lines)
            print(exc)
    """)
    out = subprocess.run([sys.executable, "-c", script], cwd=tmp_path, capture_output=True, text=True,
                         timeout=120, env={"PATH": "/usr/bin:/bin", "HOME": str(tmp_path)})
    assert "RAISED" in out.stdout, out.stdout + out.stderr
    assert "ngspice could not do the open run" in out.stdout
    assert re.search(r"unknown parameter|Error", out.stdout), out.stdout


def test_importing_the_reference_modules_does_not_import_pyspice():
    """PySpice is imported only inside functions, so crosscheck imports where ngspice is absent."""
    script = ("import sys, crosscheck, crosscheck.spice.engine, crosscheck.spice.workers, crosscheck.spice.deck; "
              "print(sorted(m for m in sys.modules if m.lower().startswith('pyspice')))")
    out = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, timeout=120, check=True)
    assert out.stdout.strip() == "[]", out.stdout + out.stderr
