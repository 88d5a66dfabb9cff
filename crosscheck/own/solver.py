"""Phasor modified nodal analysis (MNA): one factorization per frequency, over a whole sweep.

The matrix is A(ω) = A0 + jω·A1 with a pattern built once per network (``assembly``); each frequency
only refills the values. One LU factorization per frequency serves every right-hand side (the sources,
the port's test injection). Small networks solve a whole sweep as one batched dense problem; large ones
use a sparse LU (``sparse_backends``: KLU or SuperLU) whose fill-reducing ordering is found once per
network, with Higham's 1-norm condition estimate (``condition``) riding on the same solves and the
backward error checked and refined where needed (``refinement``). With KLU, a compiled loop
(``sweep_kernel``) finishes the usual frequencies of a sweep with the same arithmetic; the Python loop
here is the reference and takes every frequency out of the usual.
"""

from __future__ import annotations

import math
import os
from collections.abc import Callable, Sequence
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from crosscheck.errors import SingularNetworkError
from crosscheck.model.budget import DENSE_BATCH_ENTRIES, NO_DEADLINE, Deadline
from crosscheck.model.network import Network
from crosscheck.own import klu_library, sparse_backends, sweep_kernel
from crosscheck.own.assembly import (
    BRANCH_KINDS,
    STAMPS,
    RightHandSides,
    Stamps,
    assemble,
)
from crosscheck.own.condition import condition_estimate, inverse_norm, ramp
from crosscheck.own.diagnose import singular_error
from crosscheck.own.refinement import REFINE_ABOVE, backward_error, column_sizes, refined

__all__ = [
    "BUDGET_CHUNK",
    "DENSE_LIMIT",
    "REFINE_ABOVE",
    "SINGULAR_CONDITION",
    "SWEEP_CHUNK",
    "THREADS_FROM",
    "THREADS_VAR",
    "Factorization",
    "MnaSystem",
    "Stamps",
    "default_threads",
]

#: Below this many unknowns a sweep is solved as one batched dense problem (faster than sparse LU).
DENSE_LIMIT = 80
#: A 1-norm condition number above this is a singular matrix in double precision (1/ε ≈ 4.5e15, with room).
SINGULAR_CONDITION = 1e17
#: From THREADS_FROM unknowns a sparse sweep is cut into runs of this many consecutive frequencies, each one
#: chain of refactorizations, solved in parallel threads (ctypes and numpy release the GIL). Fixed, not per
#: core, so that the numbers do not depend on the machine: every run of a sweep is the same computation.
SWEEP_CHUNK = 16
#: Below this many unknowns a sweep stays in one thread: two threads gain nothing while Python holds the
#: GIL for about half of each frequency's time (a 1,000-node ladder, 1,500 unknowns), and 1.3-1.5x at
#: 15,000 unknowns.
THREADS_FROM = 4000
#: A sweep checks its deadline (``model.budget.Deadline``) once per this many frequencies, and more often on
#: large networks (once per BUDGET_CHUNK_ENTRIES // unknowns frequencies, at least one): a clock read per run
#: is lost in the run's factorizations, and a run of a 100,000-unknown network is about ten frequencies.
BUDGET_CHUNK = 64
BUDGET_CHUNK_ENTRIES = 1 << 20
#: A right-hand side whose largest entry is below this (and not 0) keeps its sweep off the compiled loop.
TINY_RHS = 1e-250


@dataclass(frozen=True)
class Factorization:
    """A factored A(ω): ``solve`` takes one or more right-hand sides (columns)."""

    freq_hz: float
    solve: Callable[[np.ndarray], np.ndarray]
    condition: float


