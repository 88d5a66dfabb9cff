"""Element semantics the reader takes from ngspice: m=, ac=, scale=, temperature, .model cards, negative k,
RF port sources and the source-line forms that have no AC effect.

Outside source for every number: ngspice 39's own AC analysis of the same netlist text, run inside the
test by ``tests/ngspice_direct.ngspice_ac``; crosscheck's own route must give the same open-circuit
voltage at the port to 1e-9 relative. Each netlist is a divider whose answer moves when the parameter
is applied, and each test first checks that it moved, so a reader that ignored the parameter fails.
"""

from __future__ import annotations

import pytest

import crosscheck
from crosscheck.errors import NetlistError
from crosscheck.model.netlist import read_netlist, read_netlist_reading

from ngspice_direct import ngspice_ac

pytestmark = pytest.mark.spice

FREQ = 1e3


def own_vth(text: str, node: str = "a") -> complex:
    [eq] = crosscheck.reduce_netlist(text, (node, "0"), [FREQ], engine="own").own
    return complex(eq.vth)


def check(text: str, unchanged: complex | None = None, node: str = "a") -> complex:
    """crosscheck equals ngspice on ``text``; ngspice's answer differs from ``unchanged`` (the answer
    without the parameter under test), so the parameter did something."""
    spice = ngspice_ac(text, FREQ, [node])[node]
    if unchanged is not None:
        assert abs(spice - unchanged) > 1e-3 * abs(unchanged), "the parameter under test changed nothing"
    assert own_vth(text, node) == pytest.approx(spice, rel=1e-9, abs=1e-15)
    return spice


def refused(text: str) -> NetlistError:
    with pytest.raises(NetlistError) as info:
        read_netlist(text)
    return info.value


def notes(text: str) -> str:
    return "\n".join(read_netlist_reading(text)[1].notes)


R_DIVIDER = "divider\nV1 in 0 ac 1\nR1 in a 1k\n"  # then R2 a 0 ...: V(a) = R2 / (1k + R2)
C_DIVIDER = "divider\nV1 in 0 ac 1\nC1 in a 1u\n"  # then C2 a 0 ...: V(a) = C1 / (C1 + C2)
L_DIVIDER = "divider\nV1 in 0 ac 1\nL1 in a 1m\n"  # then L2 a 0 ...: V(a) = L2 / (L1 + L2)
HALF = 0.5 + 0j  # each divider with equal halves


# ---- instance multipliers


def test_m_on_a_resistor_puts_m_in_parallel():
    check(R_DIVIDER + "R2 a 0 1k m=2\n", HALF)


def test_m_on_a_capacitor_multiplies_it():
    check(C_DIVIDER + "C2 a 0 1u m=3\n", HALF)


def test_m_on_an_inductor_divides_it():
    check(L_DIVIDER + "L2 a 0 1m m=3\n", HALF)


def test_m_on_i_g_f_sources_multiplies_them():
    check("i\nI1 0 a ac 1 m=2\nR1 a 0 1k\n", 1000 + 0j)
    check("g\nV1 in 0 ac 1\nG1 0 a in 0 1m m=2\nR1 a 0 1k\n", 1 + 0j)
    check("f\nV1 in 0 ac 1\nR0 in 0 1k\nF1 0 a V1 1 m=2\nR1 a 0 1k\n", -1 + 0j)


@pytest.mark.parametrize("card", ["V2 a b ac 1 m=2", "E1 a 0 in 0 2 m=2", "H1 a 0 V1 1k m=2"])
def test_m_where_ngspice_refuses_it_is_refused(card: str):
    text = f"t\nV1 in 0 ac 1\nR0 in 0 1k\nR1 a 0 1k\nR2 b 0 1k\n{card}\n"
    with pytest.raises(Exception):  # ngspice 39 does not accept the card either
        ngspice_ac(text, FREQ, ["a"])
    error = refused(text)
    assert error.location.line == 6 and "does not take m=" in str(error)


# ---- ac=, scale=


def test_ac_resistance_replaces_the_value_in_ac_analysis():
    check(R_DIVIDER + "R2 a 0 1k ac=3k\n", HALF)


def test_ac_resistance_with_m_scale_and_temperature():
    check(R_DIVIDER + "R2 a 0 1k ac=3k m=3 scale=2 tc1=0.01 dtemp=10\n", 0.75 + 0j)


@pytest.mark.parametrize(
    ("divider", "card"),
    [(R_DIVIDER, "R2 a 0 1k scale=2"), (C_DIVIDER, "C2 a 0 1u scale=3"), (L_DIVIDER, "L2 a 0 1m scale=3")],
)
def test_scale_multiplies_the_value(divider: str, card: str):
    check(divider + card + "\n", HALF)


# ---- temperature


