"""Hand-calculated values against crosscheck's own solver, judged to the precision they were worked to.

A hand calculation carried to three significant figures is good to about 1 % in
magnitude and 0.5° in phase (common practice), so when the expectation's
tolerance has ``phase_deg`` the magnitude and the phase are judged separately;
without it the complex relative error |q − q_own| / |q_own| is held to ``rel``.
A failing value says how far off it is (%, dB, degrees) and, where one of the
usual slips reproduces the stated number, names that slip (see ``slips``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence

from crosscheck.model.cases import Case, Expectation
from crosscheck.judge.compare import magnitude_error_pct, phase_difference_deg
from crosscheck.own.equivalent import Equivalent
from crosscheck.errors import CrosscheckError
from crosscheck.judge.records import ExpectationCheck
from crosscheck.model.network import Network, Port
from crosscheck.model.tolerance import Tolerance
from crosscheck.model.values import format_eng, format_polar, format_rect

PHASORS = ("vth", "zth", "in", "yn")
SERIES = ("series_r", "series_l", "series_c")
UNITS = {"vth": "V", "zth": "Ω", "in": "A", "yn": "S", "series_r": "Ω", "series_l": "H", "series_c": "F"}
NAMES = {"vth": "V_th", "zth": "Z_th", "in": "I_N", "yn": "Y_N", "series_r": "series R", "series_l": "series L",
         "series_c": "series C"}

#: Relative closeness of a stated frequency to a computed one for them to count as the same point.
SAME_FREQUENCY = 1e-9


@dataclass(frozen=True)
class Deviation:
    """How a stated value differs from a reference value, and how many tolerances that is."""

    rel_err: float        # |stated − reference| / |reference|
    mag_err_pct: float    # (|stated| − |reference|) / |reference| · 100
    mag_err_db: float     # 20·log10(|stated| / |reference|)
    phase_err_deg: float  # ∠stated − ∠reference, wrapped to (−180, 180]
    score: float          # <= 1 means within tolerance

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
    rel = 0.0 if delta == 0 else (delta / abs(reference) if reference != 0 else math.inf)
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
        value = {"vth": eq.vth, "zth": eq.zth, "in": eq.in_, "yn": eq.yn}[quantity]
        return value, "" if value is not None else (eq.note or f"there is no {NAMES[quantity]} at this port")
    if eq.zth is None:
        return None, eq.note or "there is no Z_th at this port, so no series form"
    r, x = eq.zth.real, eq.zth.imag
    if quantity == "series_r":
        return complex(r), ""
    if eq.freq_hz == 0:
        return None, "at DC a series L or C has no meaning (Z_th is a resistance)"
    if quantity == "series_l":
        note = "" if x >= 0 else (f"Z_th is capacitive here (X = {format_eng(x, 4, ' Ω')}), so its series form is "
                                  "R + C; as an inductance it is negative")
        return complex(x / eq.omega), note
    if x == 0:
        return None, "Z_th is purely resistive here: there is no series C"
    note = "" if x < 0 else (f"Z_th is inductive here (X = {format_eng(x, 4, ' Ω')}), so its series form is R + L; "
                             "as a capacitance it is negative")
    return complex(-1.0 / (eq.omega * x)), note


def format_value(quantity: str, value: complex | None) -> str:
    """Phasor sources in polar form, impedances and admittances in rectangular form, reals plain."""
    if value is None:
        return "—"
    unit = UNITS[quantity]
    if quantity in ("vth", "in"):
        return format_polar(value, 4, f" {unit}")
    if quantity in ("zth", "yn"):
        return format_rect(value, 4, unit)
    return format_eng(value.real, 4, f" {unit}")


def _signed(x: float) -> str:
    """Three significant figures with a sign; below 0.001 (of %, dB or °) it is shown as 0."""
    return "0" if abs(x) < 1e-3 else f"{x:+.3g}"


def format_tolerance(tol: Tolerance) -> str:
    text = f"{100 * tol.rel:.3g} %" + (f" and {tol.phase_deg:.3g}°" if tol.phase_deg is not None else " (complex)")
    return text + (f", or within {tol.abs:.3g} absolute" if tol.abs else "")


def closest(own: Sequence[Equivalent], freq_hz: float) -> Equivalent | None:
    """The computed point at ``freq_hz`` (to 1e-9 relative), or None."""
    if not own:
        return None
    best = min(own, key=lambda eq: abs(eq.freq_hz - freq_hz))
    return best if math.isclose(best.freq_hz, freq_hz, rel_tol=SAME_FREQUENCY, abs_tol=1e-12) else None


def check_expectations(case: Case, own_equivalents: Sequence[Equivalent],
                       network: Network | None = None) -> list[ExpectationCheck]:
    """Every stated value of every [[expect]] table against the own solver, one record per value.

    ``network`` (the case's parsed network) lets a failing value be explained by a slip; when it is not
    given it is read from the case, and without it no slip is named.
    """
    checks: list[ExpectationCheck] = []
    port = Port(*case.port)
    for expectation in case.expectations:
        eq = closest(own_equivalents, expectation.at_hz)
        for quantity, stated in expectation.values.items():
            checks.append(_check_one(case, expectation, quantity, stated, eq, port, network))
    return checks


def _check_one(case: Case, expectation: Expectation, quantity: str, stated: complex, eq: Equivalent | None,
               port: Port, network: Network | None) -> ExpectationCheck:
    tol = expectation.tolerance
    at = format_eng(expectation.at_hz, 4, " Hz")
    label = f"{NAMES[quantity]} at {at}"
    nan = math.nan
    if eq is None:
        return ExpectationCheck(expectation.index, expectation.at_hz, quantity, stated, None, nan, nan, nan, nan,
                                "unavailable", None,
                                f"{label}: crosscheck computed no point at this frequency; add it to the case's "
                                "frequencies", expectation.how)
    obtained, why_none = quantity_value(eq, quantity)
    if obtained is None:
        verdict = "unavailable" if quantity in SERIES and eq.freq_hz == 0 else "fail"
        text = (f"{label}: the hand value {format_value(quantity, stated)} cannot be checked: {why_none}"
                if verdict == "unavailable" else
                f"{label}: stated {format_value(quantity, stated)}, but crosscheck finds none: {why_none}")
        return ExpectationCheck(expectation.index, expectation.at_hz, quantity, stated, None, nan, nan, nan, nan,
                                verdict, None, text, expectation.how)
    d = deviation(stated, obtained, tol)
    if d.within:
        return ExpectationCheck(expectation.index, expectation.at_hz, quantity, stated, obtained, d.rel_err,
                                d.mag_err_pct, d.mag_err_db, d.phase_err_deg, "pass", None, "", expectation.how)
    text = (f"{label}: stated {format_value(quantity, stated)}, crosscheck {format_value(quantity, obtained)}: "
            f"off by {_signed(d.mag_err_pct)} % ({_signed(d.mag_err_db)} dB) in magnitude and "
            f"{_signed(d.phase_err_deg)}° in phase (tolerance {format_tolerance(tol)})")
    if why_none:
        text += f". Note: {why_none}"
    slip_name = None
    found = _diagnose(case, network, port, quantity, stated, eq, tol)
    if found is not None:
        slip_name = found.name
        text += f". Likely slip: {found.name}: {found.sentence}"
    else:
        text += ". None of the usual slips reproduces the stated value; recheck the working step by step"
    return ExpectationCheck(expectation.index, expectation.at_hz, quantity, stated, obtained, d.rel_err,
                            d.mag_err_pct, d.mag_err_db, d.phase_err_deg, "fail", slip_name, text, expectation.how)


def _diagnose(case: Case, network: Network | None, port: Port, quantity: str, stated: complex, eq: Equivalent,
              tol: Tolerance):
    from crosscheck.judge.slips import diagnose  # late import: slips judge with this module's tolerance model

    if network is None:
        try:
            from crosscheck.model.netlist import read_netlist

            network = read_netlist(case.netlist_text, file=case.netlist_file, allow_negative=case.allow_negative,
                                   port=port)
        except CrosscheckError:
            return None
    return diagnose(network, port, quantity, stated, eq, tol, case.sources)


class ExpectOptionError(CrosscheckError, ValueError):
    """An ``--expect`` option on the command line cannot be read; the message shows the accepted form."""


_EXPECT_FORM = ("write QUANTITY=VALUE or QUANTITY@FREQ=VALUE, e.g. vth=57.34∠-55°, vth@1k=57.34@-55 or "
                "\"zth=4.7 - j6.7\"; quantities: " + ", ".join(PHASORS + SERIES))


def expectations_from_options(texts: Sequence[str], freqs_hz: Sequence[float],
                              tolerance: Tolerance) -> tuple[Expectation, ...]:
    """``--expect`` options as expectations, one per frequency. Without ``@FREQ`` the value applies at the
    only ``--freq`` given; with several frequencies each value must say which one it is for."""
    from crosscheck.model.values import parse_number, parse_phasor

    by_freq: dict[float, dict[str, complex]] = {}
    for text in texts:
        left, sep, right = text.partition("=")
        if not sep or not right.strip():
            raise ExpectOptionError(f"--expect {text!r}: no value; {_EXPECT_FORM}")
        quantity, at_sep, at_text = left.strip().lower().partition("@")
        if quantity not in PHASORS + SERIES:
            raise ExpectOptionError(f"--expect {text!r}: unknown quantity {quantity!r}; {_EXPECT_FORM}")
        try:
            if at_sep:
                at = parse_number(at_text.strip())
            elif len(freqs_hz) == 1:
                at = float(freqs_hz[0])
            else:
                raise ExpectOptionError(f"--expect {text!r} does not say at which of the {len(freqs_hz)} frequencies "
                                        f"it holds; write {quantity}@FREQ=VALUE, or give a single --freq")
            value = parse_phasor(right) if quantity in PHASORS else complex(parse_number(right.strip()))
        except ExpectOptionError:
            raise
        except CrosscheckError as exc:
            raise ExpectOptionError(f"--expect {text!r}: {exc}") from None
        if not (math.isfinite(at) and at >= 0) or not all(map(math.isfinite, (value.real, value.imag))):
            raise ExpectOptionError(f"--expect {text!r}: the frequency and value must be finite (frequency >= 0)")
        slot = next((f for f in by_freq if math.isclose(f, at, rel_tol=SAME_FREQUENCY)), at)
        values = by_freq.setdefault(slot, {})
        if quantity in values:
            raise ExpectOptionError(f"--expect {text!r}: {quantity} is already stated at {format_eng(at, 4, ' Hz')}; "
                                    "give each quantity once per frequency")
        values[quantity] = value
    return tuple(Expectation(at, values, tolerance, "--expect on the command line", i)
                 for i, (at, values) in enumerate(by_freq.items(), start=1))
