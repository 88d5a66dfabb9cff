"""Values in case files read with the key they came from: numbers, frequencies, tolerances, limit tables.

One reader for every case file, one port or several, so that a trap refused in one (``1MHz``, read by SPICE
as millihertz) is refused in all.
"""

from __future__ import annotations

import math
import sys
from collections.abc import Callable
from pathlib import Path
from typing import Any

from crosscheck.errors import CrosscheckError
from crosscheck.model.case_file import MAX_FREQUENCY_HZ, entries, string
from crosscheck.model.case_file import err as _err
from crosscheck.model.frequencies import misread_frequency_text
from crosscheck.model.requirements import Limit
from crosscheck.model.tolerance import Tolerance
from crosscheck.model.values import parse_number


def number(path: Path, key: str, raw: Any) -> float:
    try:
        value = parse_number(raw)
    except CrosscheckError as exc:
        raise _err(path, key, str(exc)) from None
    if not math.isfinite(value):
        raise _err(path, key, f"{str(raw)[:40]!r} is not a finite number")
    return value


def frequency(path: Path, key: str, raw: Any, negative_later: bool = False) -> float:
    """One frequency in hertz: a number from 0 (DC) up to ``MAX_FREQUENCY_HZ``.

    ``negative_later``: leave a negative value to ``frequency_list``, which refuses it in its own words.
    Text whose scale SPICE misreads (``1MHz``, ``1M``: milli) is refused with the fix (``misread_frequency_text``).
    """
    why = misread_frequency_text(raw) if isinstance(raw, str) else None
    if why is not None:
        raise _err(path, key, why)
    value = number(path, key, raw)
    if not (0 <= value or negative_later) or value > MAX_FREQUENCY_HZ:
        raise _err(
            path, key, f"{value:g} Hz is outside 0 .. {MAX_FREQUENCY_HZ:g} Hz; give a frequency in hertz in that range"
        )
    return value


def tolerance(path: Path, key: str, given: dict[str, Any], default: Tolerance) -> Tolerance:
    rel = number(path, f"{key}.rel", given["rel"]) if "rel" in given else default.rel
    abs_ = number(path, f"{key}.abs", given["abs"]) if "abs" in given else default.abs
    phase = number(path, f"{key}.phase_deg", given["phase_deg"]) if "phase_deg" in given else default.phase_deg
    if rel < sys.float_info.epsilon:  # a smaller rel would drop the abs and round-off terms of the pass rule
        raise _err(path, f"{key}.rel", f"{rel!r} is below machine epsilon; give at least {sys.float_info.epsilon:.3g}")
    try:
        return Tolerance(rel=rel, abs=abs_, phase_deg=phase)
    except ValueError as exc:
        raise _err(path, key, str(exc)) from None


def limit_tables(
    path: Path, data: dict[str, Any], read_quantity: Callable[[Path, str, str], tuple[str, str]], example: str
) -> list[Limit]:
    """The ``[[limit]]`` tables: ``read_quantity`` reads ``quantity`` (one port's or several ports' names),
    ``example`` shows one in the message for a table without it."""
    out = []
    for i, item in enumerate(entries(path, data, "limit"), start=1):
        key = f"limit[{i}]"
        if "quantity" not in item:
            raise _err(path, key, f'each [[limit]] needs quantity = "{example}" and a min and/or max')
        quantity = string(path, item, "quantity", "")
        fn, q = read_quantity(path, f"{key}.quantity", quantity)
        lo = number(path, f"{key}.min", item["min"]) if "min" in item else None
        hi = number(path, f"{key}.max", item["max"]) if "max" in item else None
        if lo is None and hi is None:
            raise _err(path, key, "give min, max or both")
        if lo is not None and hi is not None and lo > hi:
            raise _err(path, key, f"min {lo:g} is above max {hi:g}; no value can meet it: swap them")
        band = None
        if "band" in item:
            b = item["band"]
            if not (isinstance(b, list) and len(b) == 2):
                raise _err(path, f"{key}.band", "must be [low, high] in Hz")
            band = (frequency(path, f"{key}.band[0]", b[0]), frequency(path, f"{key}.band[1]", b[1]))
            if band[0] > band[1]:
                raise _err(path, f"{key}.band", f"[{band[0]:g}, {band[1]:g}] is reversed; write [low, high] in Hz")
        unknown = set(item) - {"quantity", "min", "max", "band", "why"}
        if unknown:
            raise _err(path, key, f"unknown key(s) {sorted(unknown)}")
        out.append(Limit(fn, q, lo, hi, band, quantity, i, string(path, item, "why", "")))
    return out
