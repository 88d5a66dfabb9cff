"""What every case runner does around the two routes: numpy's warnings kept quiet, an own-route arithmetic
failure put in words, and ngspice's answer (or why there is none) taken from the pool's future.

One copy for the one-port runner (``run.check``) and the multi-port one (``run.multiport``), so both name a
failure in the same words and read the pool the same way.
"""

from __future__ import annotations

import warnings
from collections.abc import Iterator
from concurrent.futures import Future
from contextlib import contextmanager
from typing import Any

import numpy as np

from crosscheck.errors import CrosscheckError, EngineUnavailableError


@contextmanager
def quiet_numpy() -> Iterator[list[str]]:
    """numpy's floating-point warnings kept off standard error; the list gathers their words for the caller.

    Overflow or invalid values in a solve surface as non-finite answers, which the judgement reports per
    case; the warnings themselves would only print lines with no case name on the terminal.
    """
    caught: list[str] = []
    with np.errstate(all="ignore"), warnings.catch_warnings(record=True) as records:
        warnings.simplefilter("always", RuntimeWarning)
        try:
            yield caught
        finally:
            caught.extend(str(r.message) for r in records if issubclass(r.category, RuntimeWarning))


#: What the own route raises when its arithmetic fails (as opposed to a ``CrosscheckError`` it explains).
ARITHMETIC_FAILURES = (ArithmeticError, ValueError, np.linalg.LinAlgError)


def arithmetic_error(exc: BaseException, caught: list[str]) -> str:
    """The case's error for an own-route arithmetic failure, with numpy's warnings when it gave any."""
    return (
        f"own solver: the arithmetic failed ({type(exc).__name__}: {str(exc)[:200]}); "
        + (f"numpy reported: {'; '.join(sorted(set(caught)))[:300]}. " if caught else "")
        + "check the element values and frequencies for extreme sizes"
    )


def spice_answer(future: Future | None, engine: str) -> tuple[Any, str, str | None]:
    """ngspice's answer from the pool: (result or None, the note saying why there is none, the case's error).

    An unavailable engine is a note, never an error; ngspice failing on the case is both."""
    if future is None:
        return None, "ngspice was not run" if engine in ("spice", "both") else "", None
    try:
        return future.result(), "", None
    except EngineUnavailableError as exc:
        return None, str(exc), None
    except CrosscheckError as exc:
        return None, str(exc), f"ngspice: {exc}"
