"""Sparse LU back ends for the MNA matrix: the ordering is found once per network, each frequency refactors.

A(ω) = A0 + jω·A1 keeps one sparsity pattern over a sweep, so the fill-reducing
ordering (the symbolic analysis) is done once and every frequency pays only
for the numeric factorization. Two back ends:

* ``klu``: KLU (Davis and Palamadai Natarajan, "Algorithm 907: KLU, a direct
  sparse solver for circuit simulation problems", ACM TOMS 37(3), 2010):
  block triangular form, then AMD on each block, then left-looking LU with
  threshold partial pivoting. Its symbolic object is reused across frequencies,
  and a frequency may refactor on the last one's pivot order (``reuse``).
  Called through ``klu_library`` (Debian's libklu1, or the copy in kvxopt's
  wheel: ``pip install 'crosscheck[fast]'``).
* ``superlu``: scipy's SuperLU with the MMD ordering of Aᵀ+A and partial
  pivoting. Always there; it recomputes its ordering at each factorization
  (scipy exposes no symbolic reuse, and reusing a column permutation by hand
  with NATURAL is far slower on grids).

Why KLU first: on the network families of ``crosscheck.fuzz.large`` (ladders, trees, random graphs)
it factors and solves several times faster than SuperLU, whose supernodal kernels pay off only where
fill is heavy (large two-dimensional grids). So ``klu`` is the default when a KLU library loads, else
``superlu``; for very large meshes ``superlu`` is worth choosing (``benchmarks/bench.py`` measures
both). UMFPACK was slower than KLU on ladders and trees; pypardiso refuses complex matrices. MMD on
Aᵀ+A is SuperLU's best ordering on these families or close to it.

``CROSSCHECK_SPARSE`` (``klu`` or ``superlu``) overrides the choice, for
comparisons and for tests of the fallback.
"""

from __future__ import annotations

import os
import warnings
from typing import Protocol

import numpy as np
import scipy.sparse as sp

from crosscheck.errors import CrosscheckError
from crosscheck.own import klu_library  # ctypes and numpy only: the library itself is loaded on first use
from crosscheck.own.klu_library import KluError

BACKENDS = ("klu", "superlu")
ENV_VAR = "CROSSCHECK_SPARSE"
#: The ordering SuperLU uses: the best or near-best of scipy's four on ladders, trees, grids and random
#: graphs (fill 1.33x on ladders and trees, 4.6x on a 1,000-node grid against COLAMD's 7.5x).
SUPERLU_ORDERING = "MMD_AT_PLUS_A"


class SingularFactorError(CrosscheckError, ArithmeticError):
    """The numeric factorization met an exactly zero pivot; the solver turns this into SingularNetworkError."""


class Factor(Protocol):
    """A numeric LU factorization of one A(ω)."""

    #: True when the factors were computed on an earlier matrix's pivot order (``Analysis.factor``'s reuse).
    reused: bool

    def solve(self, b: np.ndarray, adjoint: bool = False) -> np.ndarray:
        """A⁻¹·b, or A⁻ᴴ·b when ``adjoint``; ``b`` is one vector or columns (complex)."""
        ...


class Analysis(Protocol):
    """The symbolic analysis of one sparsity pattern: factor any values on that pattern."""

    name: str

    def factor(self, values: np.ndarray, reuse: Factor | None = None) -> Factor:
        """LU of the matrix with this pattern and ``values`` (in the pattern's CSC order).

        ``reuse``: a factor of this analysis whose pivot order may be kept (no pivot search; the
        back end overwrites it in place). A back end that cannot reuse pivots factors afresh.
        """
        ...


def available() -> tuple[str, ...]:
    """The back ends that can run here, preferred first."""
    return ("klu", "superlu") if klu_library.load() is not None else ("superlu",)


def default_backend() -> str:
    """``$CROSSCHECK_SPARSE`` if set, else the fastest back end available."""
    chosen = os.environ.get(ENV_VAR, "").strip().lower()
    if chosen:
        _check_name(chosen)
        return chosen
    return available()[0]


def _check_name(name: str) -> None:
    if name not in BACKENDS:
        raise ValueError(
            f"sparse back end {name!r} is unknown; choose one of {', '.join(BACKENDS)} (or unset {ENV_VAR})"
        )
    if name not in available():
        raise ValueError(
            f"sparse back end {name!r} needs a KLU library, and none loads here; install Debian's "
            "libklu1 (apt-get install libklu1) or pip install 'crosscheck[fast]', or choose superlu"
        )


def analyse(pattern: sp.csc_matrix, backend: str | None = None) -> Analysis:
    """The symbolic analysis of ``pattern`` (CSC, sorted indices, no duplicates) for ``backend``."""
    name = default_backend() if backend is None else backend
    _check_name(name)
    return _KluAnalysis(pattern) if name == "klu" else _SuperLuAnalysis(pattern)


# --------------------------------------------------------------------------- SuperLU (scipy)


class _SuperLuFactor:
    reused = False  # SuperLU always searches pivots afresh

    def __init__(self, lu) -> None:
        self._lu = lu

    def solve(self, b: np.ndarray, adjoint: bool = False) -> np.ndarray:
        return self._lu.solve(np.asarray(b, dtype=complex), trans="H" if adjoint else "N")


class _SuperLuAnalysis:
    name = "superlu"

    def __init__(self, pattern: sp.csc_matrix) -> None:
        self._indices = pattern.indices
        self._indptr = pattern.indptr
        self._shape = pattern.shape

    def factor(self, values: np.ndarray, reuse: Factor | None = None) -> Factor:
        import scipy.sparse.linalg as spla

        a = sp.csc_matrix((np.asarray(values, dtype=complex), self._indices, self._indptr), shape=self._shape)
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("error", sp.SparseEfficiencyWarning)
                lu = spla.splu(a, permc_spec=SUPERLU_ORDERING)
        except RuntimeError as exc:  # "Factor is exactly singular"
            raise SingularFactorError(f"SuperLU: {exc}") from None
        return _SuperLuFactor(lu)


# --------------------------------------------------------------------------- KLU (klu_library)


class _KluFactor:
    def __init__(self, numeric) -> None:
        self.numeric = numeric
        self.reused = False  # True once refactored on an earlier matrix's pivot order
        self.solve = (
            numeric.solve
        )  # Factor.solve with no call in between (the Python loop calls it ~3 times a frequency)


class _KluAnalysis:
    name = "klu"

    def __init__(self, pattern: sp.csc_matrix) -> None:
        library = klu_library.load()
        if library is None:
            raise ValueError(
                "sparse back end 'klu' needs a KLU library; install Debian's libklu1 "
                "or pip install 'crosscheck[fast]', or choose superlu"
            )
        self.symbolic = klu_library.Symbolic(library, pattern.indptr, pattern.indices)

    def factor(self, values: np.ndarray, reuse: Factor | None = None) -> Factor:
        try:
            if isinstance(reuse, _KluFactor):
                reuse.numeric.refactor(values)
                reuse.reused = True
                return reuse
            return _KluFactor(self.symbolic.factor(values))
        except KluError as exc:
            if not exc.singular:
                raise  # out of memory or too large: says so, and is not reported as a singular network
            raise SingularFactorError(str(exc)) from None
