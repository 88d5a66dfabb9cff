"""Engineering numbers as SPICE reads them, phasors as engineers write them, and their formatting."""

from __future__ import annotations

import cmath
import math

import pytest
from hypothesis import given
from hypothesis import strategies as st

from crosscheck.errors import ValueSyntaxError
from crosscheck.model.values import (
    format_element_form,
    format_eng,
    format_polar,
    format_rect,
    parse_number,
    parse_phasor,
    reactive_element,
    resistive_digits,
)

# from memory: Ngspice User's Manual (H. Vogt et al.), §2.1.1 "Some naming conventions", Table 2.2
# "Ngspice scale factors" and the paragraph after it (10V, 10Hz, M is milli, meg is mega); section and
# table numbers not re-checked against the current edition.
# The "1A"/"1a" rows were checked against ngspice 39 itself (print @r[resistance]): it has no atto suffix.
# Tolerance: exact (==). The reader shifts the decimal exponent, so "10u" is the double nearest 1e-5.
SPICE_NUMBERS = [
    ("10", 10.0), ("-44", -44.0), ("3.14159", 3.14159), ("1e-14", 1e-14), ("2.65e3", 2650.0),
    ("4.7k", 4700.0), ("4.7K", 4700.0), ("2.2meg", 2.2e6), ("2.2MEG", 2.2e6), ("100Meg", 1e8),
    ("10u", 1e-5), ("1e-9", 1e-9), ("15pF", 1.5e-11), ("1F", 1e-15), ("10V", 10.0), ("10Volts", 10.0),
    ("10Hz", 10.0), ("1mil", 25.4e-6), ("1M", 1e-3), ("1MA", 1e-3), ("1MSec", 1e-3), ("1kHz", 1000.0),
    ("1000.0", 1000.0), ("1.0e3", 1000.0), ("1T", 1e12), ("1G", 1e9), ("1n", 1e-9), ("1p", 1e-12),
    ("1A", 1.0), ("1a", 1.0), (".5", 0.5), ("5.", 5.0), ("+2m", 2e-3), ("1.5e3k", 1.5e6), ("1e-3meg", 1000.0),
    ("1µ", 1e-6), ("1megohm", 1e6), (" 22n ", 22e-9),
]


@pytest.mark.parametrize(("text", "expected"), SPICE_NUMBERS)
def test_parse_number_reads_spice_numbers(text: str, expected: float) -> None:
    """Each SPICE number form reads to exactly the value SPICE gives it."""
    assert parse_number(text) == expected  # tolerance: exact


@pytest.mark.parametrize("text", ["4k7", "2u2", "1..2", "", "   ", "k", "meg", "1 k", "abc", "--1", "1e3.5", "0x10"])
def test_parse_number_refuses_what_spice_would_misread(text: str) -> None:
    """Malformed numbers raise ValueSyntaxError (also a ValueError) whose message shows the accepted forms."""
    with pytest.raises(ValueSyntaxError) as info:
        parse_number(text)
    assert isinstance(info.value, ValueError)
    assert "4.7k" in str(info.value)  # the message ends with examples of what to write


def test_digits_after_a_suffix_get_their_own_hint() -> None:
    """4k7 is refused with the reason: SPICE would silently read 4k."""
    with pytest.raises(ValueSyntaxError, match="SPICE would read 4k"):
        parse_number("4k7")


_SUFFIXES = [("t", 12), ("T", 12), ("g", 9), ("meg", 6), ("MEG", 6), ("Meg", 6), ("k", 3), ("K", 3),
             ("m", -3), ("M", -3), ("u", -6), ("U", -6), ("n", -9), ("p", -12), ("f", -15), ("F", -15), ("", 0)]


@given(mantissa=st.from_regex(r"\A[0-9]{1,6}(\.[0-9]{0,6})?\Z"), suffix=st.sampled_from(_SUFFIXES),
       unit=st.sampled_from(["", "Hz", "V", "ohm", "s"]))
