"""Is a case at a hazardous level? Its voltage sources against extra-low voltage, its I_N against a flag.

A judgement on the result, made once per case, which every report words the same way
(``report.caution``). Two tests, either of which flags the case:

- Voltage: the highest independent voltage source against the extra-low-voltage limits, 50 V AC RMS
  and 120 V ripple-free DC (IEC 61140 / IEC 60449 band I, from memory; common practice — defer to
  local codes). Current sources have no voltage of their own and are left out of this test. The port's
  |V_th| is not held against the limits: behind a current-output stage a small-signal model gives
  kilovolts no circuit could reach (a corpus control case shows 83 kV), and a flag that is mostly
  wrong teaches readers to skip it.
- Current: the prospective short-circuit current |I_N| (the own route's Norton current, the highest
  over the case's frequencies) above ``HIGH_CURRENT_RMS_A``.

Levels are compared as RMS: a case whose sources are peak phasors has its AC magnitudes divided by √2
(stated as such in the record); a 0 Hz point is DC, whose value has no peak/RMS distinction.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

from crosscheck.errors import CrosscheckError
from crosscheck.model.cases import Case
from crosscheck.model.netlist import read_netlist
from crosscheck.model.network import Network, Port
from crosscheck.own.equivalent import Equivalent

#: Extra-low voltage, AC: 50 V RMS (IEC 61140 / IEC 60449 band I, from memory; common practice —
#: defer to local codes).
ELV_AC_RMS_V = 50.0
#: Extra-low voltage, ripple-free DC: 120 V (same source, from memory; common practice — defer to local codes).
ELV_DC_V = 120.0
#: A prospective short-circuit current above this (A RMS, or A DC at 0 Hz) flags the case. A judgement to
#: flag, not a rule from any standard: 100 A is above the rating of the protective devices of ordinary final
#: circuits (miniature circuit breakers of 6–63 A, from memory) and about a dwelling's main fuse, so a port that
#: can drive more is at distribution level, where breaking capacity, withstand and arc energy need a
#: protection study rather than a check of an equivalent.
HIGH_CURRENT_RMS_A = 100.0

_SQRT2 = math.sqrt(2.0)


@dataclass(frozen=True)
class Level:
    """One magnitude as compared: RMS for AC (``from_peak``: a peak phasor divided by √2), the value for DC."""

    value: float
    freq_hz: float
    from_peak: bool
    limit: float

    @property
    def dc(self) -> bool:
        return self.freq_hz == 0.0

    @property
    def above(self) -> bool:
        return self.value > self.limit


@dataclass(frozen=True)
class Hazard:
    """A case's levels against the limits; ``flagged`` when any is above its limit.

    ``source``: the highest independent voltage source (None: the network has none); ``current``: the highest |I_N| (None: no point has a Norton
    form, i.e. an ideal source at the port). "Highest" is the largest share of its limit, so an AC and
    a DC point compare fairly.
    """

    source: Level | None
    current: Level | None

    @property
    def above_elv(self) -> bool:
        return self.source is not None and self.source.above

    @property
    def high_current(self) -> bool:
        return self.current is not None and self.current.above

    @property
    def flagged(self) -> bool:
        return self.above_elv or self.high_current


def _level(magnitude: float, freq_hz: float, peak: bool, ac_limit: float, dc_limit: float) -> Level:
    if freq_hz == 0.0:
        return Level(magnitude, 0.0, False, dc_limit)
    return Level(magnitude / _SQRT2 if peak else magnitude, freq_hz, peak, ac_limit)


def _highest(levels: Sequence[Level]) -> Level | None:
    finite = [lv for lv in levels if math.isfinite(lv.value)]
    return max(finite, key=lambda lv: lv.value / lv.limit, default=None)


def assess(source_volts: Sequence[float], own: Sequence[Equivalent], sources: str = "peak") -> Hazard:
    """The case's hazard from its voltage sources' magnitudes (as written) and the own route's equivalents.

    ``sources``: the case's convention, "peak" or "rms". The source test is made at each frequency the
    case runs (a source at 0 Hz is DC, at any other frequency AC); with no equivalents, at none.
    """
    peak = sources != "rms"
    freqs = sorted({eq.freq_hz for eq in own})
    top = max((abs(v) for v in source_volts), default=None)
    source = None
    if top is not None:
        source = _highest([_level(top, f, peak, ELV_AC_RMS_V, ELV_DC_V) for f in freqs])
    current = _highest(
        [
            _level(abs(eq.in_), eq.freq_hz, peak, HIGH_CURRENT_RMS_A, HIGH_CURRENT_RMS_A)
            for eq in own
            if eq.in_ is not None
        ]
    )
    return Hazard(source, current)


def source_volts(network: Network) -> tuple[float, ...]:
    """The magnitude of every independent voltage source, as written (current sources have no voltage)."""
    return tuple(abs(e.ac_mag) for e in network.by_kind("V"))


def assess_network(network: Network, own: Sequence[Equivalent] | None, sources: str = "peak") -> Hazard | None:
    """``assess`` for a network at hand (None when the own route gave no equivalents)."""
    return assess(source_volts(network), own, sources) if own else None


def assess_case(case: Case | None, own: Sequence[Equivalent] | None, sources: str = "peak") -> Hazard | None:
    """``assess`` for a case whose network is not at hand: its netlist is read again (None: no equivalents).

    Why this is safe: the text is the one the reader already accepted for this case, read by the same
    reader with the same settings; nothing reaches a shell, the file system or ngspice. A network that no
    longer reads (it cannot, as the run read it) is assessed on its port alone.
    """
    if not own:
        return None
    volts: tuple[float, ...] = ()  # a network that does not read: no source test
    if case is not None:
        try:
            network = read_netlist(
                case.netlist_text,
                file=case.netlist_file,
                allow_negative=case.allow_negative,
                port=Port(*case.port),
                limits=case.read_limits,
            )
            volts = source_volts(network)
        except CrosscheckError:
            volts = ()
    return assess(volts, own, sources)
