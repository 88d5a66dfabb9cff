"""Solving a varied network: nominal solutions with their adjoint, and the port voltages at many value sets.

Two paths, as in ``MnaSystem.solve_many``. Small systems (``DENSE_LIMIT`` unknowns or fewer) solve a
batch of value sets as one batched dense problem per frequency. Large ones keep the symbolic analysis made
once for the network (the pattern never changes, only values) and refactor along the value sets on the
last pivot order (KLU), checking each solution's backward error and pivoting afresh when it grew.
"""

from __future__ import annotations

import math

import numpy as np
import scipy.sparse as sp

from crosscheck.model.budget import DENSE_BATCH_ENTRIES
from crosscheck.own import sparse_backends
from crosscheck.own.refinement import REFINE_ABOVE
from crosscheck.own.solver import DENSE_LIMIT
from crosscheck.own.spread_matrix import VariedSystem

#: Value sets handled together on the sparse path (their A0/A1 entries are held at once).
SPARSE_CHUNK = 256


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
            raise vs.singular(float(freqs[0])) from None
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
            raise vs.singular(f) from None
        xs[i] = lu.solve(vs.rhs)
        lam[i] = np.conj(lu.solve(c.astype(complex), adjoint=True))  # A⁻ᵀc = conj(A⁻ᴴ c) for real c
    return xs, lam


def port_values(vs: VariedSystem, values: np.ndarray, freqs_hz: np.ndarray) -> np.ndarray:
    """V_th and Z_th (S, F, 2) at S value sets (rows of ``values``) and F frequencies: exact solves."""
    values = np.atleast_2d(np.asarray(values, dtype=float))
    freqs = np.asarray(freqs_hz, dtype=float)
    out = np.empty((len(values), len(freqs), 2), dtype=complex)
    if vs.size <= DENSE_LIMIT:
        chunk = max(1, DENSE_BATCH_ENTRIES // max(1, vs.size * vs.size))
        solve = _dense_chunk
    else:
        chunk = SPARSE_CHUNK
        solve = _sparse_chunk
    for start in range(0, len(values), chunk):
        part = values[start : start + chunk]
        out[start : start + len(part)] = solve(vs, part, freqs)
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