def test_suffix_is_a_decimal_exponent(mantissa: str, suffix: tuple[str, int], unit: str) -> None:
    """'<m><suffix><unit>' reads exactly as the decimal '<m>e<exponent>': no binary rounding from a multiply."""
    letters, exponent = suffix
    if letters == "" and unit[:1].lower() in ("m", "s"):  # 'ohm'/'s' alone are units; 'm...' would be milli
        unit = "V"
    assert parse_number(f"{mantissa}{letters}{unit}") == float(f"{mantissa}e{exponent}")  # tolerance: exact


@given(st.floats(allow_nan=False, allow_infinity=False))
def test_repr_of_any_double_reads_back_exactly(x: float) -> None:
    """The netlist writer's number format (repr) reads back to the same double."""
    assert parse_number(repr(x)) == x  # tolerance: exact


# ----------------------------------------------------------------------------- phasors

# common practice: rectangular and polar notation as in circuit-analysis texts; values worked by hand.
RECTANGULAR = [
    ("3+4j", 3 + 4j), ("3-j4", 3 - 4j), ("1.5k - j120", 1500 - 120j), ("1.5k-j120", 1500 - 120j),
    ("3 + 4j", 3 + 4j), ("3+4i", 3 + 4j), ("-4j+3", 3 - 4j), ("4j", 4j), ("j", 1j), ("-j", -1j), ("2", 2 + 0j),
    ("1e-3+2e-3j", 0.001 + 0.002j), ("1e+3", 1000 + 0j), ("1k+j1k", 1000 + 1000j), ("4.7kj", 4700j),
    ("-2.2meg - j3.3meg", -2.2e6 - 3.3e6j),
]


@pytest.mark.parametrize(("text", "expected"), RECTANGULAR)
def test_parse_phasor_rectangular(text: str, expected: complex) -> None:
    """Rectangular phasors, j before or after the number, with engineering suffixes."""
    assert parse_phasor(text) == expected  # tolerance: exact


@pytest.mark.parametrize("text", ["5∠53.13°", "5@53.13", "5 ∠ 53.13 °", "5∠53.13deg", "5@53.13°"])
def test_parse_phasor_polar(text: str) -> None:
    """Polar forms, angle in degrees: 5∠53.13° is 3 + 4j to the precision the angle is written with."""
    # common practice: the 3-4-5 triangle, angle atan(4/3) = 53.1301°; 53.13° is off by 1.0e-4°,
    # which moves the tip by 5 * 1.8e-6 = 9e-6: tolerance abs 2e-5.
    assert abs(parse_phasor(text) - (3 + 4j)) <= 2e-5


def test_parse_phasor_polar_negative_angle_and_suffix() -> None:
    """2k∠-90° is -2000j; suffixes apply to the magnitude."""
    assert abs(parse_phasor("2k∠-90°") - (-2000j)) <= 1e-12  # tolerance: abs 1e-12 (cos 90° rounding)


@pytest.mark.parametrize("text", ["", "  ", "3+", "+", "1+2j+3j", "3+4", "5∠", "abc", "3+4x", "j+j"])
def test_parse_phasor_refuses_malformed(text: str) -> None:
    """Malformed phasors raise ValueSyntaxError whose message shows both accepted notations."""
    with pytest.raises(ValueSyntaxError, match="5@53.13"):
        parse_phasor(text)


# ----------------------------------------------------------------------------- formatting

