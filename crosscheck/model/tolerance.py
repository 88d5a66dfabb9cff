"""Tolerances as data, with the defaults and why they are what they are."""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Tolerance:
    """How close two answers must be.

    ``rel``: largest relative complex error |q − q_ref| / max(|q_ref|, scale, abs).
    ``abs``: an absolute floor in the quantity's own unit, below which differences do not count.
    ``phase_deg``: largest phase difference in degrees, or None to judge by ``rel`` alone.
    """

    rel: float
    abs: float = 0.0
    phase_deg: float | None = None

    def __post_init__(self) -> None:
        for name in ("rel", "abs"):
            value = getattr(self, name)
            if not (value >= 0 and value != float("inf")):
                raise ValueError(f"tolerance {name} must be a finite number >= 0 (got {value!r})")
        if self.phase_deg is not None and not (0 <= self.phase_deg <= 180):
            raise ValueError(f"tolerance phase_deg must be in [0, 180] (got {self.phase_deg!r})")


#: Own solver vs ngspice. Both are backward-stable direct solvers in double precision, so on a
#: well-conditioned network they agree to ~1e-12; ngspice prints nothing rounded but its pivoting and
#: ordering differ. 1e-6 leaves six orders of margin for conditioning, yet a wrong stamp (a sign, a
#: factor 2π, a missing term) moves an answer by far more than 1e-6 on any network where it matters.
SOLVER_VS_SPICE = Tolerance(rel=1e-6, abs=1e-15)

#: A hand calculation carried to three significant figures (common practice): 1 % and 0.5°.
HAND_CALCULATION = Tolerance(rel=1e-2, abs=0.0, phase_deg=0.5)

#: A stored baseline of our own results: numerical drift only.
BASELINE = Tolerance(rel=1e-9, abs=1e-15)
