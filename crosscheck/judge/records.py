"""What a case is judged on beyond solver-vs-SPICE: hand calculations, design limits, a baseline.

These are plain records; ``expectations``, ``limits`` and ``baseline`` fill them,
reports read them.
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class ExpectationCheck:
    """One hand-calculated value against crosscheck's own solver at one frequency."""

    index: int               # 1-based position of the [[expect]] table in the case file
    at_hz: float
    quantity: str            # vth, zth, in, yn, series_r, series_l, series_c
    expected: complex
    obtained: complex | None
    rel_err: float           # |obtained − expected| / |obtained|
    mag_err_pct: float       # (|expected| − |obtained|) / |obtained| · 100
    mag_err_db: float        # 20·log10(|expected| / |obtained|)
    phase_err_deg: float     # ∠expected − ∠obtained, wrapped to (−180, 180]
    verdict: str             # pass, fail, unavailable
    slip: str | None         # the usual hand-calculation slip that explains the number, if one does
    explanation: str
    how: str = ""            # how the hand value was obtained, as the case file says


@dataclass(frozen=True)
class LimitCheck:
    """One design limit over its band: the worst point and the margin left."""

    index: int
    text: str                # as written, e.g. "abs(zth)"
    function: str
    quantity: str
    minimum: float | None
    maximum: float | None
    band: tuple[float, float] | None
    worst_freq_hz: float | None
    worst_value: float | None
    margin: float | None     # distance inside (+) or outside (−) the nearest bound, in the quantity's unit
    verdict: str             # pass, fail, unavailable
    explanation: str
    values: tuple[tuple[float, float], ...] = ()  # (freq_hz, value) over the band, for plots


@dataclass(frozen=True)
class DriftCheck:
    """A quantity against the stored baseline of an earlier run."""

    freq_hz: float
    quantity: str
    baseline: complex | None
    obtained: complex | None
    rel_err: float
    verdict: str             # pass, drift, unavailable
    explanation: str
