"""The records of judgement: one per compared quantity, point, hand value, design limit and baseline check.

Plain immutable records: ``compare``, ``expectations``, ``limits`` and ``baseline`` fill them, the
case result (``result``) carries them, reports and the fuzzer read them. Each carries a typed
``cause``, so a reader decides by the cause, never by matching words in the explanation.
"""

from __future__ import annotations

from dataclasses import dataclass
from enum import StrEnum

from crosscheck.vocabulary import Verdict


class Cause(StrEnum):
    """Why a judgement came out as it did."""

    AGREES = "agrees"  # within tolerance on its own terms
    AGREES_TO_ROUNDOFF = "agrees-to-roundoff"  # within what the matrix condition allows, not within rel alone
    BOTH_ABSENT = "both-absent"  # neither engine has the quantity (a degenerate port)
    OWN_ABSENT = "own-absent"  # crosscheck gives no value
    REFERENCE_ABSENT = "reference-absent"  # the reference gives no value at this point
    REFERENCE_NOT_RUN = "reference-not-run"  # the reference did not answer for the case
    ILL_CONDITIONED = "ill-conditioned"  # κ·ε exceeds the tolerance: double precision cannot promise it
    FITS_CONDITION = "fits-condition"  # the difference is the size the matrix condition allows
    MODEL_DIFFERENCE = "model-difference"  # far above the condition: the engines model the network differently
    OUT_OF_TOLERANCE = "out-of-tolerance"  # a hand value or a baseline value outside its tolerance
    SLIP = "slip"  # a hand value that a named usual slip reproduces
    NO_VALUE = "no-value"  # the quantity does not exist here (expectations, limits, drift)
    LIMIT_HOLDS = "limit-holds"
    LIMIT_BROKEN = "limit-broken"
    NOT_IN_BASELINE = "not-in-baseline"
    # What accounts for a generated case's failure or missing value (the fuzzer's reading):
    NGSPICE_ROUNDOFF = "ngspice-roundoff"  # within ngspice's own attainable accuracy (threshold pivoting)
    NGSPICE_PIVOT_ORDER = "ngspice-pivot-order"  # agrees when ngspice runs the frequency alone
    EXPECTED_FOR_CASE = "expected-for-case"  # the generator's caveat for the case says why
    # The reading check (ngspice reading the user's own lines, ``judge.reading``):
    READING_DIFFERS = "reading-differs"  # ngspice reads the netlist's text to another answer than the model's
    READING_REFUSED = "reading-refused"  # ngspice does not accept a line our reader accepted
    READING_UNSAFE = "reading-unsafe"  # our own check refused a stored line: nothing was sent (a reader bug)


#: Causes that say a failure is the size the arithmetic allows, not a modelling difference.
ROUNDOFF_CAUSES = frozenset({Cause.ILL_CONDITIONED, Cause.FITS_CONDITION})


@dataclass(frozen=True)
class QuantityCheck:
    """One quantity at one frequency, own solver against the reference."""

    quantity: str
    own: complex | None
    ref: complex | None
    err: float  # judged error (see ``compare``); nan when not compared
    rel_err: float  # plain |Δ| / |q_ref|, for display
    mag_err_pct: float
    phase_err_deg: float
    verdict: Verdict
    explanation: str
    cause: Cause = Cause.AGREES


@dataclass(frozen=True)
class PointCheck:
    """Every compared quantity at one frequency; the point takes the worst verdict and its cause."""

    freq_hz: float
    quantities: tuple[QuantityCheck, ...]
    verdict: Verdict
    explanation: str
    condition: float
    cause: Cause = Cause.AGREES


@dataclass(frozen=True)
class ExpectationCheck:
    """One hand-calculated value against crosscheck's own solver at one frequency."""

    index: int  # 1-based position of the [[expect]] table in the case file
    at_hz: float
    quantity: str  # vth, zth, in, yn, series_r, series_l, series_c
    expected: complex
    obtained: complex | None
    rel_err: float  # |obtained − expected| / |obtained|
    mag_err_pct: float  # (|expected| − |obtained|) / |obtained| · 100
    mag_err_db: float  # 20·log10(|expected| / |obtained|)
    phase_err_deg: float  # ∠expected − ∠obtained, wrapped to (−180, 180]
    verdict: Verdict  # pass, fail, unavailable
    slip: str | None  # the usual hand-calculation slip that explains the number, if one does
    explanation: str
    how: str = ""  # how the hand value was obtained, as the case file says
    cause: Cause = Cause.AGREES


@dataclass(frozen=True)
class LimitCheck:
    """One design limit over its band: the worst point and the margin left."""

    index: int
    text: str  # as written, e.g. "abs(zth)"
    function: str
    quantity: str
    minimum: float | None
    maximum: float | None
    band: tuple[float, float] | None
    worst_freq_hz: float | None
    worst_value: float | None
    margin: float | None  # distance inside (+) or outside (−) the nearest bound, in the quantity's unit
    verdict: Verdict  # pass, fail, unavailable
    explanation: str
    values: tuple[tuple[float, float], ...] = ()  # (freq_hz, value) over the band, for plots
    cause: Cause = Cause.LIMIT_HOLDS


@dataclass(frozen=True)
class DriftCheck:
    """A quantity against the stored baseline of an earlier run."""

    freq_hz: float
    quantity: str
    baseline: complex | None
    obtained: complex | None
    rel_err: float
    verdict: Verdict  # pass, drift, unavailable
    explanation: str
    cause: Cause = Cause.AGREES


@dataclass(frozen=True)
class ReadingCheck:
    """ngspice's V(a) − V(b) from the user's own lines against the own route's V_th, over the sweep.

    ``worst_rel_err`` and ``freq_hz`` are the worst compared point's (nan and None when none was compared);
    ``line`` is where the first differing element or the refused line is ("file:line", or "");
    ``elements`` names the elements whose values ngspice reads otherwise than the model.
    """

    verdict: Verdict
    worst_rel_err: float
    freq_hz: float | None
    explanation: str
    cause: Cause = Cause.AGREES
    line: str = ""
    elements: tuple[str, ...] = ()
    compared: int = 0  # frequencies at which both gave a value
