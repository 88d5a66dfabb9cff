"""Frequency lists, checked in one place whatever they came from (a case file, the command line, an
engine's caller), so every entry point accepts and refuses the same lists with the same words.
"""

from __future__ import annotations

import math
from collections.abc import Iterable

from crosscheck.errors import CrosscheckError
from crosscheck.vocabulary import same_frequency


class FrequencyError(CrosscheckError, ValueError):
    """A frequency list that no AC analysis can mean; the message says where it came from and what to write."""


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
