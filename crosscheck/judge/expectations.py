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
from crosscheck.judge.stated import deviation, format_value, quantity_value, signed
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
    tol = expectation.tolerance
    at = format_eng(expectation.at_hz, 4, " Hz")
    label = f"{quantity_name(quantity)} at {at}"
    nan = math.nan
    if eq is None:
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
            Verdict.UNAVAILABLE,
            None,
            f"{label}: crosscheck computed no point at this frequency; add it to the case's frequencies",
            expectation.how,
            Cause.NO_VALUE,
        )
    obtained, why_none = quantity_value(eq, quantity)
    if obtained is None:
        verdict = Verdict.UNAVAILABLE if quantity in SERIES and eq.freq_hz == 0 else Verdict.FAIL
        text = (
            f"{label}: the hand value {format_value(quantity, stated)} cannot be checked: {why_none}"
            if verdict == Verdict.UNAVAILABLE
            else f"{label}: stated {format_value(quantity, stated)}, but crosscheck finds none: {why_none}"
        )
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
    d = deviation(stated, obtained, tol)
    if d.within:
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
            Verdict.PASS,
            None,
            "",
            expectation.how,
        )
    text = (
        f"{label}: stated {format_value(quantity, stated)}, crosscheck {format_value(quantity, obtained)}: "
        f"off by {signed(d.mag_err_pct)} % ({signed(d.mag_err_db)} dB) in magnitude and "
        f"{signed(d.phase_err_deg)}° in phase (tolerance {format_tolerance(tol)})"
    )
    if why_none:
        text += f". Note: {why_none}"
    slip_name = None
    found = _diagnose(case, network, port, quantity, stated, eq, tol)
    if found is not None:
        slip_name = found.name
        text += f". Likely slip: {found.name}: {found.sentence}"
    else:
        text += ". None of the usual slips reproduces the stated value; recheck the working step by step"
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
        Verdict.FAIL,
        slip_name,
        text,
        expectation.how,
        Cause.SLIP if found is not None else Cause.OUT_OF_TOLERANCE,
    )


def _diagnose(
    case: Case, network: Network | None, port: Port, quantity: str, stated: complex, eq: Equivalent, tol: Tolerance
) -> Slip | None:
    """The usual slip that reproduces the stated value, if one does (the network is read again if needed)."""
    if network is None:
        try:
            network = read_netlist(
                case.netlist_text, file=case.netlist_file, allow_negative=case.allow_negative, port=port
            )
        except CrosscheckError:
            return None
    return diagnose(network, port, quantity, stated, eq, tol, case.sources)
