"""Complex numbers in JSON: ``{"re": …, "im": …}`` with full double precision, or null."""

from __future__ import annotations

import math
from typing import Any


def phasor(z: complex | None) -> dict[str, float] | None:
    if z is None:
        return None
    return {"re": _finite(z.real), "im": _finite(z.imag)}


def _finite(x: float) -> Any:
    # JSON has no inf/nan: say so in words rather than emit invalid JSON.
    return x if math.isfinite(x) else repr(x)
