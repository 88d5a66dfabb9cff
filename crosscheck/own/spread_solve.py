"""Solving a varied network: nominal solutions with their adjoint, and the port voltages at many value sets.

Two paths, as in ``MnaSystem.solve_many``. Small systems (``SAMPLES_DENSE_LIMIT`` unknowns or fewer, or up to
``DENSE_LIMIT`` without the compiled loop) solve a batch of value sets as one batched dense problem per frequency. Large ones keep the symbolic analysis made
once for the network (the pattern never changes, only values) and refactor along the value sets on the
last pivot order (KLU), checking each solution's backward error and pivoting afresh when it grew.
"""

from __future__ import annotations

import math

import numpy as np
import scipy.sparse as sp

from crosscheck.model.budget import DENSE_BATCH_ENTRIES
from crosscheck.own import klu_library, sparse_backends, sweep_kernel
from crosscheck.own.refinement import REFINE_ABOVE, column_sizes
from crosscheck.own.solver import DENSE_LIMIT, SINGULAR_CONDITION, _thread_pool, default_threads
from crosscheck.own.spread_matrix import VariedSystem

#: Value sets handled together on the sparse path (their A0/A1 entries are held at once).
SPARSE_CHUNK = 64
#: Above this many unknowns value sets go through the compiled KLU loop when it is built (without it, above
#: ``DENSE_LIMIT``, as for a sweep): a dense LU costs n³ per value set and frequency, the compiled loop about a
#: sparse refactorization, and thousands of value sets make that difference count long before a sweep's
#: ``DENSE_LIMIT`` (measured: a 60-unknown ladder, 2,000 samples x 30 frequencies, dense 13 s, compiled loop below 1 s).
SAMPLES_DENSE_LIMIT = 16


