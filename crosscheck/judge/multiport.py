"""Judging a multi-port case: own matrices against ngspice's element by element, hand values, limits.

Each element (``voc<k>``, ``z<i><j>``, ``isc<k>``, ``y<i><j>``) is held to the case's tolerance by
``judge.compare.compare_quantity`` with the one-port quantity of the same kind (Z elements as Z_th, voc as
V_th, isc as I_N, Y as Y_N: the same rule, the same roundoff floor from the own route's condition estimate
and the largest entry of the vector or matrix the element was read from), so the verdicts and causes are
the usual ones. A normwise figure per frequency, ``||Z_own - Z_spice||_F / ||Z_spice||_F``, is reported
beside them (it does not judge: the elements do).

Mode quantities (trade terms, common practice): a two-port differential pair's ``zdiff = z11 - z12 - z21 +
z22`` and ``zcomm = (z11 + z12 + z21 + z22) / 4``; three ports' sequence impedances ``z0``, ``z1``, ``z2``,
the diagonal of the Fortescue transform ``A^-1 Z A`` with ``A = [[1, 1, 1], [1, a^2, a], [1, a, a^2]]``,
``a = exp(j 2 pi / 3)`` (for a balanced line Z1 = Z2 = Zs - Zm, Z0 = Zs + 2 Zm; IEC 60909 uses them).
"""

from __future__ import annotations

import cmath
import math
from collections.abc import Sequence
from dataclasses import dataclass, replace

import numpy as np

from crosscheck.judge.compare import compare_quantity
from crosscheck.judge.limits import evaluate, margin
from crosscheck.judge.records import Cause, ExpectationCheck, LimitCheck, QuantityCheck
from crosscheck.judge.stated import deviation
from crosscheck.model.port_matrices import MatrixPoint
from crosscheck.model.port_spec import MODE_QUANTITIES, MultiportSpec, quantity_index
from crosscheck.model.requirements import Expectation, Limit
from crosscheck.model.tolerance import Tolerance
from crosscheck.vocabulary import Verdict, quantity_unit, same_frequency, worst

#: The one-port quantity whose unit and rule each kind of element shares.
_KIND = {"voc": "vth", "z": "zth", "isc": "in", "y": "yn"}
_A = cmath.exp(2j * math.pi / 3)
FORTESCUE = np.array([[1, 1, 1], [1, _A**2, _A], [1, _A, _A**2]], dtype=complex)


@dataclass(frozen=True)
class MatrixPointCheck:
    """Every element at one frequency, own route against ngspice; the worst verdict and the normwise Z error."""

    freq_hz: float
    quantities: tuple[QuantityCheck, ...]  # one per element, named voc1, z21, isc1, y12... (``PointCheck``'s name)
    verdict: Verdict
    explanation: str
    condition: float  # the own route's condition estimate of the MNA matrix
    z_norm_error: float | None  # ||Z_own - Z_spice||_F / ||Z_spice||_F; None where either lacks Z


@dataclass(frozen=True)
class MultiportResult:
    """A multi-port case's answers and judgements (``CaseResult.multiport``)."""

    port_names: tuple[str, ...]
    port_nodes: tuple[tuple[str, str], ...]
    own: tuple[MatrixPoint, ...]
    spice: tuple[MatrixPoint, ...] | None = None
    spice_note: str = ""
    checks: tuple[MatrixPointCheck, ...] = ()
    expectations: tuple[ExpectationCheck, ...] = ()
    limits: tuple[LimitCheck, ...] = ()
    ngspice_version: str = ""

    @property
    def judgements(self) -> tuple[MatrixPointCheck | ExpectationCheck | LimitCheck, ...]:
        """Every judgement of this part of the case (each has a verdict and an explanation)."""
        return (*self.checks, *self.expectations, *self.limits)

    @property
    def verdicts(self) -> list[Verdict]:
        """Every verdict this part of the case contributes to ``case_verdict``."""
        return [j.verdict for j in self.judgements]


def element_unit(quantity: str) -> str:
    """The unit of a multi-port quantity (``voc1`` V, ``isc1`` A, ``z21`` and the mode impedances Ω, ``y12`` S),
    or "" for a name that is none."""
    kind = quantity.rstrip("0123456789_")
    if kind in _KIND:
        return quantity_unit(_KIND[kind])
    return quantity_unit("zth") if quantity in MODE_QUANTITIES else ""


