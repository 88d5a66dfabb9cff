"""Unit tests of crosscheck.equivalent: degenerate ports, element forms, DC, floating ports, singular networks.

Expected values are worked by hand in each test (common practice: series/parallel
impedance algebra). Numeric checks hold to 1e-12 relative unless stated: the
networks are tiny and well conditioned, so only rounding separates the solver
from the formula.
"""

from __future__ import annotations

import cmath
import math

import pytest

from crosscheck.own.equivalent import ElementForm, thevenin
from crosscheck.errors import NetworkError, PortError, SingularNetworkError
from crosscheck.model.network import Element, Network, Port, make_element
from crosscheck.model.validation import validate

REL = 1e-12


def _net(*elements: Element, port: Port | None = None) -> Network:
    return validate(Network("unit", elements), port)


def _el(name: str, nodes: tuple[str, ...], value: float = 0.0, **kw) -> Element:
    return make_element(name, None, nodes, value, **kw)


def _close(got: complex | None, want: complex, rel: float = REL) -> bool:
    return got is not None and abs(got - want) <= rel * abs(want)


# --------------------------------------------------------------------------- degenerate ports


def test_voltage_source_across_port_has_no_norton_form() -> None:
    """An ideal voltage source across the port: Z_th = 0 exactly, no Norton form, and a note says so."""
    net = _net(_el("v1", ("a", "0"), ac_mag=5, ac_phase_deg=30), _el("r1", ("a", "b"), 1e3), _el("r2", ("b", "0"), 2e3))
    eq = thevenin(net, Port("a", "0"), [0.0, 1e3])
    for e in eq:
        assert _close(e.vth, cmath.rect(5, math.radians(30)))
        assert e.zth == 0 and e.in_ is None and e.yn is None
        assert "Norton" in e.note
        assert e.series_form() == ElementForm(0.0, None, None)
        assert e.parallel_form() is None
    reversed_port = thevenin(net, Port("0", "a"), 1e3)[0]
    assert _close(reversed_port.vth, -cmath.rect(5, math.radians(30)))


def _current_source_behind_capacitor() -> Network:
    # 2 mA into x; 1 µF from x to ground (open at DC); 1 kΩ from x to the port node a.
    return _net(_el("i1", ("0", "x"), ac_mag=2e-3), _el("c1", ("x", "0"), 1e-6), _el("r1", ("x", "a"), 1e3))


def test_current_source_behind_capacitor_at_dc_is_norton_only() -> None:
    """At DC the port sees the 2 mA source through 1 kΩ with C open: Y_N = 0, so Norton only (I_N = 2 mA)."""
    eq = thevenin(_current_source_behind_capacitor(), Port("a", "0"), 0.0)[0]
    assert eq.vth is None and eq.zth is None
    assert _close(eq.in_, 2e-3)
    assert eq.yn == 0
    assert "Thevenin" in eq.note
    assert eq.series_form() is None
    assert eq.parallel_form() == ElementForm(0.0, None, None)


def test_current_source_behind_capacitor_at_ac_has_both_forms() -> None:
    """At 1 kHz the capacitor conducts: Z_th = 1 kΩ + 1/(jωC), V_th = I·1/(jωC)."""
    f = 1e3
    zc = 1 / (2j * math.pi * f * 1e-6)
    eq = thevenin(_current_source_behind_capacitor(), Port("a", "0"), f)[0]
    assert _close(eq.zth, 1e3 + zc)
    assert _close(eq.vth, 2e-3 * zc)
    assert _close(eq.in_, 2e-3 * zc / (1e3 + zc))


# --------------------------------------------------------------------------- element forms


def _driven(*elements: Element, volts: float = 1.0) -> Network:
    return _net(_el("v1", ("s", "0"), ac_mag=volts), *elements)


@pytest.mark.parametrize("f", [50.0, 1e3, 1e5])
def test_series_r_with_l(f: float) -> None:
    """100 Ω in series with 10 mH: series form R = 100 Ω, L = 10 mH; parallel form G = R/|Z|², L = |Z|²/(ωX)."""
    net = _driven(_el("r1", ("s", "m"), 100), _el("l1", ("m", "a"), 10e-3))
    eq = thevenin(net, Port("a", "0"), f)[0]
    w = 2 * math.pi * f
    z2 = 100**2 + (w * 10e-3) ** 2
    series, parallel = eq.series_form(), eq.parallel_form()
    assert series.reactive_kind == "L" and parallel.reactive_kind == "L"
    assert series.resistance == pytest.approx(100, rel=REL)
    assert series.reactive_value == pytest.approx(10e-3, rel=REL)
    assert parallel.resistance == pytest.approx(100 / z2, rel=REL)
    assert parallel.reactive_value == pytest.approx(z2 / (w * w * 10e-3), rel=REL)