@pytest.mark.parametrize(("x", "kwargs", "expected"), [
    (4700, {}, "4.7k"), (0.0, {}, "0"), (1e-5, {}, "10u"), (2.2e6, {}, "2.2Meg"), (-2.2e6, {}, "-2.2Meg"),
    (999.99, {}, "1k"), (999.94, {}, "999.9"), (1e-15, {}, "1f"), (1e16, {}, "1.000e+16"),
    (999.99e12, {}, "1.000e+15"), (1.5e-16, {}, "1.500e-16"), (4700, {"unit": "Ω"}, "4.7kΩ"),
    (123456789.0, {"sig": 3}, "123Meg"), (float("inf"), {}, "inf"), (0.1, {}, "100m"), (3.3e9, {}, "3.3G"),
])
def test_format_eng(x: float, kwargs: dict, expected: str) -> None:
    """SI-prefixed numbers with the given significant figures; mega is written Meg as SPICE reads it."""
    assert format_eng(x, **kwargs) == expected


def test_format_eng_reads_back_with_parse_number() -> None:
    """What format_eng prints reads back with parse_number: 'M' would come back as milli, 1e9 too small."""
    for x in (2.2e6, 4.7e3, 1e-5, 3.3e9, 1.2e12):
        assert parse_number(format_eng(x)) == pytest.approx(x, rel=1e-12)  # tolerance: rel 1e-12


@pytest.mark.parametrize(("z", "expected"), [
    (1500 - 120j, "1.5k - j120"), (3 + 4j, "3 + j4"), (complex(1, -0.0), "1 + j0"), (-2e-3 - 5e6j, "-2m - j5Meg"),
])
def test_format_rect(z: complex, expected: str) -> None:
    """Rectangular form with a prefix on each part, in the same notation parse_phasor reads."""
    assert format_rect(z) == expected


@pytest.mark.parametrize(("z", "kwargs", "expected"), [
    (3 + 4j, {}, "5∠53.13°"), (3 + 4j, {"ascii_only": True}, "5@53.13"), (-1 + 0j, {}, "1∠180.00°"),
    (complex(-1, -0.0), {}, "1∠180.00°"), (0j, {}, "0∠0.00°"), (-4000j, {"unit": "Ω"}, "4kΩ∠-90.00°"),
])
def test_format_polar(z: complex, kwargs: dict, expected: str) -> None:
    """Polar form, angle in degrees in (-180, 180], two decimals."""
    assert format_polar(z, **kwargs) == expected


_moduli = st.one_of(st.just(0.0), st.floats(min_value=1e-18, max_value=1e18))
_complexes = st.builds(lambda a, b, sa, sb: complex(sa * a, sb * b), _moduli, _moduli,
                       st.sampled_from([1, -1]), st.sampled_from([1, -1]))


@given(_complexes)
def test_format_rect_reads_back(z: complex) -> None:
    """parse_phasor(format_rect(z, 8)) is z to the 8 significant figures printed."""
    back = parse_phasor(format_rect(z, sig=8))
    # tolerance: each part is rounded to 8 significant figures, so rel 5e-8 per part (1e-7 stated).
    assert abs(back.real - z.real) <= 1e-7 * abs(z.real)
    assert abs(back.imag - z.imag) <= 1e-7 * abs(z.imag)


@given(_complexes, st.booleans())
def test_format_polar_reads_back(z: complex, ascii_only: bool) -> None:
    """parse_phasor(format_polar(z)) is z to the printed precision (8 figures, angle to 0.005°)."""
    back = parse_phasor(format_polar(z, sig=8, ascii_only=ascii_only))
    # tolerance: magnitude rel 5e-8 plus angle 0.005° = 8.7e-5 rad of |z|; 1e-4 * |z| stated.
    assert abs(back - z) <= 1e-4 * abs(z)
    assert math.isclose(abs(back), abs(z), rel_tol=1e-7)  # tolerance: rel 1e-7 on the magnitude
    if abs(z):
        assert abs(cmath.phase(back / z)) <= math.radians(0.0051)  # tolerance: 0.0051° (2-decimal angle)


# ----------------------------------------------------------------------------- units as engineers write them


