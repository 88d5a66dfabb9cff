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
from collections.abc import Sequence

from crosscheck.errors import CrosscheckError
from crosscheck.judge.records import Cause, ExpectationCheck
from crosscheck.judge.slips import Slip, diagnose
from crosscheck.judge.stated import Deviation, deviation, format_value, quantity_value, signed
from crosscheck.model.cases import Case, Expectation
from crosscheck.model.expect_option import SERIES
from crosscheck.model.netlist import read_netlist
from crosscheck.model.network import Network, Port
from crosscheck.model.tolerance import Tolerance
from crosscheck.model.values import format_eng
from crosscheck.own.equivalent import Equivalent
from crosscheck.vocabulary import Verdict, quantity_name, same_frequency


def format_tolerance(tol: Tolerance) -> str:
    text = f"{100 * tol.rel:.3g} %" + (f" and {tol.phase_deg:.3g}°" if tol.phase_deg is not None else " (complex)")
    return text + (f", or within {tol.abs:.3g} absolute" if tol.abs else "")


def closest(own: Sequence[Equivalent], freq_hz: float) -> Equivalent | None:
    """The computed point at ``freq_hz`` (the same frequency, ``vocabulary.same_frequency``), or None."""
    if not own:
        return None
    best = min(own, key=lambda eq: abs(eq.freq_hz - freq_hz))
    return best if same_frequency(best.freq_hz, freq_hz) else None


def check_expectations(
    case: Case, own_equivalents: Sequence[Equivalent], network: Network | None = None
) -> list[ExpectationCheck]:
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


def _check_one(
    case: Case,
    expectation: Expectation,
    quantity: str,
    stated: complex,
    eq: Equivalent | None,
    port: Port,
    network: Network | None,
) -> ExpectationCheck:
    """One stated value against the own solver's point: no point, no value, within tolerance, or a failure."""
    label = f"{quantity_name(quantity)} at {format_eng(expectation.at_hz, 4, ' Hz')}"
    if eq is None:
        text = f"{label}: crosscheck computed no point at this frequency; add it to the case's frequencies"
        return _without_value(expectation, quantity, stated, Verdict.UNAVAILABLE, text)
    obtained, why_none = quantity_value(eq, quantity)
    if obtained is None:
        return _value_missing(expectation, quantity, stated, eq, label, why_none)
    d = deviation(stated, obtained, expectation.tolerance)
    if d.within:
        return _with_value(expectation, quantity, stated, obtained, d, Verdict.PASS)
    found = _diagnose(case, network, port, quantity, stated, eq, expectation.tolerance)
    text = _failure_text(label, quantity, stated, obtained, d, expectation.tolerance, why_none) + _slip_text(found)
    slip_name = found.name if found is not None else None
    cause = Cause.SLIP if found is not None else Cause.OUT_OF_TOLERANCE
    return _with_value(expectation, quantity, stated, obtained, d, Verdict.FAIL, slip_name, text, cause)


def _value_missing(
    expectation: Expectation, quantity: str, stated: complex, eq: Equivalent, label: str, why_none: str
) -> ExpectationCheck:
    """The quantity does not exist at this point: a failure, except a series form at DC, which cannot be checked.

    At 0 Hz a series L or C has no meaning, so the hand value there is not wrong, only uncheckable;
    anywhere else a stated value where the solver finds none is a real disagreement.
    """
    if quantity in SERIES and eq.freq_hz == 0:
        text = f"{label}: the hand value {format_value(quantity, stated)} cannot be checked: {why_none}"
        return _without_value(expectation, quantity, stated, Verdict.UNAVAILABLE, text)
    text = f"{label}: stated {format_value(quantity, stated)}, but crosscheck finds none: {why_none}"
    return _without_value(expectation, quantity, stated, Verdict.FAIL, text)


def _failure_text(
    label: str,
    quantity: str,
    stated: complex,
    obtained: complex,
    d: Deviation,
    tol: Tolerance,
    why_none: str,
) -> str:
    """How far the stated value is off (%, dB, degrees) against the tolerance, with the solver's note if any."""
    text = (
        f"{label}: stated {format_value(quantity, stated)}, crosscheck {format_value(quantity, obtained)}: "
        f"off by {signed(d.mag_err_pct)} % ({signed(d.mag_err_db)} dB) in magnitude and "
        f"{signed(d.phase_err_deg)}° in phase (tolerance {format_tolerance(tol)})"
    )
    return text + (f". Note: {why_none}" if why_none else "")


def _slip_text(found: Slip | None) -> str:
    """The end of a failure's text: the slip that reproduces the stated value, or where to look instead."""
    if found is not None:
        return f". Likely slip: {found.name}: {found.sentence}"
    return ". None of the usual slips reproduces the stated value; recheck the working step by step"


def _without_value(
    expectation: Expectation, quantity: str, stated: complex, verdict: Verdict, text: str
) -> ExpectationCheck:
    """The record of a value that could not be compared: no obtained value, every error NaN."""
    nan = math.nan
    return ExpectationCheck(
        expectation.index,
        expectation.at_hz,
        quantity,
        stated,
        None,
        nan,
        nan,
        nan,
        nan,
        verdict,
        None,
        text,
        expectation.how,
        Cause.NO_VALUE,
    )


def _with_value(
    expectation: Expectation,
    quantity: str,
    stated: complex,
    obtained: complex,
    d: Deviation,
    verdict: Verdict,
    slip: str | None = None,
    text: str = "",
    cause: Cause = Cause.AGREES,
) -> ExpectationCheck:
    """The record of a compared value, with its errors; a pass has no text and the default cause."""
    return ExpectationCheck(
        expectation.index,
        expectation.at_hz,
        quantity,
        stated,
        obtained,
        d.rel_err,
        d.mag_err_pct,
        d.mag_err_db,
        d.phase_err_deg,
        verdict,
        slip,
        text,
        expectation.how,
        cause,
    )


def _diagnose(
    case: Case, network: Network | None, port: Port, quantity: str, stated: complex, eq: Equivalent, tol: Tolerance
) -> Slip | None:
    """The usual slip that reproduces the stated value, if one does (the network is read again if needed)."""
    if network is None:
        try:
            network = read_netlist(
                case.netlist_text,
                file=case.netlist_file,
                allow_negative=case.allow_negative,
                port=port,
                limits=case.read_limits,
            )
        except CrosscheckError:
            return None
    return diagnose(network, port, quantity, stated, eq, tol, case.sources)
