"""Name the usual hand-calculation slip that explains a wrong hand value.

Each hypothesis recomputes what the slip would have produced (on the network
itself where the slip is in the working, on the right value where it is in the
last step) and is accepted only when the stated value matches *that* within the
expectation's own tolerance, and the slip's value is itself told apart from the
right one at that tolerance. The signatures are the project's list of
hand-calculation slips (common practice): an angle in radians written as degrees;
atan for atan2 (180° off); f used for ω (reactances 2π off); capacitive terms
with the inductive sign; RMS against peak (√2); independent sources not zeroed
or dependent ones zeroed; a conjugate; the port's polarity reversed.

An unwrapped angle (182.73° for −177.27°) is the same phasor and never fails on
its own; it is folded into the radians hypothesis, which also tries the true
angle ± 360°. Two slips at once are not searched.
"""

from __future__ import annotations

import cmath
import math
from collections.abc import Callable, Iterator
from dataclasses import dataclass, replace

from crosscheck.errors import CrosscheckError
from crosscheck.judge.stated import deviation, format_value, quantity_value
from crosscheck.model.network import Network, Port, make_element
from crosscheck.model.tolerance import Tolerance
from crosscheck.own.equivalent import Equivalent, thevenin
from crosscheck.vocabulary import PHASORS, quantity_name

SQRT2 = math.sqrt(2.0)


@dataclass(frozen=True)
class Slip:
    """A slip that reproduces the stated value: its name, what it is, the value it gives."""

    name: str
    sentence: str
    value: complex
    score: float  # stated against the slip's value, in tolerances (<= 1)
    also: tuple[str, ...] = ()  # other slips that reproduce the value as well


@dataclass(frozen=True)
class _Candidate:
    name: str
    value: complex | None
    sentence: Callable[[str], str]  # takes the formatted slip value


# --------------------------------------------------------------------------- network transforms


def _recompute(network: Network | None, port: Port, freq_hz: float) -> Equivalent | None:
    if network is None:
        return None
    try:
        return thevenin(network, port, [freq_hz])[0]
    except (CrosscheckError, ValueError, ArithmeticError):
        return None


def dependent_sources_zeroed(network: Network) -> Network | None:
    """Every E, F, G, H gain set to 0 (E and H become shorts, F and G opens); None if there are none."""
    if not any(e.kind in "EFGH" and e.value != 0 for e in network.elements):
        return None
    return network.with_elements(replace(e, value=0.0) if e.kind in "EFGH" else e for e in network.elements)


def capacitors_conjugated(network: Network, freq_hz: float) -> Network | None:
    """Each C given the inductive sign at this frequency: an L = 1/(ω²C), so X = +1/(ωC) instead of −1/(ωC)."""
    if freq_hz <= 0 or not network.by_kind("C"):
        return None
    w2 = (2.0 * math.pi * freq_hz) ** 2
    return network.with_elements(
        replace(e, kind="L", value=1.0 / (w2 * e.value)) if e.kind == "C" else e for e in network.elements
    )


def sources_zeroed_wrong_way(network: Network) -> Network | None:
    """Independent sources with a value opened (V) and shorted (I): the reverse of zeroing them.

    A V source that senses the current of an F or H stays (it is a wire in any hand working).
    """
    controls = {e.control for e in network.elements if e.kind in "FH"}
    out, changed = [], False
    for e in network.elements:
        if e.kind == "V" and e.ac_mag != 0 and e.name not in controls:
            changed = True
            continue
        if e.kind == "I" and e.ac_mag != 0:
            changed = True
            out.append(make_element(e.name, "R", e.terminals, 0.0))
            continue
        out.append(e)
    return network.with_elements(out) if changed else None


# --------------------------------------------------------------------------- candidates


def _from_network(name: str, eq: Equivalent | None, quantity: str, sentence: Callable[[str], str]) -> _Candidate:
    value = quantity_value(eq, quantity)[0] if eq is not None else None
    return _Candidate(name, value, sentence)


def _candidates(
    network: Network | None, port: Port, quantity: str, true_eq: Equivalent, sources: str
) -> Iterator[_Candidate]:
    """Every hypothesis in order of preference (used only to break exact ties)."""
    yield from _source_candidates(network, port, quantity, true_eq)
    yield from _reactance_candidates(network, port, quantity, true_eq.freq_hz)
    yield from _value_candidates(quantity, true_eq, sources)