def nominal_and_adjoint(vs: VariedSystem, freqs_hz: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Solutions (F, n, 2) for the sources and the 1 A test injection, and λ = A⁻ᵀc (F, n), c picking V(a) − V(b).

    λ is the one extra solve per frequency the adjoint method needs, on the same factorization.
    """
    freqs = np.asarray(freqs_hz, dtype=float)
    c = vs.port_vector()
    if vs.size <= DENSE_LIMIT:
        mats = vs.system.dense_matrices(freqs)
        try:
            xs = np.linalg.solve(mats, np.broadcast_to(vs.rhs, (len(freqs),) + vs.rhs.shape))
            lam = np.linalg.solve(np.swapaxes(mats, 1, 2), np.broadcast_to(c, (len(freqs), vs.size))[..., None])
        except np.linalg.LinAlgError:
            raise vs.singular(float(freqs[0]), nominal=True) from None
        return xs, lam[..., 0]
    system = vs.system
    system._ensure_analysis()
    analysis = system._analysis
    assert analysis is not None
    xs = np.empty((len(freqs), vs.size, 2), dtype=complex)
    lam = np.empty((len(freqs), vs.size), dtype=complex)
    for i, f in enumerate(freqs.tolist()):
        try:
            lu = analysis.factor(system._values(f))
        except sparse_backends.SingularFactorError:
            raise vs.singular(f, nominal=True) from None
        xs[i] = lu.solve(vs.rhs)
        lam[i] = np.conj(lu.solve(c.astype(complex), adjoint=True))  # A⁻ᵀc = conj(A⁻ᴴ c) for real c
    return xs, lam


def solutions_at(vs: VariedSystem, values: np.ndarray, freq_hz: float) -> tuple[np.ndarray, np.ndarray]:
    """Solutions (B, n, 2) and λ = A⁻ᵀc (B, n) at B value sets and one frequency (for slopes at a corner)."""
    values = np.atleast_2d(values)
    d0, d1 = vs.data(values)
    rhs = np.empty((len(values), vs.size, 2), dtype=complex)
    rhs[:, :, 0] = vs.sources(values)
    rhs[:, :, 1] = vs.rhs[:, 1]
    c = vs.port_vector()
    if vs.size <= DENSE_LIMIT:
        mats = vs.dense(d0, d1, freq_hz)
        try:
            xs = np.linalg.solve(mats, rhs)
            lam = np.linalg.solve(np.swapaxes(mats, 1, 2), np.broadcast_to(c, (len(values), vs.size))[..., None])
        except np.linalg.LinAlgError:
            raise vs.singular(freq_hz) from None
        return xs, lam[..., 0]
    vs.system._ensure_analysis()
    analysis = vs.system._analysis
    assert analysis is not None
    xs = np.empty((len(values), vs.size, 2), dtype=complex)
    lam = np.empty((len(values), vs.size), dtype=complex)
    pattern = vs.system._pattern
    a = sp.csc_matrix((np.empty(pattern.nnz, dtype=complex), pattern.indices, pattern.indptr), shape=pattern.shape)
    lu = None
    for s in range(len(values)):
        np.multiply(d1[s], 2j * math.pi * freq_hz, out=a.data)
        a.data += d0[s]
        lu, xs[s] = _solved(analysis, a, np.asfortranarray(rhs[s]), lu, vs, freq_hz)
        lam[s] = np.conj(lu.solve(c.astype(complex), adjoint=True))
    return xs, lam


def port_values(vs: VariedSystem, values: np.ndarray, freqs_hz: np.ndarray) -> np.ndarray:
    """V_th and Z_th (S, F, 2) at S value sets (rows of ``values``) and F frequencies: exact solves."""
    values = np.atleast_2d(np.asarray(values, dtype=float))
    freqs = np.asarray(freqs_hz, dtype=float)
    out = np.empty((len(values), len(freqs), 2), dtype=complex)
    solve = _dense_chunk
    chunk = max(1, DENSE_BATCH_ENTRIES // max(1, vs.size * vs.size))
    if vs.size > SAMPLES_DENSE_LIMIT:
        vs.system._ensure_analysis()
        symbolic = getattr(vs.system._analysis, "symbolic", None)
        if isinstance(symbolic, klu_library.Symbolic) and sweep_kernel.load() is not None:
            solve, chunk = _kernel_chunk, SPARSE_CHUNK
        elif vs.size > DENSE_LIMIT:
            solve, chunk = _sparse_chunk, SPARSE_CHUNK
    starts = list(range(0, len(values), chunk))

    def run(start: int) -> None:
        part = values[start : start + chunk]
        out[start : start + len(part)] = solve(vs, part, freqs)

    threads = min(len(starts), default_threads()) if solve is _kernel_chunk else 1
    if threads > 1:  # the compiled loop releases the GIL: value sets are independent chains, one per thread
        list(_thread_pool(threads).map(run, starts))
    else:
        for start in starts:
            run(start)
    return out


def _dense_chunk(vs: VariedSystem, values: np.ndarray, freqs: np.ndarray) -> np.ndarray:
    d0, d1 = vs.data(values)
    rhs = np.empty((len(values), vs.size, 2), dtype=complex)
    rhs[:, :, 0] = vs.sources(values)
    rhs[:, :, 1] = vs.rhs[:, 1]
    out = np.empty((len(values), len(freqs), 2), dtype=complex)
    for j, f in enumerate(freqs.tolist()):
        try:
            x = np.linalg.solve(vs.dense(d0, d1, f), rhs)
        except np.linalg.LinAlgError:
            raise vs.singular(f) from None
        out[:, j, :] = vs.port_voltage(np.moveaxis(x, 1, 0))
    return out


def _sparse_chunk(vs: VariedSystem, values: np.ndarray, freqs: np.ndarray) -> np.ndarray:
    """One refactorization and one two-column solve per value set and frequency, on the kept pivot order."""
    system = vs.system
    system._ensure_analysis()
    analysis = system._analysis
    assert analysis is not None
    d0, d1 = vs.data(values)
    sources = vs.sources(values)
    rhs = np.array(vs.rhs, order="F")
    pattern = system._pattern
    a = sp.csc_matrix((np.empty(pattern.nnz, dtype=complex), pattern.indices, pattern.indptr), shape=pattern.shape)
    out = np.empty((len(values), len(freqs), 2), dtype=complex)
    lu = None
    for j, f in enumerate(freqs.tolist()):
        jw = 2j * math.pi * f
        for s in range(len(values)):
            np.multiply(d1[s], jw, out=a.data)
            a.data += d0[s]
            rhs[:, 0] = sources[s]
            lu, x = _solved(analysis, a, rhs, lu, vs, f)
            out[s, j, :] = vs.port_voltage(x)
    return out


def _solved(analysis, a: sp.csc_matrix, rhs: np.ndarray, lu, vs: VariedSystem, f: float):
    """Refactor on ``lu``'s pivot order, solve, and pivot afresh if the backward error grew past REFINE_ABOVE."""
    for reuse in (lu, None) if lu is not None else (None,):
        try:
            lu = analysis.factor(a.data, reuse=reuse)
        except sparse_backends.SingularFactorError:
            if reuse is not None:
                continue
            raise vs.singular(f) from None
        x = lu.solve(rhs)
        residual = np.abs(rhs - a @ x).max()
        scale = np.abs(a.data).max() * np.abs(x).max() + np.abs(rhs).max()
        if residual <= REFINE_ABOVE * scale:
            return lu, x
    return lu, x


def _kernel_chunk(vs: VariedSystem, values: np.ndarray, freqs: np.ndarray) -> np.ndarray:
    """The sparse path through the compiled sweep loop (``sweep_kernel``): one call per value set runs its
    frequencies as a chain of KLU refactorizations on the kept pivot order, each checked by its backward error;
    a frequency it hands back (the kept order lost accuracy) is solved here with a fresh pivot search."""
    system = vs.system
    analysis = system._analysis
    symbolic = getattr(analysis, "symbolic", None)
    assert isinstance(symbolic, klu_library.Symbolic) and system._entry_columns is not None
    d0, d1 = vs.data(values)
    sources = vs.sources(values)
    run = sweep_kernel.Run(symbolic, d0[0], d1[0], system._entry_columns, 2, REFINE_ABOVE, SINGULAR_CONDITION)
    rhs = np.array(vs.rhs, order="F")
    xs = np.empty((len(freqs), vs.size, 2), dtype=complex)
    conds = np.empty(len(freqs))
    out = np.empty((len(values), len(freqs), 2), dtype=complex)
    pattern = system._pattern
    a = sp.csc_matrix((np.empty(pattern.nnz, dtype=complex), pattern.indices, pattern.indptr), shape=pattern.shape)
    try:
        numeric = symbolic.factor(d0[0] + 2j * math.pi * freqs[0] * d1[0])
    except klu_library.KluError:
        raise vs.singular(float(freqs[0])) from None
    for s in range(len(values)):
        run.chain.a0, run.chain.a1 = d0[s].ctypes.data, d1[s].ctypes.data  # d0, d1 outlive the run
        rhs[:, 0] = sources[s]
        sizes = column_sizes(rhs)
        i = 0
        while i < len(freqs):
            done, _ = run.advance(numeric, freqs[i:], rhs, sizes, rhs, None, xs[i:], conds[i:])
            i += done
            if i < len(freqs):  # handed back: pivot afresh at this frequency, then the kernel goes on
                f = float(freqs[i])
                np.multiply(d1[s], 2j * math.pi * f, out=a.data)
                a.data += d0[s]
                try:
                    numeric = symbolic.factor(a.data)
                except klu_library.KluError:
                    raise vs.singular(f) from None
                xs[i] = numeric.solve(rhs)
                i += 1
        out[s] = vs.port_voltage(np.moveaxis(xs, 1, 0))
    return out
