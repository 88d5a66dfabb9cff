"""Frequency lists, checked in one place whatever they came from (a case file, the command line, an
engine's caller), so every entry point accepts and refuses the same lists with the same words.
"""

from __future__ import annotations

import math
import re
from collections.abc import Iterable

from crosscheck.errors import CrosscheckError
from crosscheck.vocabulary import same_frequency


class FrequencyError(CrosscheckError, ValueError):
    """A frequency list that no AC analysis can mean; the message says where it came from and what to write."""


#: A number in engineering notation and the letters after it (what SPICE reads as the scale and ignores).
_NUMBER_AND_LETTERS = re.compile(r"^\s*[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?(?P<letters>[A-Za-z]*)\s*$")


def misread_frequency_text(text: str) -> str | None:
    """Why a frequency written as ``text`` is probably not what its author meant, or None when it reads as written.

    SPICE's scale letters ignore case, and the letters after one are ignored: ``1MHz`` and ``1M`` are
    1 milli-hertz, not 1 MHz (mega is ``meg``). So an upper-case ``M`` scale, and an ``m`` scale
    followed by ``Hz`` (``1mHz`` reads the same as ``1MHz``), are refused in frequency arguments and
    case files; ``1m`` (lower case, no unit) stays milli, ``1kHz`` ``1GHz`` ``1megHz`` read as written.
    """
    match = _NUMBER_AND_LETTERS.match(text)
    if match is None:
        return None
    letters = match.group("letters")
    lower = letters.lower()
    if not lower.startswith("m") or lower.startswith(("meg", "mil")):
        return None
    if letters[0] == "M" or lower.endswith("hz"):
        number = text.strip()[: len(text.strip()) - len(letters)]
        return (
            f"{text.strip()!r} would be read as {number} milli-hertz: SPICE reads M and m alike as milli "
            f"(mega is 'meg'); write {number}meg for {number} MHz, or {number}m (lower case, without Hz) "
            "if millihertz is meant"
        )
    return None


def check_frequency_text(text: str, *, where: str) -> None:
    """Refuse a frequency written with a scale SPICE misreads (``misread_frequency_text``), naming ``where``."""
    why = misread_frequency_text(text)
    if why is not None:
        raise FrequencyError(f"{where}: {why}")


def checked_frequency(value: object, *, where: str) -> float:
    """One frequency in hertz as a float: a number (or text ``float`` reads), finite and >= 0 (0 is DC)."""
    try:
        f = float(value)  # type: ignore[arg-type]  # anything float() takes; the rest is refused below
    except (TypeError, ValueError):
        raise FrequencyError(f"{where}: {value!r} is not a number; give frequencies in hertz as numbers") from None
    if not math.isfinite(f):
        raise FrequencyError(
            f"{where}: {f!r} Hz is not a finite number; give frequencies in hertz as finite numbers (0 is DC)"
        )
    if f < 0:
        raise FrequencyError(f"{where}: {f:g} Hz is negative; give frequencies in hertz >= 0 (0 is DC)")
    return f


def checked_frequencies(values: Iterable[object], *, where: str) -> tuple[float, ...]:
    """Every frequency checked as ``checked_frequency``, in the order given, duplicates kept; at least one."""
    out = tuple(checked_frequency(v, where=where) for v in values)
    if not out:
        raise FrequencyError(f"{where}: no frequencies given; give at least one frequency in hertz")
    return out


def frequency_list(values: Iterable[object], *, where: str) -> tuple[float, ...]:
    """The checked frequencies sorted ascending, each point once (``same_frequency`` decides; the first
    of a run of equal points is kept). ``where`` names the list's origin in messages (a file and key,
    an option)."""
    out: list[float] = []
    for f in sorted(checked_frequencies(values, where=where)):
        if not out or not same_frequency(out[-1], f):
            out.append(f)
    return tuple(out)