def _source_candidates(network: Network | None, port: Port, quantity: str, true_eq: Equivalent) -> Iterator[_Candidate]:
    """Slips in the working with the sources: dependent ones zeroed, independent ones left on or zeroed wrongly."""
    f = true_eq.freq_hz
    if network is not None:
        zeroed = dependent_sources_zeroed(network)
        if zeroed is not None:
            yield _from_network(
                "dependent sources zeroed",
                _recompute(zeroed, port, f),
                quantity,
                lambda v: (
                    f"the dependent sources were set to zero, which gives {v}; controlled sources stay active for "
                    "both V_th and Z_th (only independent sources are zeroed, and only for Z_th)"
                ),
            )
    if quantity in ("zth", "yn") and true_eq.vth not in (None, 0) and true_eq.zth is not None:
        z_on = true_eq.vth + true_eq.zth * 1.0  # V(a) − V(b) with the sources on and a 1 A test current
        yield _Candidate(
            "sources not zeroed",
            z_on if quantity == "zth" else (1 / z_on if z_on else None),
            lambda v: (
                f"the independent sources were left on while the port was driven with a "
                f"1 A test current, which gives {v}; zero them (V short, I open) before "
                "finding Z_th"
            ),
        )
    if network is not None and quantity not in ("vth", "in"):
        wrong = sources_zeroed_wrong_way(network)
        if wrong is not None:
            yield _from_network(
                "sources zeroed the wrong way",
                _recompute(wrong, port, f),
                quantity,
                lambda v: (
                    f"the independent sources were zeroed the wrong way round (voltage sources opened, current "
                    f"sources shorted), which gives {v}; a zeroed voltage source is a short, a zeroed current source "
                    "an open"
                ),
            )


def _reactance_candidates(network: Network | None, port: Port, quantity: str, f: float) -> Iterator[_Candidate]:
    """Slips in the working of the reactances: the wrong ω (2π too few or too many), or the capacitors' sign.

    None at DC, where there is no reactance to get wrong.
    """
    if network is None or not f > 0:
        return
    yield _from_network(
        "f used for ω",
        _recompute(network, port, f / (2 * math.pi)),
        quantity,
        lambda v: (
            f"the reactances were worked with ω = f (X_L = f·L, X_C = 1/(f·C), 2π too small), which gives {v}; "
            "use ω = 2πf"
        ),
    )
    yield _from_network(
        "2π applied twice",
        _recompute(network, port, 2 * math.pi * f),
        quantity,
        lambda v: (
            f"the reactances were worked with ω = 2π·(2πf), a frequency already in rad/s multiplied by 2π again, "
            f"which gives {v}"
        ),
    )
    flipped = capacitors_conjugated(network, f)
    if flipped is not None:
        yield _from_network(
            "capacitive reactance sign",
            _recompute(flipped, port, f),
            quantity,
            lambda v: (
                f"the capacitors were given the inductive sign (+j/(ωC) instead of −j/(ωC) = 1/(jωC)), which gives {v}"
            ),
        )


def _value_candidates(quantity: str, true_eq: Equivalent, sources: str) -> Iterator[_Candidate]:
    """Slips in writing the answer down: the right value transformed as the slip would (phasors only)."""
    true_value = quantity_value(true_eq, quantity)[0]
    if true_value is None or quantity not in PHASORS:
        return
    yield from _magnitude_candidates(quantity, true_value, sources)
    yield from _angle_candidates(true_value)
    yield from _sign_candidates(quantity, true_value)


def _magnitude_candidates(quantity: str, t: complex, sources: str) -> Iterator[_Candidate]:
    """RMS against peak: a source-driven value (V_th, I_N) √2 too small or too large, worded by the case's sources."""
    if quantity not in ("vth", "in"):
        return
    low = (
        "an RMS value where the case's sources are peak"
        if sources == "peak"
        else "divided by √2 once too often (the case's sources are already RMS)"
    )
    high = (
        "a peak value where the case's sources are RMS"
        if sources == "rms"
        else "multiplied by √2 once too often (the case's sources are already peak)"
    )
    yield _Candidate("RMS vs peak", t / SQRT2, lambda v: f"the value is 1/√2 of the right one ({v}): {low}")
    yield _Candidate("RMS vs peak", t * SQRT2, lambda v: f"the value is √2 times the right one ({v}): {high}")


