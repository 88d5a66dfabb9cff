"""``--expect`` on the command line: hand values stated as text, read into the case's expectations."""

from __future__ import annotations

import math
from collections.abc import Sequence

from crosscheck.errors import CrosscheckError
from crosscheck.model.cases import Expectation
from crosscheck.model.frequencies import check_frequency_text
from crosscheck.model.tolerance import Tolerance
from crosscheck.model.values import format_eng, parse_number, parse_phasor
from crosscheck.vocabulary import PHASORS, same_frequency

#: The series-form keys an expectation may state beside the phasors.
SERIES = ("series_r", "series_l", "series_c")


class ExpectOptionError(CrosscheckError, ValueError):
    """An ``--expect`` option on the command line cannot be read; the message shows the accepted form."""


_EXPECT_FORM = (
    "write QUANTITY=VALUE or QUANTITY@FREQ=VALUE, e.g. vth=57.34∠-55°, vth@1k=57.34@-55 or "
    '"zth=4.7 - j6.7"; quantities: ' + ", ".join(PHASORS + SERIES)
)


def expectations_from_options(
    texts: Sequence[str], freqs_hz: Sequence[float], tolerance: Tolerance
) -> tuple[Expectation, ...]:
    """``--expect`` options as expectations, one per frequency. Without ``@FREQ`` the value applies at the
    only ``--freq`` given; with several frequencies each value must say which one it is for."""
    by_freq: dict[float, dict[str, complex]] = {}
    for text in texts:
        left, sep, right = text.partition("=")
        if not sep or not right.strip():
            raise ExpectOptionError(f"--expect {text!r}: no value; {_EXPECT_FORM}")
        quantity, at_sep, at_text = left.strip().lower().partition("@")
        if quantity not in PHASORS + SERIES:
            raise ExpectOptionError(f"--expect {text!r}: unknown quantity {quantity!r}; {_EXPECT_FORM}")
        try:
            if at_sep:
                check_frequency_text(left.partition("@")[2].strip(), where="the frequency after @")
                at = parse_number(at_text.strip())
            elif len(freqs_hz) == 1:
                at = float(freqs_hz[0])
            else:
                raise ExpectOptionError(
                    f"--expect {text!r} does not say at which of the {len(freqs_hz)} frequencies "
                    f"it holds; write {quantity}@FREQ=VALUE, or give a single --freq"
                )
            value = parse_phasor(right) if quantity in PHASORS else complex(parse_number(right.strip()))
        except ExpectOptionError:
            raise
        except CrosscheckError as exc:
            raise ExpectOptionError(f"--expect {text!r}: {exc}") from None
        if not (math.isfinite(at) and at >= 0) or not all(map(math.isfinite, (value.real, value.imag))):
            raise ExpectOptionError(f"--expect {text!r}: the frequency and value must be finite (frequency >= 0)")
        slot = next((f for f in by_freq if same_frequency(f, at)), at)
        values = by_freq.setdefault(slot, {})
        if quantity in values:
            raise ExpectOptionError(
                f"--expect {text!r}: {quantity} is already stated at {format_eng(at, 4, ' Hz')}; "
                "give each quantity once per frequency"
            )
        values[quantity] = value
    return tuple(
        Expectation(at, values, tolerance, "--expect on the command line", i)
        for i, (at, values) in enumerate(by_freq.items(), start=1)
    )
