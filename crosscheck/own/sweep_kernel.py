"""The compiled sweep loop (``_sweep_kernel.c``) for KLU, when pip could build it: found, declared, called.

``MnaSystem._sweep`` hands it runs of frequencies after the first of each chain; it finishes those
whose solve is usual (kept pivot order accurate, no refinement, a finite and non-singular condition
estimate) and hands the first unusual one back. Same arithmetic as the Python loop, without numpy's
per-call overhead around KLU, which dominates that loop's time at around 1,000 nodes, and with
subnormal numbers flushed to zero (see _sweep_kernel.c).

No compiler at install time means no kernel: ``load`` returns None and the Python loop does all of it.
"""

from __future__ import annotations

import ctypes
import functools
import importlib.util

import numpy as np

from crosscheck.own import klu_library

_P = ctypes.c_void_p
_NAME = "crosscheck.own._sweep_kernel"


class _Chain(ctypes.Structure):
    """The C ``chain`` struct: one chain of refactorizations and its buffers (see _sweep_kernel.c)."""

    _fields_ = [
        ("n", ctypes.c_int),
        ("ap", _P),
        ("ai", _P),
        ("a0", _P),
        ("a1", _P),
        ("entry_col", _P),
        ("refactor", _P),
        ("solve", _P),
        ("tsolve", _P),
        ("symbolic", _P),
        ("numeric", _P),
        ("common", _P),
        ("refine_above", ctypes.c_double),
        ("singular_condition", ctypes.c_double),
        ("values", _P),
        ("y", _P),
        ("z", _P),
        ("r", _P),
        ("col_sum", _P),
        ("row_sum", _P),
    ]


@functools.lru_cache(maxsize=1)
def load():
    """``crosscheck_sweep`` from the built extension, or None when it was not built (or will not load)."""
    spec = importlib.util.find_spec(_NAME)  # finds the shared object without importing it as a module
    if spec is None or not spec.origin or not spec.origin.endswith(".so"):
        return None
    try:
        function = ctypes.CDLL(spec.origin).crosscheck_sweep
    except (OSError, AttributeError):
        return None
    function.restype = ctypes.c_int
    function.argtypes = [
        ctypes.POINTER(_Chain),
        ctypes.c_int,
        _P,
        ctypes.c_int,
        ctypes.c_int,
        _P,
        _P,
        _P,
        ctypes.POINTER(ctypes.c_int),
        _P,
        _P,
    ]
    return function


class Run:
    """One chain's state for the kernel: the matrix's pattern and values, buffers, KLU's functions."""

    def __init__(
        self,
        symbolic: klu_library.Symbolic,
        a0: np.ndarray,
        a1: np.ndarray,
        entry_columns: np.ndarray,
        k: int,
        refine_above: float,
        singular_condition: float,
    ) -> None:
        n = symbolic.n
        self._arrays = {  # kept alive here: the struct holds their addresses
            "a0": np.ascontiguousarray(a0, dtype=float),
            "a1": np.ascontiguousarray(a1, dtype=float),
            "entry_col": np.ascontiguousarray(entry_columns, dtype=np.intc),
            "values": np.empty(len(a0), dtype=complex),
            "y": np.empty(n * (k + 2), dtype=complex),
            "z": np.empty(n, dtype=complex),
            "r": np.empty(n, dtype=complex),
            "col_sum": np.empty(n),
            "row_sum": np.empty(n),
        }
        lib = symbolic.library.lib
        self.chain = _Chain(
            n,
            *symbolic.pattern_pointers,
            refine_above=refine_above,
            singular_condition=singular_condition,
            symbolic=symbolic.handle,
            refactor=ctypes.cast(lib.klu_z_refactor, _P).value,
            solve=ctypes.cast(lib.klu_z_solve, _P).value,
            tsolve=ctypes.cast(lib.klu_z_tsolve, _P).value,
            **{name: array.ctypes.data for name, array in self._arrays.items()},
        )
        self._symbolic = symbolic  # the pattern's arrays live there
        self._function = load()

    def advance(
        self,
        numeric: klu_library.Numeric,
        freqs: np.ndarray,
        rhs: np.ndarray,
        rhs_sizes: np.ndarray,
        columns: np.ndarray,
        peak: int | None,
        xs: np.ndarray,
        conds: np.ndarray,
    ) -> tuple[int, int | None]:
        """Solve ``freqs`` in order on ``numeric``'s pivot order, into ``xs`` and ``conds`` (and the estimator's
        start column of ``columns``); return how many were finished and the estimator's peak column.

        ``columns``: the right-hand sides, then (with the estimate) LAPACK's ramp and the estimator's start
        vector; without the estimate ``conds`` is left alone."""
        self.chain.numeric, self.chain.common = numeric.handle, numeric.common_address
        freqs = np.ascontiguousarray(freqs, dtype=float)
        rhs = np.asfortranarray(rhs, dtype=complex)
        rhs_sizes = np.ascontiguousarray(rhs_sizes, dtype=float)
        for name, array, order in (
            ("columns", columns, "F_CONTIGUOUS"),
            ("xs", xs, "C_CONTIGUOUS"),
            ("conds", conds, "C_CONTIGUOUS"),
        ):
            in_order = array.flags.f_contiguous if order == "F_CONTIGUOUS" else array.flags.c_contiguous
            if not in_order or not array.flags.writeable:
                raise ValueError(f"the sweep kernel writes {name} in place: it must be {order} and writeable")
        k = rhs.shape[1]
        estimate = columns.shape[1] == k + 2
        if columns.shape[1] not in (k, k + 2) or columns.shape[0] != self.chain.n:
            raise ValueError(f"columns must be {self.chain.n} x {k} or x {k + 2}, not {columns.shape}")
        start = ctypes.c_int(-1 if peak is None else peak)
        done = self._function(
            ctypes.byref(self.chain),
            len(freqs),
            freqs.ctypes.data,
            k,
            int(estimate),
            rhs.ctypes.data,
            rhs_sizes.ctypes.data,
            columns.ctypes.data,
            ctypes.byref(start),
            xs.ctypes.data,
            conds.ctypes.data,
        )
        return done, (None if start.value < 0 else start.value)
