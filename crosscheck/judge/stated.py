"""A stated value against a computed one: the computed value of a quantity key, how far apart the two are
in the expectation's tolerance model, and how a value is printed. Shared by expectations and slips."""

from __future__ import annotations

import math
from dataclasses import dataclass

from crosscheck.judge.compare import magnitude_error_pct, phase_difference_deg
from crosscheck.model.tolerance import Tolerance
from crosscheck.model.values import format_eng, format_polar, format_rect
from crosscheck.own.equivalent import Equivalent
from crosscheck.vocabulary import PHASORS, phasor_of, quantity_name, quantity_unit, relative_error


@dataclass(frozen=True)
class Deviation:
    """How a stated value differs from a reference value, and how many tolerances that is."""

    rel_err: float  # |stated − reference| / |reference|
    mag_err_pct: float  # (|stated| − |reference|) / |reference| · 100
    mag_err_db: float  # 20·log10(|stated| / |reference|)
    phase_err_deg: float  # ∠stated − ∠reference, wrapped to (−180, 180]
    score: float  # <= 1 means within tolerance

    @property
    def within(self) -> bool:
        return self.score <= 1.0


def _ratio(x: float, limit: float) -> float:
    if x == 0:
        return 0.0
    return math.inf if limit == 0 else abs(x) / limit


def deviation(stated: complex, reference: complex, tol: Tolerance) -> Deviation:
    """The expectation's tolerance model: |Δ| <= tol.abs passes outright; otherwise magnitude (rel) and
    phase (phase_deg) separately when phase_deg is set, else the complex relative error against rel."""
    delta = abs(stated - reference)
    rel = relative_error(stated, reference)
    mag_pct = 0.0 if delta == 0 else magnitude_error_pct(stated, reference)
    if reference == 0:
        mag_pct = 0.0 if stated == 0 else math.inf
    if stated == 0 or reference == 0:
        mag_db = 0.0 if stated == reference else (math.inf if reference == 0 else -math.inf)
    else:
        mag_db = 20.0 * math.log10(abs(stated) / abs(reference))
    phase = phase_difference_deg(stated, reference)
    if delta <= tol.abs:
        score = 0.0
    elif tol.phase_deg is not None:
        score = max(_ratio(mag_pct / 100.0, tol.rel), _ratio(phase, tol.phase_deg))
    else:
        score = _ratio(rel, tol.rel)
    return Deviation(rel, mag_pct, mag_db, phase, score)


def quantity_value(eq: Equivalent, quantity: str) -> tuple[complex | None, str]:
    """The own value of one expectation key at one frequency, or None and why there is none.

    Series L and C are signed so that a hand value of the wrong kind still compares: on a capacitive
    Z_th, L = X/ω comes out negative (and C = −1/(ωX) likewise on an inductive one).
    """
    if quantity in PHASORS:
        value = phasor_of(eq, quantity)
        return value, "" if value is not None else (eq.note or f"there is no {quantity_name(quantity)} at this port")
    if eq.zth is None:
        return None, eq.note or "there is no Z_th at this port, so no series form"
    r, x = eq.zth.real, eq.zth.imag
    if quantity == "series_r":
        return complex(r), ""
    if eq.freq_hz == 0:
        return None, "at DC a series L or C has no meaning (Z_th is a resistance)"
    if quantity == "series_l":
        note = (
            ""
            if x >= 0
            else (
                f"Z_th is capacitive here (X = {format_eng(x, 4, ' Ω')}), so its series form is "
                "R + C; as an inductance it is negative"
            )
        )
        return complex(x / eq.omega), note
    if x == 0:
        return None, "Z_th is purely resistive here: there is no series C"
    note = (
        ""
        if x < 0
        else (
            f"Z_th is inductive here (X = {format_eng(x, 4, ' Ω')}), so its series form is R + L; "
            "as a capacitance it is negative"
        )
    )
    return complex(-1.0 / (eq.omega * x)), note


def format_value(quantity: str, value: complex | None) -> str:
    """Phasor sources in polar form, impedances and admittances in rectangular form, reals plain."""
    if value is None:
        return "—"
    u = quantity_unit(quantity)
    if quantity in ("vth", "in"):
        return format_polar(value, 4, f" {u}")
    if quantity in ("zth", "yn"):
        return format_rect(value, 4, u)
    return format_eng(value.real, 4, f" {u}")


def signed(x: float) -> str:
    """Three significant figures with a sign; below 0.001 (of %, dB or °) it is shown as 0."""
    return "0" if abs(x) < 1e-3 else f"{x:+.3g}"