def test_tc1_tc2_with_dtemp():
    check(R_DIVIDER + "R2 a 0 1k tc1=0.01 tc2=1e-4 dtemp=10\n", HALF)


def test_tc_pair_form_reads_as_tc1_and_tc2():
    check(R_DIVIDER + "R2 a 0 1k tc=0.01, 1e-4 dtemp=10\n", HALF)
    check(R_DIVIDER + "R2 a 0 1k tc=0.01 1e-4 dtemp=10\n", HALF)


def test_instance_temp_wins_over_dtemp_with_a_note():
    text = R_DIVIDER + "R2 a 0 1k tc1=0.01 temp=37 dtemp=10\n"
    check(text, HALF)
    assert "<string>:4: r2: dtemp= ignored" in notes(text)


@pytest.mark.parametrize(
    ("divider", "card"),
    [(C_DIVIDER, "C2 a 0 1u tc1=0.01 tc2=1e-4 dtemp=10"), (L_DIVIDER, "L2 a 0 1m tc1=0.01 tc2=1e-4 temp=60")],
)
def test_temperature_coefficients_on_c_and_l(divider: str, card: str):
    check(divider + card + "\n", HALF)


def test_temp_card_sets_the_circuit_temperature_even_after_the_elements():
    check(R_DIVIDER + "R2 a 0 1k tc1=0.01\n.temp 37\n", HALF)


def test_options_temp_and_tnom():
    check(R_DIVIDER + "R2 a 0 1k tc1=0.01\n.options temp=37\n", HALF)
    check(R_DIVIDER + "R2 a 0 1k tc1=0.01\n.options tnom=17\n", HALF)


def test_temperature_set_twice_is_refused():
    error = refused(R_DIVIDER + "R2 a 0 1k tc1=0.01\n.temp 37\n.options temp=40\n")
    assert error.location.line == 6 and "set twice (first at line 5)" in str(error)


# ---- .model cards


def test_resistor_model_sheet_resistance():
    check(R_DIVIDER + "R2 a 0 rm l=10u w=2u\n.model rm r rsh=100\n", HALF)


def test_resistor_model_defw_narrow_short():
    check(R_DIVIDER + "R2 a 0 rm l=10u\n.model rm R(rsh=100 defw=2u narrow=0.5u short=1u)\n", HALF)
    check(R_DIVIDER + "R2 a 0 rm w=5u\n.model rm r rsh=100 l=20u\n", HALF)


def test_resistor_model_default_value_and_res_type():
    check(R_DIVIDER + "R2 a 0 rm\n.model rm r r=3k\n", HALF)
    check(R_DIVIDER + "R2 a 0 rm\n.model rm res res=3k\n", HALF)


def test_resistor_model_before_the_element_and_value_with_model():
    check("t\n.model rm r r=3k tc1=0.01 tnom=17\nV1 in 0 ac 1\nR1 in a 1k\nR2 a 0 2k rm\n", HALF)
    check(R_DIVIDER + "R2 a 0 rm 2k\n.model rm r tc1=0.01 tnom=17\n", HALF)


def test_resistor_model_tc_overridden_by_the_instance():
    check(R_DIVIDER + "R2 a 0 rm dtemp=10 tc1=0.02\n.model rm r r=1k tc1=0.01 tc2=1e-4\n", HALF)


def test_capacitor_model_cap_cj_cjsw():
    check(C_DIVIDER + "C2 a 0 cm\n.model cm c cap=3u\n", HALF)
    check(C_DIVIDER + "C2 a 0 cm l=1m w=2m\n.model cm c cj=1 cjsw=1e-3 narrow=0.1m short=0.2m\n", HALF)
    check(C_DIVIDER + "C2 a 0 cm l=1m w=2m\n.model cm C (cj=1 del=0.1m)\n", HALF)
    check(C_DIVIDER + "C2 a 0 cm 2u\n.model cm c tc1=0.01 tnom=17\n", HALF)


def test_inductor_model_ind_and_model_then_value():
    check(L_DIVIDER + "L2 a 0 lm\n.model lm l ind=3m\n", HALF)
    check(L_DIVIDER + "L2 a 0 lm 2m\n.model lm L tc1=0.01 tnom=17\n", HALF)


def test_capacitor_value_then_model_is_refused_as_ngspice_does():
    text = C_DIVIDER + "C2 a 0 2u cm\n.model cm c tc1=0.01\n"
    with pytest.raises(Exception):  # ngspice 39 refuses the card
        ngspice_ac(text, FREQ, ["a"])
    error = refused(text)
    assert error.location.line == 4 and "comes after the value" in str(error)