class MnaSystem(RightHandSides):
    """The MNA equations of one network, assembled once and refilled per frequency.

    ``ties`` are extra nodes held at 0 V through a zero-volt branch: the
    reference of a part with no ground (a floating port). No current flows in
    such a tie, so it changes no voltage difference inside that part.
    ``stamps``: how elements and the test current enter the matrix (``assembly.Stamps``); the
    correct ones unless a caller measuring the comparison passes broken ones.
    """

    #: The sparse LU back end (``sparse_backends``); None takes the default (the choice by fill where KLU loads).
    sparse_backend: str | None = None
    #: Threads for a sparse sweep's runs of SWEEP_CHUNK frequencies; None: one per core (1: no threads).
    sweep_threads: int | None = None
    #: Whether KLU sweeps use the compiled loop (``sweep_kernel``) when it was built; False: Python only.
    compiled_sweep: bool = True
    _analysis: sparse_backends.Analysis | None = None  # the symbolic analysis, made on the first factorization
    _analysis_for = ""  # the back end asked for when it was made (``auto``, ``klu`` or ``superlu``)
    _entry_columns: np.ndarray | None = None  # the column of each stored entry, for ‖A‖₁ per frequency

    def __init__(self, network: Network, ties: Sequence[str] = (), stamps: Stamps = STAMPS):
        self.network = network
        #: Shared with the network, which builds it once: read it, never change it.
        self.node_index: dict[str, int] = network.node_index
        arrays = network.element_arrays
        # V, E, H, L and ideal shorts (R = 0) carry a branch current, in element order.
        self._branch_elements = arrays.of_kind(BRANCH_KINDS) | ((arrays.kind == ord("R")) & (arrays.value == 0.0))
        elements = network.elements
        branches = [elements[i].name for i in np.flatnonzero(self._branch_elements).tolist()]
        branches += [f"tie:{n}" for n in ties]
        offset = len(self.node_index)
        self.branch_index: dict[str, int] = dict(zip(branches, range(offset, offset + len(branches))))
        self.size = offset + len(branches)
        self._ties = tuple(ties)
        self._stamps = stamps
        assembled = assemble(network, self.node_index, self.branch_index, self._branch_elements, self._ties, stamps)
        self.size = assembled.size
        self._pattern, self._a0, self._a1 = assembled.pattern, assembled.a0, assembled.a1

    # ------------------------------------------------------------------ the matrix

    def matrix(self, freq_hz: float) -> sp.csc_matrix:
        """A(ω) = A0 + jω·A1 on the shared pattern (its index arrays are shared, not copied)."""
        return sp.csc_matrix(
            (self._values(freq_hz), self._pattern.indices, self._pattern.indptr), shape=self._pattern.shape
        )

    def _values(self, freq_hz: float, out: np.ndarray | None = None) -> np.ndarray:
        """The stored entries of A(ω) = A0 + jω·A1, into ``out`` when given (a sweep refills one buffer)."""
        out = np.multiply(self._a1, 2j * math.pi * float(freq_hz), out=out)
        out += self._a0
        return out

    def dense_matrices(self, freqs_hz: np.ndarray) -> np.ndarray:
        """A(ω) for every frequency as one (F, n, n) array, for batched dense solves."""
        a0 = sp.csc_matrix((self._a0, self._pattern.indices, self._pattern.indptr), shape=self._pattern.shape)
        a1 = sp.csc_matrix((self._a1, self._pattern.indices, self._pattern.indptr), shape=self._pattern.shape)
        omega = 2.0 * np.pi * np.asarray(freqs_hz, dtype=float)
        return a0.toarray()[None, :, :] + 1j * omega[:, None, None] * a1.toarray()[None, :, :]

    # ------------------------------------------------------------------ factorization

    def factorize(self, freq_hz: float, estimate_condition: bool = True) -> Factorization:
        """LU of A(ω) once; raises SingularNetworkError naming the likely cause.

        ``solve`` refines its answer when the backward error shows that pivoting lost accuracy.
        """
        a = self.matrix(freq_hz)
        self._ensure_analysis()
        lu = self._factor(float(freq_hz), a)
        norm_1, norm_inf = self._norms(a)
        if estimate_condition:
            condition = condition_estimate(a, lu, norm_1=norm_1)
            self._check_condition(freq_hz, condition, a)
        else:
            condition = math.nan
        return Factorization(freq_hz, lambda b: refined(a, lu, np.asarray(b, dtype=complex), norm_inf), condition)

    def solve_many(
        self,
        freqs_hz: Sequence[float] | np.ndarray,
        rhs: np.ndarray,
        estimate_condition: bool = True,
        deadline: Deadline = NO_DEADLINE,
    ) -> tuple[np.ndarray, np.ndarray]:
        """Solve A(ω)·X = rhs for every frequency: (F, n, k) solutions and (F,) conditions (NaN if not estimated).

        Small systems go through one batched dense solve. Large ones through sparse LU: the ordering
        once for the sweep, then per frequency one numeric factorization and one solve of every column
        together with the condition estimate's two opening probes (``condition_estimate``). With KLU a
        frequency refactors on the pivot order of the one before (no pivot search, ~2x faster), kept
        only while the right-hand sides' backward error stays below REFINE_ABOVE; else it pivots afresh.
        ``deadline`` is checked between runs of at most BUDGET_CHUNK frequencies (``model.budget``).
        """
        freqs = np.asarray(freqs_hz, dtype=float)
        rhs = np.asarray(rhs, dtype=complex).reshape(self.size, -1)
        if self.size <= DENSE_LIMIT and len(freqs) > 0:
            return self._solve_dense(freqs, rhs, estimate_condition, deadline)
        self._ensure_analysis()
        if self.size < THREADS_FROM:  # never threaded: one chain, no fresh pivot search at each run's start
            chunks = [freqs] if len(freqs) else []
        else:
            chunks = [freqs[i : i + SWEEP_CHUNK] for i in range(0, len(freqs), SWEEP_CHUNK)]
        threads = 1
        if len(chunks) > 1:  # only from THREADS_FROM unknowns
            threads = min(len(chunks), self.sweep_threads or default_threads())
        starts = np.cumsum([0] + [len(c) for c in chunks[:-1]]).tolist()

        def run(j: int) -> tuple[np.ndarray, np.ndarray]:
            return self._sweep(chunks[j], rhs, estimate_condition, deadline.within(starts[j], len(freqs)))

        if threads > 1:
            parts = list(_thread_pool(threads).map(run, range(len(chunks))))
        else:
            parts = [run(j) for j in range(len(chunks))]
        if not parts:
            return np.empty((0, self.size, rhs.shape[1]), dtype=complex), np.empty(0)
        return np.concatenate([p[0] for p in parts]), np.concatenate([p[1] for p in parts])

    def _sweep(
        self, freqs: np.ndarray, rhs: np.ndarray, estimate_condition: bool, deadline: Deadline = NO_DEADLINE
    ) -> tuple[np.ndarray, np.ndarray]:
        """``solve_many``'s sparse path for consecutive frequencies: one chain of refactorizations.

        Each frequency costs one factorization, one solve of every column, one sparse product for the
        backward error and, with the estimate, typically one adjoint solve. After a KLU factorization the
        compiled loop (``sweep_kernel``, same steps in C) takes the frequencies that follow for as long as
        they are usual; this loop is the reference, and takes the first frequency of the chain and any
        frequency the compiled loop hands back. It stays one function, about 70 lines, because the
        compiled loop mirrors it step for step: the two are checked against each other side by side.
        """
        k = rhs.shape[1]
        n = self.size
        columns = _with_probes(rhs) if estimate_condition else np.asfortranarray(rhs)
        xs = np.empty((len(freqs), n, k), dtype=complex)
        conds = np.full(len(freqs), math.nan)
        # A(ω) on the shared pattern, its values refilled in place at each frequency (the factorization
        # copies them): it serves one frequency at a time.
        a = sp.csc_matrix(
            (np.empty(len(self._a0), dtype=complex), self._pattern.indices, self._pattern.indptr),
            shape=self._pattern.shape,
        )
        lu = None  # the last frequency's factor: the next refactors on its pivot order when that stays accurate
        peak = None
        rhs_sizes = column_sizes(rhs)
        sizes = np.empty(len(self._a0))
        compiled = self._compiled_run(k, rhs_sizes)
        freq_list = freqs.tolist()
        i = 0
        check_at = 0  # the deadline is checked once per run of frequencies, not per frequency
        run = max(1, min(BUDGET_CHUNK, BUDGET_CHUNK_ENTRIES // max(1, n)))
        while i < len(freq_list):
            if i >= check_at:
                deadline.check(i, len(freq_list))
                check_at = i + run
            numeric = getattr(lu, "numeric", None)
            if compiled is not None and isinstance(numeric, klu_library.Numeric):
                # The compiled loop takes the frequencies that follow a KLU factorization for as long as they
                # are usual, up to the next deadline check; the first unusual one (if any) comes back to the
                # loop below, which redoes it.
                end = min(check_at, len(freq_list))
                done, peak = compiled.advance(
                    numeric, freqs[i:end], rhs, rhs_sizes, columns, peak, xs[i:end], conds[i:end]
                )
                i += done
                if i == end:
                    continue
            f = freq_list[i]
            self._values(f, out=a.data)
            norm_1, norm_inf = self._norms(a, out=sizes)
            lu = self._factor(f, a, reuse=lu)
            y = lu.solve(columns)
            checked = backward_error(a, norm_inf, rhs, y[:, :k], rhs_sizes)
            if lu.reused and not checked[1] <= REFINE_ABOVE:
                # The kept pivot order lost accuracy at this frequency: pivot afresh (and keep the new order).
                lu = self._factor(f, a)
                y = lu.solve(columns)
                checked = backward_error(a, norm_inf, rhs, y[:, :k], rhs_sizes)
            if estimate_condition:
                inverse, j = inverse_norm(lu, y[:, k + 1], y[:, k], peak)
                if j != peak:  # the next frequency starts from column j
                    columns[:, k + 1] = 0.0
                    columns[j, k + 1] = 1.0
                    peak = j
                conds[i] = norm_1 * inverse
                self._check_condition(f, conds[i], a)
            # Refined only when the backward error asks for it (_refined would return y unchanged otherwise).
            xs[i] = y[:, :k] if checked[1] <= REFINE_ABOVE else refined(a, lu, rhs, norm_inf, y[:, :k], checked)
            if not estimate_condition and not np.isfinite(xs[i]).all():
                raise self._singular(f, "the solution is not finite", a)
            i += 1
        return xs, conds

    def _compiled_run(self, k: int, rhs_sizes: np.ndarray) -> sweep_kernel.Run | None:
        """The compiled loop for this chain when it is built and the back end is KLU (else None).

        Right-hand sides smaller than TINY_RHS stay on this loop: the compiled one flushes subnormal numbers
        to zero in its own arithmetic, which is harmless against a normal-sized right-hand side but could
        change a refinement decision against one of ~1e-300 (this loop handles those exactly).
        """
        symbolic = getattr(self._analysis, "symbolic", None)
        if not self.compiled_sweep or not isinstance(symbolic, klu_library.Symbolic) or sweep_kernel.load() is None:
            return None
        if np.any((rhs_sizes > 0) & (rhs_sizes < TINY_RHS)):
            return None
        assert self._entry_columns is not None, "made with the analysis (_ensure_analysis)"
        return sweep_kernel.Run(symbolic, self._a0, self._a1, self._entry_columns, k, REFINE_ABOVE, SINGULAR_CONDITION)

    def _solve_dense(
        self, freqs: np.ndarray, rhs: np.ndarray, estimate_condition: bool, deadline: Deadline = NO_DEADLINE
    ) -> tuple[np.ndarray, np.ndarray]:
        """The sweep as batched dense solves of at most DENSE_BATCH_ENTRIES matrix entries each (a bound on
        memory; each matrix's solve is the same whatever the batch), the deadline checked between batches."""
        batch = max(1, DENSE_BATCH_ENTRIES // max(1, self.size * self.size))
        if len(freqs) <= batch:
            return self._solve_dense_batch(freqs, rhs, estimate_condition)
        xs = np.empty((len(freqs), self.size, rhs.shape[1]), dtype=complex)
        conds = np.empty(len(freqs))
        for start in range(0, len(freqs), batch):
            deadline.check(start, len(freqs))
            end = start + batch
            xs[start:end], conds[start:end] = self._solve_dense_batch(freqs[start:end], rhs, estimate_condition)
        return xs, conds

    def _solve_dense_batch(
        self, freqs: np.ndarray, rhs: np.ndarray, estimate_condition: bool
    ) -> tuple[np.ndarray, np.ndarray]:
        """Frequencies as one batched dense solve, with the exact 1-norm condition of each matrix."""
        mats = self.dense_matrices(freqs)
        if not estimate_condition:
            conds = np.full(len(freqs), math.nan)
        else:
            conds = np.linalg.cond(mats, p=1) if self.size else np.ones(len(freqs))
            bad = ~np.isfinite(conds) | (conds > SINGULAR_CONDITION)
            if bad.any():
                raise self._singular(float(freqs[np.argmax(bad)]), f"condition number {conds[bad][0]:.3g}")
        try:
            xs = np.linalg.solve(mats, np.broadcast_to(rhs, (len(freqs),) + rhs.shape))
        except np.linalg.LinAlgError as exc:  # only reached without the condition check
            raise self._singular(float(freqs[0]), str(exc)) from None
        return xs, conds

    def _ensure_analysis(self) -> None:
        """Make the symbolic analysis for the chosen back end if there is none yet (once per network)."""
        wanted = self.sparse_backend or sparse_backends.default_backend()
        if self._analysis is None or self._analysis_for != wanted:  # "auto" may have chosen either
            self._analysis = sparse_backends.analyse(self._pattern, wanted)
            self._analysis_for = wanted
            # C ints, as the compiled loop reads them (so no chain copies them); bincount takes them too.
            self._entry_columns = np.repeat(np.arange(self.size, dtype=np.intc), np.diff(self._pattern.indptr))

    def _norms(self, a: sp.csc_matrix, out: np.ndarray | None = None) -> tuple[float, float]:
        """‖a‖₁ and ‖a‖∞ (largest column and row sums of |a|), from the stored entries in two bincounts;
        ``out``: a buffer for the entries' sizes (a sweep reuses one)."""
        size = np.abs(a.data, out=out)
        assert self._entry_columns is not None, "made with the analysis (_ensure_analysis)"
        norm_1 = float(np.bincount(self._entry_columns, size, minlength=self.size).max(initial=0.0))
        norm_inf = float(np.bincount(a.indices, size, minlength=self.size).max(initial=0.0))
        return norm_1, norm_inf

    def _factor(
        self, freq_hz: float, a: sp.csc_matrix, reuse: sparse_backends.Factor | None = None
    ) -> sparse_backends.Factor:
        """The numeric LU of ``a`` = A(ω) on the symbolic analysis made once for this network.

        ``reuse``: an earlier frequency's factor whose pivot order may be kept (the result says so in its
        ``reused`` attribute); the caller checks the backward error and factors afresh if it grew.
        """
        assert self._analysis is not None, "callers make the analysis first (_ensure_analysis)"
        try:
            return self._analysis.factor(a.data, reuse=reuse)
        except sparse_backends.SingularFactorError as exc:
            if reuse is not None:  # a zero pivot on the kept order says nothing about A(ω): pivot afresh
                return self._factor(freq_hz, a)
            raise self._singular(freq_hz, str(exc), a) from None

    def _singular(self, freq_hz: float, detail: str, matrix: sp.spmatrix | None = None) -> SingularNetworkError:
        """The error for a singular A(ω), its cause read from this network (its ties to ground included)."""
        names = tuple(self.node_index) if matrix is not None else ()
        return singular_error(self.network, freq_hz, detail, matrix, names, ties=self._ties)

    def _check_condition(self, freq_hz: float, condition: float, a: sp.spmatrix) -> None:
        """A condition past SINGULAR_CONDITION (or not finite) is a singular matrix in double precision."""
        if not math.isfinite(condition) or condition > SINGULAR_CONDITION:
            raise self._singular(freq_hz, f"condition number {condition:.3g}", a)


def _with_probes(rhs: np.ndarray) -> np.ndarray:
    """The right-hand sides and the condition estimate's two probes, as one column-major block solved in one call.

    The probes are LAPACK's ramp (the estimator's last safeguard) and the estimator's start vector, e/n
    at a chain's first frequency; the sweep then replaces it by e_j for the column j where the last
    frequency's estimate peaked (it rarely moves between neighbouring frequencies).
    """
    n, k = rhs.shape
    columns = np.empty((n, k + 2), dtype=complex, order="F")
    columns[:, :k] = rhs
    columns[:, k] = ramp(n)
    columns[:, k + 1] = 1.0 / n
    return columns


THREADS_VAR = "CROSSCHECK_SWEEP_THREADS"


def default_threads() -> int:
    """Threads a sweep may use: ``$CROSSCHECK_SWEEP_THREADS`` (1: none; e.g. on a cluster worker that already
    runs one process per core), else one per core."""
    text = os.environ.get(THREADS_VAR, "").strip()
    if not text:
        return os.cpu_count() or 1
    if not text.isdigit() or int(text) < 1:
        raise ValueError(
            f"{THREADS_VAR}={text!r} is not a whole number of threads >= 1; "
            "set it to 1 for no threads, or unset it for one per core"
        )
    return int(text)


_pools: dict[tuple[int, int], ThreadPoolExecutor] = {}


def _thread_pool(threads: int) -> ThreadPoolExecutor:
    """A pool of ``threads`` threads kept for the life of this process (a forked child makes its own)."""
    key = (os.getpid(), threads)
    if key not in _pools:
        _pools[key] = ThreadPoolExecutor(threads, thread_name_prefix="crosscheck-sweep")
    return _pools[key]
