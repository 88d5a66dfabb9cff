"""Engineering numbers as SPICE reads them, and phasors as engineers write them.

SPICE scale suffixes (case-insensitive): ``t g meg k mil m u n p f``. Letters
after the number that do not start with a scale factor are units and are
ignored, exactly as SPICE does (so ``1F`` is one *femto*, and ``10V`` and ``1A`` are
10 and 1: ngspice has no atto suffix).
Digits after a suffix (``4k7``) are refused: SPICE would silently read 4k.

Phasors: rectangular ``3+4j``, ``3-j4``, ``1.5k - j120``; polar ``5∠53.13°``
or the plain-ASCII ``5@53.13`` (angle in degrees). Each part may carry an
engineering suffix.
"""

from __future__ import annotations

import cmath
import math
import re

from crosscheck.errors import ValueSyntaxError

# Longest match first: "meg" and "mil" before "m".
# Scales are decimal exponents so that "10u" reads as the double nearest 1e-5.
_SCALES: tuple[tuple[str, int], ...] = (
    ("meg", 6),
    ("t", 12),
    ("g", 9),
    ("k", 3),
    ("m", -3),
    ("u", -6),
    ("µ", -6),
    ("n", -9),
    ("p", -12),
    ("f", -15),
)

_NUMBER = re.compile(r"""^\s*(?P<num>[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)(?P<suffix>[a-zA-Zµ]*)\s*$""")

_FORMS = "plain numbers like 4.7k, 2.2meg, 10u, 15pF or 1e-9"

#: The longest number text read: ample for any real value, and it keeps a hostile ``1e<5000 digits>``
#: from costing time or reaching Python's integer-conversion limit.
MAX_NUMBER_CHARS = 100
_LARGEST_INT = 10**308


def _shown(text: str) -> str:
    """Number text quoted for a message, cut short so a hostile value cannot flood it."""
    return repr(text if len(text) <= 40 else text[:40] + "…")


def parse_number(text: str | float) -> float:
    """Read one engineering number as SPICE would, refusing what SPICE would misread.

    >>> parse_number("4.7k"), parse_number("2.2Meg"), parse_number("15pF")
    (4700.0, 2200000.0, 1.5e-11)
    """
    if not isinstance(text, str):
        if isinstance(text, int) and not isinstance(text, bool):
            if abs(text) > _LARGEST_INT:
                raise ValueSyntaxError(
                    f"the whole number {_shown(str(text))} is too large (more than 1e308); write {_FORMS}"
                )
            return float(text)
        if isinstance(text, float):
            return text
        raise ValueSyntaxError(f"expected a number, got {_shown(repr(text))}; write {_FORMS}")
    if len(text) > MAX_NUMBER_CHARS:
        raise ValueSyntaxError(
            f"the number {_shown(text)} is {len(text)} characters long; at most {MAX_NUMBER_CHARS} are "
            f"read; write {_FORMS}"
        )
    match = _NUMBER.match(text)
    if match is None:
        hint = ""
        if re.match(r"^\s*[+-]?\d+[a-zA-Z]+\d", text):
            hint = " (digits after a suffix, as in 4k7, are not SPICE: SPICE would read 4k; write 4.7k)"
        raise ValueSyntaxError(f"cannot read {text!r} as a number{hint}; write {_FORMS}")
    num = match.group("num")
    suffix = match.group("suffix").lower()
    if suffix.startswith("mil"):
        return float(num) * 25.4e-6
    for name, exponent in _SCALES:
        if suffix.startswith(name):
            mantissa, _, exp = num.lower().partition("e")
            return float(f"{mantissa}e{int(exp or 0) + exponent}")
    return float(num)


def try_parse_number(text: str) -> float | None:
    """``parse_number`` that returns None instead of raising, for parsers that try alternatives."""
    try:
        return parse_number(text)
    except ValueSyntaxError:
        return None


_POLAR = re.compile(r"^(?P<mag>[^∠@]+)[∠@](?P<ang>[^∠@]+?)\s*(?:°|deg)?\s*$")
# A rectangular phasor: optional real part, then an imaginary part with j or i before or after.
_IMAG = re.compile(
    r"""^(?P<sign>[+-]?)\s*(?:
        [ji]\s*(?P<after>[0-9.][^\s]*)?      # j4, j4.7k, or bare j
      | (?P<before>[0-9.][^\s]*?)\s*\*?\s*[ji]  # 4j, 4.7kj
    )$""",
    re.VERBOSE,
)

_PHASOR_FORMS = "a phasor like 3+4j, 3-j4, 1.5k - j120, 5∠53.13° or 5@53.13 (degrees)"


