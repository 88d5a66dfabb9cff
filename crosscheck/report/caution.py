"""The cautions reports carry: the general one every report ends with, and the ones that fit a case.

``CAUTION`` is what an equivalent is and what it is not. A case is given a caution of its own, near the
top of every report, when ``judge.hazards`` flags it (a source or the port above extra-low voltage, or
a large prospective current: the RMS |I_N| is stated, and from peak sources which division made it)
or when its case file states a ``caution``. The wording is here, once, so every format says the same;
the numbers are the judgement's. A case file's caution is user text: each format makes it inert where
it writes it (``report.untrusted``, or the HTML and XML escaping of that writer).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

from crosscheck.judge.hazards import ELV_AC_RMS_V, ELV_DC_V, HIGH_CURRENT_RMS_A, Hazard, Level
from crosscheck.judge.result import CaseResult
from crosscheck.model.values import format_eng

CAUTION = (
    "An equivalent is a linear, small-signal model of the network at the stated frequencies only; "
    "recompute it at every other frequency. Component tolerance, temperature, nonlinearity, saturation "
    "and transient behaviour are outside it unless the case analyses them. Source magnitudes are taken "
    "as written (peak or RMS, as the case states). For mains, fault-level and protective-device work, "
    "local codes and a licensed engineer decide; crosscheck's numbers are a check, not an approval."
)

#: Where the limits behind a hazard caution come from, said with every one.
LIMITS_NOTE = (
    f"Extra-low voltage is taken as {ELV_AC_RMS_V:g} V AC RMS or {ELV_DC_V:g} V ripple-free DC "
    "(IEC 61140 / IEC 60449 band I, from memory; common practice — defer to local codes); "
    f"a prospective current above {HIGH_CURRENT_RMS_A:g} A RMS is flagged as a judgement, not a rule."
)

#: Said with every case that analyses component spread: what its ranges cover and what they leave out.
SPREAD_CAUTION = (
    "Spread analysis covers only the stated tolerances of the stated parts (their [[vary]] or --vary lines): "
    "no ageing, temperature drift, parasitics or unlisted parts unless stated there. Worst cases are searched over "
    "the corners of the tolerance box (and the Monte Carlo samples), so an extreme inside the box may lie beyond them."
)

#: What a flagged case defers to.
DEFER = (
    "Mains and fault-level work defers to local codes and a licensed engineer: "
    "crosscheck's numbers are a check, not an approval."
)


def level_words(level: Level, unit: str) -> str:
    """``1.302 kA RMS at 50 Hz (1.842 kA peak ÷ √2)``, ``230 V RMS at 50 Hz (RMS as written)``, ``12 V DC``."""
    value = format_eng(level.value, 4, f" {unit}")
    if level.dc:
        return f"{value} DC"
    at = format_eng(level.freq_hz, 4, " Hz")
    if level.from_peak:
        return f"{value} RMS at {at} ({format_eng(level.value * 2**0.5, 4, f' {unit}')} peak ÷ √2)"
    return f"{value} RMS at {at} (RMS as written)"


def _against(level: Level, unit: str, what: str) -> str:
    limit = format_eng(level.limit, 4, f" {unit}") + (" DC" if level.dc else " RMS")
    return f"{level_words(level, unit)}, {'above' if level.above else 'within'} the {limit} {what}"


def hazard_text(hazard: Hazard) -> str:
    """The caution for a flagged case, in crosscheck's words only (no user text): levels, limits, whom to defer to.

    |I_N| is always named, as RMS (or DC at 0 Hz), whichever test flagged the case.
    """
    parts = []
    if hazard.source is not None:
        parts.append("a voltage source of " + _against(hazard.source, "V", "extra-low-voltage limit"))
    if hazard.current is not None:
        parts.append("a prospective short-circuit current |I_N| of " + _against(hazard.current, "A", "flag"))
    else:
        parts.append(
            "no finite |I_N| (an ideal source at the port): the prospective current is limited only by "
            "what the model leaves out"
        )
    return f"Hazardous levels: {'; '.join(parts)}. {DEFER} {LIMITS_NOTE}"


@dataclass(frozen=True)
class CaseCaution:
    """The cautions of one case: ``hazard`` in crosscheck's words ("" when not flagged), ``stated`` from its
    case file ("" when none). ``name``, ``title`` and ``stated`` are user text."""

    index: int  # the case's position in the run, from 1 (HTML anchors use it)
    name: str
    title: str
    hazard: str
    stated: str
    spread: str = ""  # ``SPREAD_CAUTION`` when the case analyses component spread

    def lines(self) -> list[str]:
        """One line per caution, as plain text (a writer escapes ``stated`` for its format)."""
        out = [self.hazard] if self.hazard else []
        out += [self.spread] if self.spread else []
        return out + ([f"The case file's caution: {self.stated}"] if self.stated else [])


def case_caution(result: CaseResult, index: int = 1) -> CaseCaution | None:
    """The case's own cautions, or None when it has neither a hazard nor a stated caution."""
    hazard = result.hazard
    words = hazard_text(hazard) if hazard is not None and hazard.flagged else ""
    stated = result.stated_caution
    spread = SPREAD_CAUTION if result.spread is not None else ""
    if not words and not stated and not spread:
        return None
    return CaseCaution(index, result.name, result.title, words, stated, spread)


def case_cautions(results: Sequence[CaseResult]) -> list[CaseCaution]:
    """Every case's own cautions, in run order (cases with none left out)."""
    found = (case_caution(r, i) for i, r in enumerate(results, start=1))
    return [c for c in found if c is not None]