def test_noise_parameters_are_read_with_a_note():
    text = R_DIVIDER + "R2 a 0 rm noisy=0\n.model rm r r=3k kf=1e-20 af=1\n"
    check(text, HALF)
    found = notes(text)
    assert "<string>:4: r2: noisy= ignored" in found and "<string>:5: .model rm: kf= ignored" in found


def test_diode_model_is_refused_for_what_it_is():
    error = refused(R_DIVIDER + "R2 a 0 1k\n.model dmod D is=1e-14\n")
    assert error.location.line == 5 and "type D is a diode" in str(error)
    assert "nonlinear" not in refused(R_DIVIDER + "R2 a 0 rm\n.model rm r r=1k\n.model cm cap cap=1u\n").bare_message


def test_unknown_model_parameter_that_changes_the_answer_is_refused():
    error = refused(C_DIVIDER + "C2 a 0 cm l=1m w=1m\n.model cm c thick=1e-9\n")
    assert error.location.line == 5 and "thick= is not implemented" in str(error)
    error = refused(R_DIVIDER + "R2 a 0 rm\n.model rm r r=1k xyz=2\n")
    assert error.location.line == 5 and "xyz= is not a R model parameter" in str(error)


def test_resistor_model_on_a_capacitor_is_refused():
    error = refused(C_DIVIDER + "C2 a 0 rm\n.model rm r r=1k\n")
    assert error.location.line == 4 and "is a resistor model" in str(error)


def test_resistor_without_any_value_is_refused():
    error = refused(R_DIVIDER + "R2 a 0 rm\n.model rm r tc1=0.01\n")
    assert error.location.line == 4 and "no resistance" in str(error)


# ---- negative coupling and the three-inductor K line

K_NET = "k\nV1 in 0 ac 1\nR0 in p 10\nL1 p 0 1m\nL2 a 0 1m\nR2 a 0 1k\n"


def test_negative_coupling_reverses_the_dot():
    positive = check(K_NET + "K1 L1 L2 0.5\n")
    negative = check(K_NET + "K1 L1 L2 -0.5\n", positive)
    assert negative == pytest.approx(-positive, rel=1e-9)


def test_coupling_beyond_one_is_still_refused():
    with pytest.raises(Exception, match=r"\[-1, 0\) or \(0, 1\]"):
        read_netlist(K_NET + "K1 L1 L2 -1.5\n")


def test_three_inductor_k_line_is_blamed_on_the_third_inductor():
    text = K_NET + "L3 b 0 1m\nR3 b 0 1k\nK1 L1 L2\n+ L3 0.5\n"
    with pytest.raises(Exception):  # ngspice 39 refuses it too
        ngspice_ac(text, FREQ, ["a"])
    error = refused(text)
    assert error.location.line == 10 and "third inductor 'L3'" in str(error)


# ---- RF port sources


def test_port_source_has_z0_in_series():
    check("p\nV1 in 0 dc 0 ac 1 portnum 1 z0 100\nR1 in 0 100\n", 1 + 0j, node="in")
    check("p\nV1 in 0 ac 2 45 portnum=1 z0=100\nR1 in 0 100\n", node="in")


def test_two_port_sources_drive_each_other():
    text = "p\nV1 in 0 ac 1 portnum 1 z0 100\nR1 in b 100\nV2 b 0 ac 0 portnum 2 z0 50\n"
    check(text, node="in")
    check(text, node="b")


def test_port_without_z0_is_refused():
    error = refused("p\nV1 in 0 ac 1 portnum 1\nR1 in 0 50\n")
    assert error.location.line == 2 and "add z0" in str(error)


# ---- source-line forms that do not change the AC answer


@pytest.mark.parametrize(
    "fields",
    [
        "dc 0 ac 1 SIN 0 1 1k",
        "SIN 0 1 1k 0 0 90 ac 2",
        "ac 1 sin(0 1 1k)",
        "ac 1 PULSE 0 1 0 1n 1n 1u 2u",
        "ac 1 PWL 0 0 1u 1",
        "ac 1 EXP 0 1 1n",
        "ac 1 SFFM 0 1 1k 2 1k",
        "ac 1 AM 1 0 1k 100 0",
        "ac 1 distof1 0.1 90 distof2 0.2",
    ],
)
def test_transient_and_distortion_fields_are_noted(fields: str):
    text = f"s\nV1 a 0 {fields}\nR1 a 0 1k\n"
    check(text)
    assert "<string>:2: v1:" in notes(text) and "no effect on AC analysis" in notes(text)


def test_initial_conditions_on_l_and_c_are_noted():
    text = "ic\nV1 in 0 ac 1\nC1 in a 1u ic=2\nL1 a 0 1m ic=1m\n"
    check(text)
    found = notes(text)
    assert "<string>:3: c1: ic= ignored" in found and "<string>:4: l1: ic= ignored" in found