@pytest.mark.parametrize("f", [50.0, 1e3, 1e5])
def test_series_r_with_c(f: float) -> None:
    """470 Ω in series with 2.2 µF: series form R = 470 Ω, C = 2.2 µF; parallel form C = −B/ω = |X|/(ω|Z|²)."""
    net = _driven(_el("r1", ("s", "m"), 470), _el("c1", ("m", "a"), 2.2e-6))
    eq = thevenin(net, Port("a", "0"), f)[0]
    w = 2 * math.pi * f
    x = -1 / (w * 2.2e-6)
    z2 = 470**2 + x**2
    series, parallel = eq.series_form(), eq.parallel_form()
    assert series.reactive_kind == "C" and parallel.reactive_kind == "C"
    assert series.resistance == pytest.approx(470, rel=REL)
    assert series.reactive_value == pytest.approx(2.2e-6, rel=REL)
    assert parallel.resistance == pytest.approx(470 / z2, rel=REL)
    assert parallel.reactive_value == pytest.approx(-x / (w * z2), rel=REL)


@pytest.mark.parametrize(("kind", "value"), [("C", 47e-9), ("L", 3.3e-3)])
def test_parallel_r_with_reactance(kind: str, value: float) -> None:
    """2.2 kΩ in parallel with C or L to ground, fed through a current source: parallel form G = 1/R, and C or L
    is the element itself."""
    net = _net(_el("i1", ("0", "a"), ac_mag=1e-3), _el("r1", ("a", "0"), 2.2e3), _el(f"{kind}1", ("a", "0"), value))
    parallel = thevenin(net, Port("a", "0"), 10e3)[0].parallel_form()
    assert parallel.reactive_kind == kind
    assert parallel.resistance == pytest.approx(1 / 2.2e3, rel=REL)
    assert parallel.reactive_value == pytest.approx(value, rel=REL)


def test_purely_resistive_forms_have_no_reactive_element() -> None:
    """A resistive divider at 1 kHz: X = 0 and B = 0 exactly, so neither form has an L or C."""
    eq = thevenin(_driven(_el("r1", ("s", "a"), 1e3), _el("r2", ("a", "0"), 1e3)), Port("a", "0"), 1e3)[0]
    assert eq.series_form() == ElementForm(pytest.approx(500, rel=REL), None, None)
    assert eq.parallel_form() == ElementForm(pytest.approx(1 / 500, rel=REL), None, None)


# --------------------------------------------------------------------------- dependent sources


def _sensed(*elements: Element) -> Network:
    """1 V through 1 kΩ into a 0 V sense source: I(vsense) = 1 mA, flowing x → vsense → ground."""
    return _driven(_el("r1", ("s", "x"), 1e3), _el("vsense", ("x", "0")), *elements)


@pytest.mark.parametrize(("network", "port", "vth", "zth"), [
    # F: 2·I(vsense) = 2 mA flows from ground through f1 into a, across 1 kΩ: 2 V behind 1 kΩ.
    (_sensed(_el("f1", ("0", "a"), 2.0, control="vsense"), _el("r2", ("a", "0"), 1e3)), Port("a", "0"), 2.0, 1e3),
    # H: V(a) − V(0) = 500 Ω · 1 mA = 0.5 V, an ideal source, then 1 kΩ in series to b.
    (_sensed(_el("h1", ("a", "0"), 500.0, control="vsense"), _el("r2", ("a", "b"), 1e3)), Port("b", "0"), 0.5, 1e3),
    # E: V(a) = 3·(V(0) − V(s)) = −3 V (control reversed), then 100 Ω to b.
    (_driven(_el("r1", ("s", "0"), 1e3), _el("e1", ("a", "0", "0", "s"), 3.0), _el("r2", ("a", "b"), 100)),
     Port("b", "0"), -3.0, 100.0),
    # G: 1 mS·V(s) = 1 mA flows from a through g1 to ground, out of a, across 1 kΩ: −1 V behind 1 kΩ.
    (_driven(_el("r1", ("s", "0"), 1e3), _el("g1", ("a", "0", "s", "0"), 1e-3), _el("r2", ("a", "0"), 1e3)),
     Port("a", "0"), -1.0, 1e3),
], ids=["F", "H", "E", "G"])
def test_dependent_sources_follow_spice_signs(network: Network, port: Port, vth: float, zth: float) -> None:
    """Each dependent kind with SPICE's conventions (current n+ → source → n−; I(V) flows n+ → V → n−), by hand."""
    for eq in thevenin(network, port, [0.0, 1e3]):
        assert _close(eq.vth, vth) and _close(eq.zth, zth)


