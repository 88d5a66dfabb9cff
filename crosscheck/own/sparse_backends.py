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

The choice, by fill (``auto``, the default when a KLU library loads): KLU's analysis (BTF, then AMD)
is made first, and its estimate of one factorization's floating-point operations (``est_flops``)
decides. KLU's left-looking kernel works column by column at about 1 Gflop/s here, so it wins wherever
fill is light (ladders, trees, random graphs with locality: a few to a few hundred operations per
unknown); SuperLU's supernodal kernels win where fill is heavy (meshes from about 100,000 nodes).
So ``superlu`` is chosen when the estimate lies within ``SUPERLU_FLOPS`` and ``klu`` otherwise.
Measured (one numeric factorization at 1 kHz, ``fuzz.large`` networks, seconds, on a shared 2-core
machine; ``benchmarks/bench.py`` prints the like as "sparse LU back ends"):

===========  ========  ==============  =========  ============  ==========  ===============
family       nodes     KLU est. flops  KLU LU nz  KLU factor    SuperLU nz  SuperLU
===========  ========  ==============  =========  ============  ==========  ===============
ladder       10,000    4.5e4           6.0e4      0.0011        6.2e4       0.010
ladder       100,000   4.5e5           6.0e5      0.012         6.2e5       0.074
ladder       1,000,000 4.5e6           6.0e6      0.22          6.2e6       0.78
grid         10,000    2.3e7           4.1e5      0.032         3.7e5       0.20
grid         100,000   1.0e9           6.5e6      1.05          5.6e6       0.47
grid         1,000,000 3.6e10          8.9e7      53.8          7.9e7       11.3 (1 thread)
random       10,000    3.4e5           1.1e5      0.0042        1.3e5       0.029
random       100,000   5.1e6           1.2e6      0.060         1.5e6       15.1
===========  ========  ==============  =========  ============  ==========  ===============

(KLU LU nz is the analysis's estimate; SuperLU's is L + U as factored. SuperLU's times are with
OpenBLAS's default threads, on a busy machine, except the 1M grid's (one BLAS thread; 75.8 s with the
default threads), so some may be inflated as described below; the random graph at 1M was not finished
by SuperLU within minutes, while KLU factors it in well under a second.) UMFPACK was slower than KLU
on ladders and trees; pypardiso refuses complex matrices. MMD on Aᵀ+A is SuperLU's best ordering
on these families or close to it.

SuperLU factors with its BLAS held to one thread (threadpoolctl): with OpenBLAS's default of one
thread per core, a 100,000-node grid's factorization took 1.2 to 16 s on a machine busy with other
work (its threads wait on each other) against 0.9 to 1.0 s on one thread, measured alternately.

``CROSSCHECK_SPARSE`` (``klu``, ``superlu`` or ``auto``) overrides the choice, for comparisons and for
tests of the fallback.
"""

from __future__ import annotations

import contextlib
import functools
import math
import os
import warnings
from typing import Any, Protocol

import numpy as np
import scipy.sparse as sp

from crosscheck.errors import CrosscheckError
from crosscheck.own import klu_library  # ctypes and numpy only: the library itself is loaded on first use
from crosscheck.own.klu_library import KluError

BACKENDS = ("klu", "superlu")
#: The automatic choice between them, by KLU's estimate of the factorization's cost (``choose_by_fill``).
AUTO = "auto"
ENV_VAR = "CROSSCHECK_SPARSE"
#: The ordering SuperLU uses: the best or near-best of scipy's four on ladders, trees, grids and random
#: graphs (fill 1.33x on ladders and trees, 4.6x on a 1,000-node grid against COLAMD's 7.5x).
SUPERLU_ORDERING = "MMD_AT_PLUS_A"
#: Estimated KLU flops per factorization within which SuperLU is chosen: from where its supernodes paid
#: off (a 100,000-node grid, 1e9: SuperLU 0.47 s against KLU's 1.05 s; a 1,000,000-node grid, 3.6e10:
#: 11.3 s on one BLAS thread against 54 s) upwards. Below it KLU won every family (a 10,000-node grid,
#: 2.3e7: 0.03 s against 0.2 s). The lower end lies between the measured sizes.
SUPERLU_FLOPS = (3e8, math.inf)


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
    """``$CROSSCHECK_SPARSE`` if set, else ``auto`` (the choice by fill) where KLU loads, else ``superlu``."""
    chosen = os.environ.get(ENV_VAR, "").strip().lower()
    if chosen:
        _check_name(chosen)
        return chosen
    return AUTO if "klu" in available() else "superlu"


def choose_by_fill(estimated_flops: float) -> str:
    """The back end for a factorization of ``estimated_flops`` (KLU's estimate): see ``SUPERLU_FLOPS``."""
    low, high = SUPERLU_FLOPS
    return "superlu" if low <= estimated_flops <= high else "klu"


def _check_name(name: str) -> None:
    if name == AUTO:
        return
    if name not in BACKENDS:
        raise ValueError(
            f"sparse back end {name!r} is unknown; choose one of {', '.join(BACKENDS)} or {AUTO} (or unset {ENV_VAR})"
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
    if name == AUTO and "klu" not in available():
        name = "superlu"
    if name == "superlu":
        return _SuperLuAnalysis(pattern)
    klu = _KluAnalysis(pattern)
    if name == AUTO and choose_by_fill(klu.symbolic.estimated_flops) == "superlu":
        return _SuperLuAnalysis(pattern)
    return klu


# --------------------------------------------------------------------------- SuperLU (scipy)


class _SuperLuFactor:
    reused = False  # SuperLU always searches pivots afresh

    def __init__(self, lu) -> None:
        self._lu = lu

    def solve(self, b: np.ndarray, adjoint: bool = False) -> np.ndarray:
        with _one_blas_thread():
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
            with warnings.catch_warnings(), _one_blas_thread():
                warnings.simplefilter("error", sp.SparseEfficiencyWarning)
                lu = spla.splu(a, permc_spec=SUPERLU_ORDERING)
        except RuntimeError as exc:  # "Factor is exactly singular"
            raise SingularFactorError(f"SuperLU: {exc}") from None
        return _SuperLuFactor(lu)


def _one_blas_thread() -> contextlib.AbstractContextManager[Any]:
    """BLAS held to one thread for the enclosed calls (none when threadpoolctl is missing)."""
    controller = _blas_controller()
    return contextlib.nullcontext() if controller is None else controller.limit(limits=1, user_api="blas")


@functools.lru_cache(maxsize=1)
def _blas_controller() -> Any:
    """threadpoolctl's view of the loaded BLAS libraries, made once, after SuperLU's module loaded its own."""
    import scipy.sparse.linalg  # noqa: F401  (its BLAS must be loaded before the libraries are listed)

    try:
        from threadpoolctl import ThreadpoolController
    except ImportError:
        return None
    return ThreadpoolController()


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