def parse_phasor(text: str | complex | float) -> complex:
    """Read a phasor in rectangular or polar form (angles in degrees)."""
    if isinstance(text, int) and not isinstance(text, bool):
        return complex(parse_number(text))
    if isinstance(text, (float, complex)):
        return complex(text)
    if not isinstance(text, str):
        raise ValueSyntaxError(f"expected {_PHASOR_FORMS}, got {_shown(repr(text))}")
    if len(text) > 2 * MAX_NUMBER_CHARS + 20:
        raise ValueSyntaxError(f"the phasor {_shown(text)} is {len(text)} characters long; write {_PHASOR_FORMS}")
    s = text.strip()
    if not s:
        raise ValueSyntaxError(f"empty phasor; write {_PHASOR_FORMS}")
    polar = _POLAR.match(s)
    if polar is not None:
        mag = _part(polar.group("mag"), text)
        ang = _part(polar.group("ang"), text)
        return cmath.rect(mag, math.radians(ang))
    # Split at a + or - that is not an exponent sign and not at the start.
    split = _split_point(s)
    parts = [s] if split is None else [s[:split], s[split:]]
    real = 0.0
    imag = 0.0
    seen_imag = False
    for part in parts:
        part = part.strip()
        m = _IMAG.match(part)
        if m is not None and (
            m.group("after") is not None or m.group("before") is not None or part.lstrip("+-").strip() in ("j", "i")
        ):
            if seen_imag:
                raise ValueSyntaxError(f"cannot read {text!r}: two imaginary parts; write {_PHASOR_FORMS}")
            seen_imag = True
            digits = m.group("after") or m.group("before") or "1"
            magnitude = _part(digits, text)
            imag = -magnitude if m.group("sign") == "-" else magnitude
        else:
            real += _part(part, text)
    if len(parts) == 2 and not seen_imag:
        raise ValueSyntaxError(f"cannot read {text!r}: two real parts; write {_PHASOR_FORMS}")
    return complex(real, imag)


def _split_point(s: str) -> int | None:
    """Index of the sign that starts the second term of ``a+bj``; exponent signs do not count."""
    for i in range(len(s) - 1, 0, -1):
        if s[i] in "+-":
            before = s[:i].rstrip()
            is_exponent = before[-1:] in ("e", "E") and before[-2:-1].isdigit() | (before[-2:-1] == ".")
            if before and not is_exponent:
                return i
    return None


def _part(piece: str, whole: str) -> float:
    try:
        return parse_number(piece.strip().replace(" ", ""))
    except ValueSyntaxError:
        raise ValueSyntaxError(f"cannot read {whole!r}; write {_PHASOR_FORMS}") from None


# Bare numbers write mega as "Meg", as SPICE reads it (a plain "M" reads back as milli, 1e9 too
# small); a number with a unit is for people and takes the SI "M" ("1 MHz", "2.2 MΩ").
_PREFIXES = (
    (1e12, "T"),
    (1e9, "G"),
    (1e6, "Meg"),
    (1e3, "k"),
    (1.0, ""),
    (1e-3, "m"),
    (1e-6, "u"),
    (1e-9, "n"),
    (1e-12, "p"),
    (1e-15, "f"),
)
_PREFIX_LETTERS = "TGMegkmunpf"

#: Units that never take an SI prefix: a logarithmic ratio ("0.3045 dB", never "304.5 mdB"), percent, degrees.
_UNPREFIXED = ("%", "°", "deg", "rad")


def _unprefixed(unit: str) -> bool:
    u = unit.strip()
    return u.startswith("dB") or u in _UNPREFIXED


def _plain(x: float, sig: int) -> str:
    """``sig`` significant figures with no prefix; an exponent only beyond 1e-4 … 1e6."""
    ax = abs(x)
    if ax != 0 and not (1e-4 <= ax < 1e6 * (1 - 0.5 * 10 ** (-sig))):
        return f"{x:.{sig - 1}e}"
    return f"{x:.{sig}g}"


def format_eng(x: float, sig: int = 4, unit: str = "") -> str:
    """Format with an SI prefix and ``sig`` significant figures: 4700 -> '4.7k'.

    A ``unit`` given with a leading space is set apart the engineering way: (1000, unit=" Hz") -> '1 kHz'.
    With a unit, mega is the SI "M" (1e6, " Hz" -> '1 MHz'); a bare number keeps SPICE's "Meg" so that
    ``parse_number`` reads it back. Decibels, percent and degrees take no prefix: (0.30449, 4, " dB") ->
    '0.3045 dB'.
    """
    if x is None or not math.isfinite(x):
        return f"{x}{unit}"
    if unit and _unprefixed(unit):
        return f"{_plain(x, sig)}{unit}"
    if unit.startswith(" ") and x != 0:
        bare = format_eng(x, sig)
        head = bare.rstrip(_PREFIX_LETTERS)
        prefix = bare[len(head) :].replace("Meg", "M")
        return f"{head} {prefix}{unit.strip()}" if "e" not in head[-4:] else f"{bare} {unit.strip()}"
    if x == 0:
        return f"0{unit}"
    ax = abs(x)
    threshold = 1 - 0.5 * 10 ** (-sig)  # a value this close below a prefix's scale rounds up to it
    found = next(((scale, prefix) for scale, prefix in _PREFIXES if ax >= scale * threshold), None)
    if found is None or ax >= 1e15 * threshold:  # below every prefix, or would round up to "1000T"
        return f"{x:.{sig - 1}e}{unit}"
    scale, prefix = found
    text = f"{x / scale:.{sig}g}"
    return f"{text}{'M' if unit and prefix == 'Meg' else prefix}{unit}"


