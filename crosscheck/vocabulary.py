"""The one vocabulary every stage speaks: quantities and their units, verdicts and their ranking,
relative error, and when two frequencies are the same.

It sits at the bottom of the import map beside ``errors``, so the model, both engines, the judge,
the fuzzer and every report import these names instead of spelling them again.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass
from enum import StrEnum
from typing import Any, Protocol


@dataclass(frozen=True)
class Quantity:
    """A quantity a case can state or compare: its key in files and JSON, its printed name, its unit."""

    key: str
    name: str
    unit: str
    phasor: bool = True


#: Everything a case file, an expectation, a limit or a report may name, in the order reports list them.
QUANTITIES: dict[str, Quantity] = {
    q.key: q
    for q in (
        Quantity("vth", "V_th", "V"),
        Quantity("zth", "Z_th", "Ω"),
        Quantity("in", "I_N", "A"),
        Quantity("yn", "Y_N", "S"),
        Quantity("series_r", "series R", "Ω", phasor=False),
        Quantity("series_l", "series L", "H", phasor=False),
        Quantity("series_c", "series C", "F", phasor=False),
    )
}
#: The phasor quantities of an equivalent.
PHASORS = ("vth", "zth", "in", "yn")
#: What the two engines are compared on (Y_N = 1/Z_th adds nothing that Z_th does not already test).
COMPARED = ("vth", "zth", "in")

_ATTRIBUTE = {"vth": "vth", "zth": "zth", "in": "in_", "yn": "yn"}


class _HasPhasors(Protocol):
    @property
    def vth(self) -> complex | None: ...
    @property
    def zth(self) -> complex | None: ...
    @property
    def in_(self) -> complex | None: ...


def quantity_unit(quantity: str) -> str:
    """The SI unit of a quantity key ("vth" -> "V")."""
    return QUANTITIES[quantity].unit


def quantity_name(quantity: str) -> str:
    """The printed name of a quantity key ("vth" -> "V_th")."""
    return QUANTITIES[quantity].name


def phasor_of(answer: _HasPhasors, quantity: str) -> complex | None:
    """One phasor quantity of an engine's answer at one frequency (None where the form does not exist)."""
    value: complex | None = getattr(answer, _ATTRIBUTE[quantity])
    return value


class Verdict(StrEnum):
    """A judgement's outcome. Declared from mildest to worst: a case takes the worst of its parts.

    ``drift`` is a result that moved from a stored baseline: worse than a missing quantity, milder
    than a failure.
    """

    PASS = "pass"
    UNAVAILABLE = "unavailable"
    DRIFT = "drift"
    FAIL = "fail"
    ERROR = "error"

    @property
    def rank(self) -> int:
        return _RANK[self]


_RANK = {v: i for i, v in enumerate(Verdict)}


def worst(verdicts: Iterable[str]) -> Verdict:
    """The most severe of the verdicts (``pass`` when there are none)."""
    ranked = [Verdict(v) for v in verdicts]
    return max(ranked, key=_RANK.__getitem__) if ranked else Verdict.PASS


def relative_error(value: complex, reference: complex, floor: float = 0.0) -> float:
    """|value − reference| / max(|reference|, floor): 0 when equal, inf when the denominator is 0."""
    delta = abs(value - reference)
    if delta == 0:
        return 0.0
    denominator = max(abs(reference), floor)
    return delta / denominator if denominator > 0 else math.inf


def phasor_json(z: complex | None) -> dict[str, Any] | None:
    """A phasor in every JSON file crosscheck writes: ``{"re": …, "im": …}`` at full double precision, or
    null. JSON has no inf or nan, so a non-finite part is written in words (``"inf"``, ``"nan"``)."""
    if z is None:
        return None
    return {"re": _finite(z.real), "im": _finite(z.imag)}


def _finite(x: float) -> float | str:
    return x if math.isfinite(x) else repr(x)


#: Two frequencies within this relative distance are the same frequency. A frequency travels as a
#: double through case files, ngspice's printed sweep and baselines; 1e-9 is far above the rounding
#: those add (~1e-15) and far below any spacing a sweep uses (a million points a decade is 2.3e-6).
FREQUENCY_REL = 1e-9


def same_frequency(a: float, b: float) -> bool:
    """Whether two frequencies are the same point (0 Hz matches only 0 Hz)."""
    return a == b or math.isclose(a, b, rel_tol=FREQUENCY_REL, abs_tol=0.0)
