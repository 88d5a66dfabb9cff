"""What a case states about its answers: hand-calculated values and design limits, one type each for one port
and for several (their quantity names differ, ``vth`` or ``z21``; their shape does not)."""

from __future__ import annotations

from dataclasses import dataclass

from crosscheck.model.tolerance import Tolerance


@dataclass(frozen=True)
class Expectation:
    """A hand-calculated value at one frequency, with the tolerance it was worked to."""

    at_hz: float
    values: dict[str, complex]  # one port: vth zth in yn, series_r/l/c; several: z11 voc1 ... (``port_spec``)
    tolerance: Tolerance
    how: str = ""
    index: int = 0


@dataclass(frozen=True)
class Limit:
    """A design requirement: ``function(quantity)`` within [min, max] over a band of frequencies."""

    function: str
    quantity: str
    minimum: float | None
    maximum: float | None
    band: tuple[float, float] | None
    text: str
    index: int = 0
    why: str = ""