def _angle_candidates(t: complex) -> Iterator[_Candidate]:
    """Slips in the angle: degrees read as radians (also from the unwrapped angle), and atan for atan2."""
    theta = math.degrees(cmath.phase(t))
    # The angle as worked may have been carried unwrapped, one turn the other side of ±180°.
    for turn in (0.0, 360.0 if theta < 0 else -360.0):
        angle = theta + turn
        wrapped = "" if turn == 0 else f" (carried unwrapped; wrapped it is {theta:.2f}°)"
        yield _Candidate(
            "degrees read as radians",
            cmath.rect(abs(t), math.radians(math.radians(angle))),
            lambda v, angle=angle, wrapped=wrapped: (  # type: ignore[misc]
                f"the stated angle is the true angle {angle:.2f}°{wrapped} expressed in radians "
                f"({math.radians(angle):.4g}) and written as degrees: {v}; convert with 180/π "
                "(or set the calculator to degrees)"
            ),
        )
    if t.real < 0:
        atan = math.degrees(math.atan(t.imag / t.real))
        yield _Candidate(
            "angle off by 180° (atan for atan2)",
            cmath.rect(abs(t), math.radians(atan)),
            lambda v, atan=atan: (  # type: ignore[misc]
                f"the angle was taken as atan(im/re) = {atan:.2f}°, which loses the quadrant when the "
                f"real part is negative; atan2 gives {theta:.2f}°"
            ),
        )


def _sign_candidates(quantity: str, t: complex) -> Iterator[_Candidate]:
    """Sign slips: the port's polarity reversed (V_th, I_N only; Z_th does not change with it), a conjugate."""
    if quantity in ("vth", "in"):
        q = quantity_name(quantity)
        yield _Candidate(
            "port polarity reversed",
            -t,
            lambda v: (
                f"{q} has the opposite sign ({v}): the port was read as V(b) − V(a), or a source or winding dot "
                "reversed; Z_th does not change with the port's polarity"
            ),
        )
    yield _Candidate(
        "conjugate taken",
        t.conjugate(),
        lambda v: (
            f"the value is the complex conjugate of the right one ({v}): a sign of j lost, for example "
            "1/(a + jb) written as (a + jb)/(a² + b²)"
        ),
    )


def diagnose(
    network: Network | None,
    port: Port,
    quantity: str,
    stated: complex,
    true_eq: Equivalent,
    tolerance: Tolerance,
    sources: str = "peak",
) -> Slip | None:
    """The slip whose value matches ``stated`` within ``tolerance`` (the closest; exact ties go to the
    first in the list), with any others that match named in ``also``; None when no slip explains it.

    A slip counts only if its value differs from the right value by more than the tolerance: a slip that
    changes nothing here (no capacitors, a real value conjugated) cannot be the explanation.
    """
    true_value = quantity_value(true_eq, quantity)[0]
    matches: list[tuple[float, int, _Candidate]] = []
    for order, cand in enumerate(_candidates(network, port, quantity, true_eq, sources)):
        if cand.value is None or not all(map(math.isfinite, (cand.value.real, cand.value.imag))):
            continue
        if true_value is not None and deviation(cand.value, true_value, tolerance).within:
            continue  # indistinguishable from the right value at this precision
        d = deviation(stated, cand.value, tolerance)
        if d.within:
            matches.append((round(d.score, 6), order, cand))
    if not matches:
        return None
    matches.sort(key=lambda m: (m[0], m[1]))
    score, _, best = matches[0]
    assert best.value is not None  # candidates without a value were skipped above
    others = tuple(dict.fromkeys(m[2].name for m in matches[1:] if m[2].name != best.name))
    sentence = best.sentence(format_value(quantity, best.value))
    if others:
        sentence += f" (also consistent with: {', '.join(others)})"
    return Slip(best.name, sentence, best.value, score, others)