# --------------------------------------------------------------------------- DC


def test_dc_inductor_is_a_short_and_capacitor_open() -> None:
    """At DC the 1 mH is a short and the 1 µF open: V_th = 10·1k/(1k + 1k) = 5 V, Z_th = 1k ∥ 1k = 500 Ω, both real."""
    net = _driven(_el("r1", ("s", "a"), 1e3), _el("l1", ("a", "b"), 1e-3), _el("r2", ("b", "0"), 1e3),
                  _el("c1", ("b", "0"), 1e-6), volts=10)
    dc, ac = thevenin(net, Port("b", "0"), [0.0, 1e3])
    assert _close(dc.vth, 5.0) and _close(dc.zth, 500.0)
    assert dc.vth.imag == 0 and dc.zth.imag == 0
    assert dc.series_form() == ElementForm(pytest.approx(500, rel=REL), None, None)
    assert abs(ac.vth - 5.0) > 0.01 * 5.0, "at 1 kHz the reactances must change V_th (by more than 1 %)"


def test_dc_series_capacitor_blocks_the_source() -> None:
    """A capacitor in series between source and port is open at DC: V_th = 0, Z_th = the 1 kΩ to ground."""
    net = _driven(_el("r1", ("s", "a"), 1e3), _el("c1", ("a", "b"), 1e-6), _el("r2", ("b", "0"), 1e3))
    eq = thevenin(net, Port("b", "0"), 0.0)[0]
    assert abs(eq.vth) <= 1e-15 and _close(eq.zth, 1e3)


# --------------------------------------------------------------------------- floating port


def _transformer(dot_on_s1: bool = True) -> Network:
    """1 V through 10 Ω into a 1 mH primary; a 4 mH secondary (k = 0.5, M = 1 mH) with no ground at all."""
    return Network("transformer", (
        _el("v1", ("p", "0"), ac_mag=1), _el("r1", ("p", "q"), 10), _el("l1", ("q", "0"), 1e-3),
        _el("l2", ("s1", "s2") if dot_on_s1 else ("s2", "s1"), 4e-3), _el("r2", ("s1", "s2"), 1e3),
        _el("k1", (), 0.5, coupled=("l1", "l2")),
    ))


def test_floating_secondary_is_refused_without_a_port_on_it() -> None:
    """A part with no ground is refused unless the port is inside it."""
    with pytest.raises(NetworkError, match="floating"):
        validate(_transformer())
    with pytest.raises(NetworkError, match="floating"):
        validate(_transformer(), Port("p", "0"))
    validate(_transformer(), Port("s1", "s2"))


@pytest.mark.parametrize("f", [100.0, 1e3, 1e4])
def test_floating_transformer_secondary(f: float) -> None:
    """Open secondary: V_th = jωM·I1 with I1 = V/(R1 + jωL1), in parallel with R2 across the winding;
    Z_th = R2 ∥ (jωL2 + (ωM)²/(R1 + jωL1)) (reflected impedance)."""
    w = 2 * math.pi * f
    z1 = 10 + 1j * w * 1e-3
    m = 0.5 * math.sqrt(1e-3 * 4e-3)
    z_winding = 1j * w * 4e-3 + (w * m) ** 2 / z1
    v_open = 1j * w * m / z1              # the winding's EMF, open circuit
    zth = 1e3 * z_winding / (1e3 + z_winding)
    vth = v_open * 1e3 / (1e3 + z_winding)
    net = validate(_transformer(), Port("s1", "s2"))
    eq = thevenin(net, Port("s1", "s2"), f)[0]
    assert _close(eq.vth, vth) and _close(eq.zth, zth)
    flipped = thevenin(net, Port("s2", "s1"), f)[0]
    assert _close(flipped.vth, -vth) and _close(flipped.zth, zth)
    reversed_dot = thevenin(validate(_transformer(False), Port("s1", "s2")), Port("s1", "s2"), f)[0]
    assert _close(reversed_dot.vth, -vth) and _close(reversed_dot.zth, zth)


