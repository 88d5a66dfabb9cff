"""A multi-port case in JSON: per frequency the ``own`` and ``spice`` objects (``voc`` a vector, ``z`` a matrix
as nested lists of ``{re, im}``, ``isc`` and ``y`` where they exist) and a verdict per element.

Sign conventions are those of ``model.port_matrices``; the document says them in ``conventions`` so that a
reader without crosscheck's source can use the numbers.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from crosscheck.judge.multiport import MatrixPointCheck, MultiportResult
from crosscheck.model.port_matrices import MatrixPoint
from crosscheck.vocabulary import phasor_json

CONVENTIONS = (
    "V[k] = V(a_k) - V(b_k); I[k] flows into the network at a_k; V = voc + Z I (open-circuit impedance "
    "matrix, sources zeroed); isc[k] flows out of a_k through a short with every port shorted; I = Y V - isc, "
    "Y = inv(Z)"
)


def _num(x: float | None) -> Any:
    return None if x is None or math.isnan(x) else (x if math.isfinite(x) else repr(x))


def vector_json(v: np.ndarray | None) -> list[Any] | None:
    """A vector as a list of ``{re, im}`` (null entries where a value is missing), or null."""
    if v is None:
        return None
    return [None if cmath_isnan(x) else phasor_json(complex(x)) for x in v]


def cmath_isnan(x: complex) -> bool:
    return math.isnan(x.real) or math.isnan(x.imag)


def matrix_json(m: np.ndarray | None) -> list[list[Any]] | None:
    """A matrix as nested lists (rows) of ``{re, im}``, or null."""
    if m is None:
        return None
    return [[phasor_json(complex(x)) for x in row] for row in m]


def point_json(p: MatrixPoint) -> dict[str, Any]:
    """One route's point: the vectors and matrices, and the figures that go with them."""
    voc_missing = bool(np.all(np.isnan(p.voc.real)))
    return {
        "voc": None if voc_missing else vector_json(p.voc),
        "z": matrix_json(p.z),
        "isc": vector_json(p.isc),
        "y": matrix_json(p.y),
        "condition": _num(p.condition),
        "z_condition": _num(p.z_condition),
        "reciprocity": _num(p.reciprocity),
        "notes": list(p.notes) or None,
    }


def _check_json(check: MatrixPointCheck) -> dict[str, Any]:
    return {
        "verdict": check.verdict,
        "z_norm_error": _num(check.z_norm_error),
        "explanation": check.explanation or None,
        "elements": {
            q.quantity: {
                "verdict": q.verdict,
                "err": _num(q.err),
                "rel_err": _num(q.rel_err),
                "cause": q.cause,
                "explanation": q.explanation or None,
            }
            for q in check.quantities
        },
    }


def multiport_document(part: MultiportResult) -> dict[str, Any]:
    """The ``multiport`` object of a case (and the body of ``reduce --format json`` with several ports)."""
    points = []
    for i, own in enumerate(part.own):
        doc: dict[str, Any] = {"freq_hz": own.freq_hz, "own": point_json(own)}
        if part.spice is not None:
            doc["spice"] = point_json(part.spice[i])
        elif part.checks or part.spice_note:
            doc["spice"] = None
            doc["spice_note"] = part.spice_note or "ngspice was not run"
        if part.checks:
            doc.update(_check_json(part.checks[i]))
        points.append(doc)
    return {
        "ports": [{"name": n, "a": a, "b": b} for n, (a, b) in zip(part.port_names, part.port_nodes, strict=True)],
        "conventions": CONVENTIONS,
        "points": points,
    }