#: |X|/R below this is resistive whatever the element value: the reactance is rounding, not a part.
RESISTIVE_RATIO = 1e-9
#: |X|/R below this is resistive when the element would also be absurd (below).
_SMALL_RATIO = 1e-3
#: A series C above 1 F or L below 1 fH (a parallel L above 1 GH or C below 1 aF) is no real part.
_ABSURD = {
    ("C", True): (1.0, math.inf),
    ("L", True): (0.0, 1e-15),
    ("L", False): (1e9, math.inf),
    ("C", False): (0.0, 1e-18),
}


def reactive_element(z: complex, freq_hz: float, series: bool = True) -> tuple[str, float] | None:
    """The reactive element of ``z`` (series R + L or C; parallel G ‖ C or L for an admittance), or None
    when there is none to draw: DC, zero reactance, or near-resistive (see ``resistive_digits``)."""
    x = z.imag
    if freq_hz == 0 or x == 0 or resistive_digits(z, freq_hz, series) is not None:
        return None
    omega = 2.0 * math.pi * freq_hz
    if series:
        return ("L", x / omega) if x > 0 else ("C", -1.0 / (omega * x))
    return ("C", x / omega) if x > 0 else ("L", -1.0 / (omega * x))


def resistive_digits(z: complex, freq_hz: float, series: bool = True) -> int | None:
    """How many digits ``z`` is resistive to (floor of -log10 |X|/R), when its L or C would be absurd:
    |X|/R below 1e-9, or below 1e-3 with an element value no part has (``_ABSURD``); else None."""
    r, x = abs(z.real), abs(z.imag)
    if freq_hz == 0 or x == 0 or r == 0:
        return None
    ratio = x / r
    if ratio >= _SMALL_RATIO:
        return None
    omega = 2.0 * math.pi * freq_hz
    if series:
        kind, value = ("L", x / omega) if z.imag > 0 else ("C", 1.0 / (omega * x))
    else:
        kind, value = ("C", x / omega) if z.imag > 0 else ("L", 1.0 / (omega * x))
    lo, hi = _ABSURD[(kind, series)]
    if ratio >= RESISTIVE_RATIO and not lo < value < hi:
        return None
    return int(math.floor(-math.log10(ratio)))


def format_element_form(z: complex, freq_hz: float, series: bool = True, sig: int = 4) -> str:
    """Z_th as 'R + L or C' ('50 Ω + L 1.2 nH'), or Y_N as 'G ‖ C or L'; a near-resistive one as R (G)
    alone with a note, never an absurd element: '50 Ω (resistive to 12 digits: no series L or C)'."""
    first = format_eng(z.real, sig, " Ω" if series else " S")
    element = reactive_element(z, freq_hz, series)
    if element is not None:
        kind, value = element
        joiner = " + " if series else " ‖ "
        return f"{first}{joiner}{kind} {format_eng(value, sig, ' H' if kind == 'L' else ' F')}"
    digits = resistive_digits(z, freq_hz, series)
    if digits is None:
        return first
    return f"{first} (resistive to {digits} digits: no {'series L or C' if series else 'parallel C or L'})"


def format_rect(z: complex, sig: int = 4, unit: str = "") -> str:
    """'1.5k - j120' style, with SI prefixes on each part."""
    sign = "-" if z.imag < 0 else "+"
    return f"{format_eng(z.real, sig)} {sign} j{format_eng(abs(z.imag), sig)}{(' ' + unit) if unit else ''}"


def format_polar(z: complex, sig: int = 4, unit: str = "", ascii_only: bool = False) -> str:
    """'1.02∠-3.40°' style (or '1.02@-3.40' with ``ascii_only``); angle in degrees in (-180, 180]."""
    mag = abs(z)
    ang = math.degrees(cmath.phase(z)) if mag else 0.0
    if ang == -180.0:
        ang = 180.0
    body = format_eng(mag, sig, unit)
    return f"{body}@{ang:.2f}" if ascii_only else f"{body}∠{ang:.2f}°"