@pytest.mark.parametrize(("x", "unit", "expected"), [
    (1e6, " Hz", "1 MHz"), (2.5e6, " Hz", "2.5 MHz"), (1e3, " Hz", "1 kHz"), (1.0, " Hz", "1 Hz"),
    (3.3e9, " Hz", "3.3 GHz"), (0.0, " Hz", "0 Hz"), (2.2e6, " Ω", "2.2 MΩ"), (2.2e6, "Ω", "2.2MΩ"),
    (4.7e-6, " F", "4.7 uF"),
])
def test_format_eng_with_unit_writes_si_mega(x: float, unit: str, expected: str) -> None:
    """A number with a unit writes mega as the SI 'M' (never 'Meg'): 1e6 Hz is '1 MHz'."""
    assert format_eng(x, 4, unit) == expected


def test_format_eng_bare_keeps_spice_meg() -> None:
    """A bare number keeps SPICE's 'Meg', which parse_number reads back (an 'M' would be milli)."""
    assert format_eng(2.2e6) == "2.2Meg"
    assert parse_number(format_eng(2.2e6)) == 2.2e6  # tolerance: exact (two significant figures)


@pytest.mark.parametrize(("x", "unit", "expected"), [
    (0.30449, " dB", "0.3045 dB"), (-0.30449, " dB", "-0.3045 dB"), (-20.0, " dB", "-20 dB"),
    (1e-7, " dB", "1.000e-07 dB"), (1234.5, " dB", "1234 dB"), (0.0, " dB", "0 dB"), (12.5, " %", "12.5 %"),
    (45.0, " °", "45 °"), (0.3, " dBV", "0.3 dBV"),
])
def test_format_eng_decibels_take_no_prefix(x: float, unit: str, expected: str) -> None:
    """Decibels (and percent, degrees) never take an SI prefix: 0.30449 dB is '0.3045 dB', not '304.5 mdB'."""
    assert format_eng(x, 4, unit) == expected


def _z_with_c(r: float, c: float, f: float) -> complex:
    return complex(r, -1.0 / (2 * math.pi * f * c))


@pytest.mark.parametrize(("z", "f", "series", "expected"), [
    (_z_with_c(50.0, 2.533e9, 1e3), 1e3, True, "50 Ω (resistive to 14 digits: no series L or C)"),
    (complex(50.0, 1e-3), 1e3, True, "50 Ω + L 159.2 nH"),
    (complex(50.0, -5e-6), 1e3, True, "50 Ω (resistive to 7 digits: no series L or C)"),
    (complex(50.0, 2 * math.pi * 1e3 * 1e-19), 1e3, True, "50 Ω (resistive to 16 digits: no series L or C)"),
    (complex(1e-3, -1e-3), 100.0, True, "1 mΩ + C 1.592 F"),
    (complex(50.0, 0.0), 1e3, True, "50 Ω"),
    (complex(50.0, -10.0), 0.0, True, "50 Ω"),
    (complex(0.02, -1e-3), 1e3, False, "20 mS ‖ L 159.2 mH"),
    (complex(0.02, -1e-14), 1e3, False, "20 mS (resistive to 12 digits: no parallel C or L)"),
    (complex(0.0, -1e-14), 1e3, True, "0 Ω + C 15.92 GF"),
])
def test_format_element_form(z: complex, f: float, series: bool, expected: str) -> None:
    """R + L or C as engineers draw it; a near-resistive Z_th (|X|/R < 1e-9, or < 1e-3 with C > 1 F or
    L < 1 fH) is R alone with how many digits it is resistive to; a real 1.6 F at |X|/R = 1 stays."""
    assert format_element_form(z, f, series) == expected


def test_resistive_digits_and_reactive_element_agree() -> None:
    """reactive_element is None exactly where resistive_digits names a digit count (or X = 0, or DC)."""
    for x in (-1e-12, -5e-6, -1e-3, 1e-20, 1e-3, 5.0):
        z = complex(50.0, x)
        assert (reactive_element(z, 1e3) is None) == (resistive_digits(z, 1e3) is not None)
