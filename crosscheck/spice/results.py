"""What the reference route hands back: ngspice's equivalent per frequency, and how it was made.

Plain data (``complex`` values, tuples, strings), defined apart from ``engine`` so that both routes in
ngspice, ``engine``'s ``.ac`` runs and ``dc``'s operating point, build the same types (``engine`` imports
``dc``, so the types cannot live in ``engine``). ``engine`` re-exports them under their old names.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:  # start-up time: the reading check's deck writer loads only where ngspice runs
    from crosscheck.spice.reading import ReadingAnswer


@dataclass(frozen=True)
class SpicePoint:
    """ngspice's equivalent at one frequency; a quantity is None when ngspice cannot give it (``notes`` say why).

    ``freq_hz`` is the frequency ngspice reports for the row (sweeps drift by ~1e-15);
    ``requested_hz`` is the one that was asked for.
    ``route_mismatch`` is |V_th/Z_th - I_N| / max(|V_th/Z_th|, |I_N|) (0 when both are 0),
    None when a route is missing.
    """

    freq_hz: float
    requested_hz: float
    vth: complex | None
    zth: complex | None
    isc: complex | None
    route_mismatch: float | None
    notes: tuple[str, ...] = ()

    @property
    def in_(self) -> complex | None:
        """The Norton current under the name the comparer uses."""
        return self.isc


@dataclass(frozen=True)
class SpiceResult:
    """ngspice's equivalents at the requested frequencies, in request order, and how they were made."""

    points: tuple[SpicePoint, ...]
    ngspice_version: str
    strategy: str  # "combined" or "separate": what produced the numbers
    elapsed_s: float  # time spent in ngspice and reading its vectors
    notes: tuple[str, ...] = ()
    decks: tuple[str, ...] = field(default=(), repr=False)  # every deck text that was run, to reproduce by hand
    reading: ReadingAnswer | None = None  # ngspice on the user's own lines (``spice.reading``); None: no lines

    def _array(self, name: str) -> np.ndarray:
        nan = complex(math.nan, math.nan)
        return np.array(
            [nan if getattr(p, name) is None else getattr(p, name) for p in self.points], dtype=np.complex128
        )

    @property
    def freqs(self) -> np.ndarray:
        return np.array([p.freq_hz for p in self.points], dtype=float)

    @property
    def vth(self) -> np.ndarray:
        """V_th per point (complex128; NaN where unavailable)."""
        return self._array("vth")

    @property
    def zth(self) -> np.ndarray:
        return self._array("zth")

    @property
    def isc(self) -> np.ndarray:
        return self._array("isc")

    @property
    def route_mismatch(self) -> np.ndarray:
        return np.array([math.nan if p.route_mismatch is None else p.route_mismatch for p in self.points])


def route_mismatch(vth: complex | None, zth: complex | None, isc: complex | None) -> float | None:
    """|V_th/Z_th − I_N| relative to the larger of the two; None when a route is missing or Z_th = 0."""
    if vth is None or zth is None or isc is None or zth == 0:
        return None
    norton = vth / zth
    scale = max(abs(norton), abs(isc))
    return 0.0 if scale == 0 else abs(norton - isc) / scale
