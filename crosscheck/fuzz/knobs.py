"""What the seeded generator and the hypothesis strategies may draw, defined once for both.

Centre values make R, ωL and 1/(ωC) all about 1 kΩ at ``F_CENTRE`` (√(L/C) = R), so reactances are
comparable and the MNA matrix is well conditioned; values are drawn as ``centre · 10**u``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from crosscheck.errors import CrosscheckError

#: Topology families of the seeded generator; ``awkward`` builds on one of the others.
FAMILIES = ("ladder", "grid", "random", "tree", "bridge", "awkward")
#: Each case picks its own family from FAMILIES.
MIXED = "mixed"
#: What the awkward family may add to stress the numerics.
TRAITS = ("tank", "wide-values", "high-gain", "tight-coupling", "no-dc-port")
#: Every element letter a generated network may hold.
ALL_KINDS = "RLCVIEFGHK"

#: Centre values: R in Ω, L in H, C in F; √(L/C) = R so all three impedances meet at F_CENTRE.
CENTRES = {"R": 1e3, "L": 1e-2, "C": 1e-8}
#: 1/(2π√(LC)) for the centre values, about 15.9 kHz.
F_CENTRE = 1.0 / (2.0 * math.pi * math.sqrt(CENTRES["L"] * CENTRES["C"]))
#: Independent sources' centres, volts and amperes: about 1 V across 1 kΩ.
SOURCE_CENTRES = {"V": 1.0, "I": 1e-3}
#: Gains of dependent sources scale with R so their effect is comparable to the passive network.
GAIN_CENTRES = {"E": 1.0, "F": 1.0, "G": 1.0 / CENTRES["R"], "H": CENTRES["R"]}


class KnobsError(CrosscheckError, ValueError):
    """A knob or seed outside what the generator can draw; the message names the value and the range."""


def tidy(x: float) -> float:
    """12 significant figures: immune to last-bit differences between platforms' ``pow``."""
    return float(f"{x:.12g}")


@dataclass(frozen=True)
class Knobs:
    """What the generator may draw. Values are ``centre · 10**u`` with |u| <= ``decades``."""

    min_nodes: int = 2
    max_nodes: int = 8
    kinds: str = ALL_KINDS
    decades: float = 1.0
    min_hz: float = F_CENTRE / 100.0
    max_hz: float = F_CENTRE * 100.0
    max_freqs: int = 3
    dc: bool = True
    family: str = MIXED

    def __post_init__(self) -> None:
        kinds = "".join(dict.fromkeys(self.kinds.upper()))
        object.__setattr__(self, "kinds", kinds)
        if not 1 <= self.min_nodes <= self.max_nodes:
            raise KnobsError(f"node counts must satisfy 1 <= min <= max (got {self.min_nodes}, {self.max_nodes})")
        unknown = [k for k in kinds if k not in ALL_KINDS]
        if unknown:
            raise KnobsError(f"unknown element kind(s) {''.join(unknown)!r}; choose from {ALL_KINDS}")
        if not any(k in kinds for k in "RLC"):
            raise KnobsError(f"kinds {self.kinds!r} has no R, L or C to join the nodes; add at least one")
        if not (0.0 <= self.decades <= 6.0):
            raise KnobsError(f"decades must be between 0 and 6 (got {self.decades}); 6 already spans 12 decades")
        if not (0.0 < self.min_hz <= self.max_hz < math.inf):
            raise KnobsError(f"need 0 < min_hz <= max_hz < inf (got {self.min_hz}, {self.max_hz})")
        if self.max_freqs < 1:
            raise KnobsError(f"max_freqs must be at least 1 (got {self.max_freqs})")
        if self.family != MIXED and self.family not in FAMILIES:
            raise KnobsError(f"unknown family {self.family!r}; choose from {MIXED}, {', '.join(FAMILIES)}")