def test_singular_point_inside_a_floating_part_blames_only_the_node_at_fault() -> None:
    """The solver holds a floating part's reference at 0 V, so that part reaches "ground" through it. At DC
    a node of the secondary reached only through capacitors is singular: the error names that node alone,
    not the secondary's other nodes (which the tie grounds)."""
    net = Network("transformer", _transformer().elements + (
        _el("c1", ("s2", "x"), 1e-9), _el("c2", ("x", "s1"), 1e-9)))
    port = Port("s1", "s2")
    validate(net, port)
    with pytest.raises(SingularNetworkError) as info:
        thevenin(net, port, 0.0)
    assert info.value.nodes == ("x",), info.value.nodes
    assert "node(s) x reach" in str(info.value)
    assert thevenin(net, port, 1e3)[0].zth is not None  # fine away from DC


# --------------------------------------------------------------------------- singular networks and bad input


def test_inductor_across_voltage_source_at_dc_names_the_elements() -> None:
    """At DC an inductor across a voltage source is a loop of zero-resistance branches: the error names both."""
    net = _net(_el("v1", ("a", "0"), ac_mag=1), _el("l1", ("a", "0"), 1e-3), _el("r1", ("a", "b"), 1e3),
               _el("r2", ("b", "0"), 1e3))
    with pytest.raises(SingularNetworkError) as info:
        thevenin(net, Port("b", "0"), 0.0)
    err = info.value
    assert isinstance(err, ArithmeticError)
    assert set(err.nodes) == {"v1", "l1"} and err.freq_hz == 0.0
    assert "v1" in str(err) and "l1" in str(err) and "DC" in str(err)
    assert thevenin(net, Port("b", "0"), 50.0)[0].vth is not None  # fine at any other frequency


def _tank() -> Network:
    """1 mA into a lossless 1 H ∥ 1 F tank (ω0 = 1 rad/s, exactly singular in binary), read through a VCCS."""
    return _net(_el("i1", ("0", "tank"), ac_mag=1e-3), _el("l1", ("tank", "0"), 1.0), _el("c1", ("tank", "0"), 1.0),
                _el("g1", ("0", "out", "tank", "0"), 1e-3), _el("r1", ("out", "0"), 1e3))


F_TANK = 1 / (2 * math.pi)


def test_lossless_tank_at_resonance_names_the_nodes() -> None:
    """At its resonance a current-fed lossless tank has no defined voltage: the error says so and names the node."""
    assert 2.0 * math.pi * F_TANK == 1.0  # ω0 = 1 rad/s in binary, so the matrix is exactly singular
    with pytest.raises(SingularNetworkError) as info:
        thevenin(_tank(), Port("out", "0"), F_TANK)
    err = info.value
    assert "tank" in err.nodes and "tank" in str(err)
    assert "resonance" in str(err) and err.freq_hz == F_TANK
    assert thevenin(_tank(), Port("out", "0"), 2 * F_TANK)[0].vth is not None  # fine off resonance


def test_lossless_tank_at_resonance_seen_across_the_tank_is_norton_only() -> None:
    """Across the tank itself the port sees the 1 mA source and an open circuit: Norton only, I_N = 1 mA."""
    eq = thevenin(_tank(), Port("tank", "0"), F_TANK)[0]
    assert eq.vth is None and eq.yn == 0 and _close(eq.in_, 1e-3)


def test_bad_frequency_and_port_are_refused() -> None:
    """Negative or non-finite frequencies raise ValueError; an unknown or repeated port node raises PortError."""
    net = _driven(_el("r1", ("s", "a"), 1e3), _el("r2", ("a", "0"), 1e3))
    for f in (-1.0, math.inf, math.nan):
        with pytest.raises(ValueError, match="frequency"):
            thevenin(net, Port("a", "0"), f)
    with pytest.raises(PortError, match="nope"):
        thevenin(net, Port("nope", "0"), 1e3)
    with pytest.raises(PortError):
        thevenin(net, Port("a", "a"), 1e3)
