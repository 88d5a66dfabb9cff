"""Judge the reading check: ngspice's reading of the user's own lines against the own route's V_th.

Both routes solve the model the reader made, so only this check can see a misreading: ngspice ran the
user's accepted lines as written (``spice.reading``) and its V(a) − V(b) is held against the own route's
V_th with the case's tolerance and the same rule as the route comparison (``compare.compare_quantity``).
A difference is its own verdict (fail, ``Cause.READING_DIFFERS``), whose explanation names the elements
whose values ngspice reads otherwise than the model (the worker compared them while the deck was loaded).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import TYPE_CHECKING

from crosscheck.judge.compare import compare_quantity
from crosscheck.judge.records import ROUNDOFF_CAUSES, Cause, QuantityCheck, ReadingCheck
from crosscheck.model.tolerance import Tolerance
from crosscheck.model.values import format_eng
from crosscheck.own.equivalent import Equivalent
from crosscheck.vocabulary import Verdict

if TYPE_CHECKING:  # start-up time: the reading check's deck writer loads only where ngspice runs
    from crosscheck.spice.reading import ElementDifference, ReadingAnswer

REF_NAME = "ngspice reading the netlist's own lines"
_UNITS = {"resistance": " Ω", "capacitance": " F", "inductance": " H"}
#: At most this many differing elements are named in the explanation.
MAX_NAMED = 5


def judge_reading(answer: ReadingAnswer | None, own: Sequence[Equivalent], tol: Tolerance) -> ReadingCheck | None:
    """The reading check's record; None when there is no reading (a network not read from text)."""
    if answer is None:
        return None
    if answer.refused:
        return ReadingCheck(Verdict.ERROR, math.nan, None, answer.refused, Cause.READING_UNSAFE)
    if answer.failure:
        return ReadingCheck(Verdict.FAIL, math.nan, None, answer.failure, Cause.READING_REFUSED, answer.failure_line)
    if answer.missing_nodes:
        nodes = ", ".join(map(repr, answer.missing_nodes))
        text = f"ngspice reads this netlist differently from crosscheck: the port node {nodes} is not a node of its reading"
        return ReadingCheck(Verdict.FAIL, math.nan, None, text, Cause.READING_DIFFERS)
    checks = [
        (eq.freq_hz, compare_quantity("vth", eq.vth, v, tol, eq.condition, eq.vth_scale, ref_name=REF_NAME))
        for eq, v in zip(own, answer.vth)
        if eq.vth is not None and v is not None
    ]
    if not checks:
        why = "; ".join(answer.notes) or "ngspice's reading of the netlist gave no V(a) − V(b) at any frequency"
        return ReadingCheck(Verdict.UNAVAILABLE, math.nan, None, why, Cause.REFERENCE_ABSENT)
    freq, worst = max(checks, key=lambda c: (c[1].verdict != Verdict.PASS, c[1].err))
    if worst.verdict == Verdict.PASS:
        return ReadingCheck(Verdict.PASS, worst.err, freq, worst.explanation, worst.cause, compared=len(checks))
    if worst.cause in ROUNDOFF_CAUSES:
        text = f"the reading check at {format_eng(freq, unit=' Hz')}: {worst.explanation}"
        return ReadingCheck(Verdict.FAIL, worst.err, freq, text, worst.cause, compared=len(checks))
    return _misreading(answer, worst, freq, tol, len(checks))


def _misreading(
    answer: ReadingAnswer, worst: QuantityCheck, freq: float, tol: Tolerance, compared: int
) -> ReadingCheck:
    """The failing record: where ngspice's reading parts from the model, and which elements say so."""
    size = (
        f"V(a) − V(b) differs by {worst.err:.3g} relative at {format_eng(freq, unit=' Hz')} "
        f"(tolerance {tol.rel:.3g}; magnitude {worst.mag_err_pct:+.3g} %, phase {worst.phase_err_deg:+.3g}°)"
    )
    if not answer.values_read:
        text = (
            f"the own route's V_th differs from {REF_NAME}: {size}. ngspice's run of the model's deck agrees with "
            "its reading of the lines, so the difference lies between the solvers, not in the reading (see the points)"
        )
        return ReadingCheck(Verdict.FAIL, worst.err, freq, text, Cause.MODEL_DIFFERENCE, compared=compared)
    differences = answer.differences
    if not differences:
        text = (
            f"ngspice reads this netlist differently from crosscheck at a line not identified: {size}. Every "
            "element value ngspice reports matches the model's, so the difference is in how the lines connect "
            "(nodes, subcircuits) or in a parameter that is not compared"
        )
        return ReadingCheck(Verdict.FAIL, worst.err, freq, text, Cause.READING_DIFFERS, compared=compared)
    first = differences[0]
    line = f"line {first.line}" if first.line is not None else f"the card of {first.name}"
    named = "; ".join(_difference(d) for d in differences[:MAX_NAMED])
    more = f"; and {len(differences) - MAX_NAMED} more" if len(differences) > MAX_NAMED else ""
    text = f"ngspice reads this netlist differently from crosscheck at {line}: {named}{more}. {size}"
    return ReadingCheck(
        Verdict.FAIL,
        worst.err,
        freq,
        text,
        Cause.READING_DIFFERS,
        line="" if first.line is None else str(first.line),
        elements=tuple(d.name for d in differences),
        compared=compared,
    )


def _difference(d: ElementDifference) -> str:
    """One element in words: "r1 (line 3): resistance 1 kΩ in ngspice, 2 kΩ in crosscheck's model"."""
    where = f" (line {d.line})" if d.line is not None else ""
    if d.quantity == "ac phasor":
        theirs, ours = _phasor(d.ngspice), _phasor(d.model)
    else:
        unit = _UNITS.get(d.quantity, "")
        theirs, ours = format_eng(d.ngspice.real, 6, unit), format_eng(d.model.real, 6, unit)
    return f"{d.name}{where}: {d.quantity} {theirs} in ngspice, {ours} in crosscheck's model"


def _phasor(z: complex) -> str:
    return f"{format_eng(abs(z), 6)} ∠ {math.degrees(math.atan2(z.imag, z.real)):.6g}°"