def element_names(n: int, point: MatrixPoint | None = None) -> list[str]:
    """The element names of an n-port point in report order: voc, z, isc, y (rows then columns)."""
    cell = (lambda i, j: f"{i + 1}{j + 1}") if n < 10 else (lambda i, j: f"{i + 1}_{j + 1}")
    names = [f"voc{k + 1}" for k in range(n)] + [f"z{cell(i, j)}" for i in range(n) for j in range(n)]
    names += [f"isc{k + 1}" for k in range(n)] + [f"y{cell(i, j)}" for i in range(n) for j in range(n)]
    return names


def value_of(point: MatrixPoint, quantity: str) -> complex | None:
    """One quantity of a point (element or mode quantity), or None where the point has no such value."""
    n = point.ports
    found = quantity_index(quantity, n)
    if found is None:
        raise ValueError(f"{quantity!r} is not a quantity of a {n}-port point")
    kind, i, j = found
    if kind == "voc":
        v = point.voc[i]
        return None if cmath.isnan(v) else complex(v)
    if kind == "isc":
        return None if point.isc is None else complex(point.isc[i])
    if kind == "y":
        return None if point.y is None else complex(point.y[i, j])
    if point.z is None:
        return None
    z = point.z
    if kind == "z":
        return complex(z[i, j])
    if kind == "zdiff":
        return complex(z[0, 0] - z[0, 1] - z[1, 0] + z[1, 1])
    if kind == "zcomm":
        return complex((z[0, 0] + z[0, 1] + z[1, 0] + z[1, 1]) / 4)
    sequence = np.linalg.solve(FORTESCUE, z @ FORTESCUE)
    return complex(sequence[int(kind[1]), int(kind[1])])


def _largest(values: np.ndarray | None) -> float:
    if values is None:
        return 0.0
    return float(np.abs(values[np.isfinite(values)]).max(initial=0.0))


def _scale(point: MatrixPoint, kind: str) -> float:
    """The roundoff floor's scale of an element (``compare``'s rule): the largest entry of the solution it was
    read from (``MatrixPoint.scales``, at least the vector or matrix itself); isc = Y·voc and Y = inv(Z) carry
    both solutions' errors to first order, through ||Y||."""
    v_scale = max(point.scales[0], _largest(point.voc))
    z_scale = max(point.scales[1], _largest(point.z))
    if kind == "voc":
        return v_scale
    if kind == "z":
        return z_scale
    y_norm = float(np.linalg.norm(point.y, 1)) if point.y is not None else 0.0
    if kind == "isc":
        return _largest(point.isc) + y_norm * (v_scale + _largest(point.isc) * z_scale)
    return _largest(point.y) + y_norm**2 * z_scale


def compare_points(own: MatrixPoint, ref: MatrixPoint | None, tol: Tolerance, ref_note: str = "") -> MatrixPointCheck:
    """Own against ngspice at one frequency, element by element, with the normwise Z error."""
    n = own.ports
    checks = []
    for name in element_names(n):
        kind = name.rstrip("0123456789_")
        base = _KIND[kind]
        mine = value_of(own, name)
        theirs = value_of(ref, name) if ref is not None else None
        check = compare_quantity(
            base,
            mine,
            theirs,
            tol,
            own.condition if own.condition is not None else math.nan,
            _scale(own, kind),
            "; ".join(own.notes),
            ref_note if ref is None else "; ".join(ref.notes),
        )
        if ref is None and check.verdict == Verdict.UNAVAILABLE:
            check = replace(check, cause=Cause.REFERENCE_NOT_RUN)
        checks.append(replace(check, quantity=name, explanation=check.explanation.replace(base, name, 1)))
    z_error = None
    if ref is not None and own.z is not None and ref.z is not None:
        scale = float(np.linalg.norm(ref.z))
        z_error = float(np.linalg.norm(own.z - ref.z)) / scale if scale else float(np.linalg.norm(own.z))
    verdict = worst(c.verdict for c in checks)
    explanation = "; ".join(dict.fromkeys(c.explanation for c in checks if c.verdict == verdict and c.explanation))
    condition = own.condition if own.condition is not None else math.nan
    return MatrixPointCheck(own.freq_hz, tuple(checks), verdict, explanation[:2000], condition, z_error)


def _expectation(e: Expectation, quantity: str, expected: complex, point: MatrixPoint | None) -> ExpectationCheck:
    obtained = None if point is None else value_of(point, quantity)
    if obtained is None:
        why = "no frequency computed there" if point is None else ("; ".join(point.notes) or "no value here")
        return ExpectationCheck(
            e.index, e.at_hz, quantity, expected, None, math.nan, math.nan, math.nan, math.nan,
            Verdict.UNAVAILABLE, None, f"{quantity} has no value at {e.at_hz:g} Hz: {why}", e.how, Cause.NO_VALUE,
        )  # fmt: skip
    d = deviation(expected, obtained, e.tolerance)
    ok = d.within
    words = (
        f"{quantity} stated {expected:.4g}, computed {obtained:.4g} (relative {d.rel_err:.3g}, magnitude "
        f"{d.mag_err_pct:+.3g} %, phase {d.phase_err_deg:+.3g}°)"
    )
    return ExpectationCheck(
        e.index, e.at_hz, quantity, expected, obtained, d.rel_err, d.mag_err_pct, d.mag_err_db, d.phase_err_deg,
        Verdict.PASS if ok else Verdict.FAIL, None, "" if ok else words + ": outside the tolerance", e.how,
        Cause.AGREES if ok else Cause.OUT_OF_TOLERANCE,
    )  # fmt: skip


def check_expectations(spec: MultiportSpec, own: Sequence[MatrixPoint]) -> tuple[ExpectationCheck, ...]:
    """Each stated value against the own route at its frequency."""
    out = []
    for e in spec.expectations:
        point = next((p for p in own if same_frequency(p.freq_hz, e.at_hz)), None)
        out += [_expectation(e, q, v, point) for q, v in e.values.items()]
    return tuple(out)


def _limit(limit: Limit, own: Sequence[MatrixPoint]) -> LimitCheck:
    band = limit.band
    chosen = [p for p in own if band is None or band[0] <= p.freq_hz <= band[1]]
    values = [(p.freq_hz, value_of(p, limit.quantity)) for p in chosen]
    found = [(f, evaluate(limit.function, v)) for f, v in values if v is not None]
    head = (limit.index, limit.text, limit.function, limit.quantity, limit.minimum, limit.maximum, band)
    if not found or len(found) < len(values):
        why = "no computed frequency in its band" if not values else f"{limit.quantity} has no value at some frequency"
        return LimitCheck(
            *head, None, None, None, Verdict.UNAVAILABLE, f"{limit.text}: {why}", tuple(found), Cause.NO_VALUE
        )
    f_worst, v_worst = min(found, key=lambda fv: margin(fv[1], limit.minimum, limit.maximum))
    m = margin(v_worst, limit.minimum, limit.maximum)
    ok = m >= 0
    words = (
        "" if ok else f"{limit.text} = {v_worst:.4g} at {f_worst:g} Hz is outside [{limit.minimum}, {limit.maximum}]"
    )
    cause = Cause.LIMIT_HOLDS if ok else Cause.LIMIT_BROKEN
    return LimitCheck(*head, f_worst, v_worst, m, Verdict.PASS if ok else Verdict.FAIL, words, tuple(found), cause)


def judge_multiport(
    result: MultiportResult, spec: MultiportSpec | None, tol: Tolerance, *, compare: bool
) -> MultiportResult:
    """``result`` with its element checks (when ``compare``), hand values and limits."""
    checks: tuple[MatrixPointCheck, ...] = ()
    if compare:
        refs: Sequence[MatrixPoint | None] = result.spice if result.spice is not None else [None] * len(result.own)
        checks = tuple(compare_points(o, r, tol, result.spice_note) for o, r in zip(result.own, refs, strict=True))
    expectations = check_expectations(spec, result.own) if spec is not None else ()
    limits = tuple(_limit(x, result.own) for x in spec.limits) if spec is not None else ()
    return replace(result, checks=checks, expectations=expectations, limits=limits)
