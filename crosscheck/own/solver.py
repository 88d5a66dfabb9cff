"""Phasor modified nodal analysis (MNA) with one factorization per frequency.

The stamps are those of Ho, Ruehli and Brennan, "The modified nodal approach
to network analysis", IEEE Trans. Circuits and Systems CAS-22 (1975): node
voltages plus a branch current for every element whose voltage is fixed
(V, E, H, L, ideal shorts). Inductors carry a branch current so that DC
(L is a short) and mutual coupling (K) need no special case.

The matrix is A(ω) = A0 + jω·A1 with a pattern built once per network; each
frequency only refills the values. One LU factorization per frequency serves
every right-hand side (the sources, the port's test injection). Small networks
solve a whole sweep as one batched dense problem; large ones use a sparse LU
(``sparse_backends``: KLU or SuperLU) whose fill-reducing ordering is found once
per network, with Higham's 1-norm condition estimate riding on the same solves.
With KLU, a compiled loop (``sweep_kernel``) finishes the usual frequencies of a
sweep with the same arithmetic; the Python loop here is the reference and takes
every frequency out of the usual.
"""

from __future__ import annotations

import math
import os
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from typing import Callable, Sequence

import numpy as np
import scipy.sparse as sp

from crosscheck.own import klu_library, sparse_backends, sweep_kernel
from crosscheck.errors import SingularNetworkError
from crosscheck.model.network import GROUND, SOURCE_KINDS, Network

#: Below this many unknowns a sweep is solved as one batched dense problem (faster than sparse LU).
DENSE_LIMIT = 80
#: A 1-norm condition number above this is a singular matrix in double precision (1/ε ≈ 4.5e15, with room).
SINGULAR_CONDITION = 1e17
#: From THREADS_FROM unknowns a sparse sweep is cut into runs of this many consecutive frequencies, each one
#: chain of refactorizations, solved in parallel threads (ctypes and numpy release the GIL). Fixed, not per
#: core, so that the numbers do not depend on the machine: every run of a sweep is the same computation.
SWEEP_CHUNK = 16
#: Below this many unknowns a sweep stays in one thread: at 1,500 unknowns (a 1,000-node ladder) two threads
#: were measured no faster than one (Python holds the GIL for half the time), at 15,000 1.3-1.5x faster.
THREADS_FROM = 4000
#: Normwise backward error above which a sparse solve is refined (~32ε; LU with partial pivoting gives ~ε).
REFINE_ABOVE = 2.0 ** -47
#: A right-hand side whose largest entry is below this (and not 0) keeps its sweep off the compiled loop.
TINY_RHS = 1e-250

_BRANCH_KINDS = frozenset("VEHL")
#: Kinds whose entries are stamped in bulk by numpy when no fault is on.
_BULK_KINDS = frozenset("RCLV")


@dataclass(frozen=True)
class Factorization:
    """A factored A(ω): ``solve`` takes one or more right-hand sides (columns)."""

    freq_hz: float
    solve: Callable[[np.ndarray], np.ndarray]
    condition: float


class MnaSystem:
    """The MNA equations of one network, assembled once and refilled per frequency.

    ``ties`` are extra nodes held at 0 V through a zero-volt branch: the
    reference of a part with no ground (a floating port). No current flows in
    such a tie, so it changes no voltage difference inside that part.
    """

    #: The sparse LU back end (``sparse_backends``); None takes the default (KLU when a KLU library loads).
    sparse_backend: str | None = None
    #: Threads for a sparse sweep's runs of SWEEP_CHUNK frequencies; None: one per core (1: no threads).
    sweep_threads: int | None = None
    #: Whether KLU sweeps use the compiled loop (``sweep_kernel``) when it was built; False: Python only.
    compiled_sweep: bool = True
    _analysis: sparse_backends.Analysis | None = None  # the symbolic analysis, made on the first factorization
    _entry_columns: np.ndarray | None = None  # the column of each stored entry, for ‖A‖₁ per frequency

    def __init__(self, network: Network, ties: Sequence[str] = ()):
        self.network = network
        #: Shared with the network, which builds it once: read it, never change it.
        self.node_index: dict[str, int] = network.node_index
        arrays = network.element_arrays
        # V, E, H, L and ideal shorts (R = 0) carry a branch current, in element order.
        self._branch_elements = arrays.of_kind(_BRANCH_KINDS) | ((arrays.kind == ord("R")) & (arrays.value == 0.0))
        elements = network.elements
        branches = [elements[i].name for i in np.flatnonzero(self._branch_elements).tolist()]
        branches += [f"tie:{n}" for n in ties]
        offset = len(self.node_index)
        self.branch_index: dict[str, int] = dict(zip(branches, range(offset, offset + len(branches))))
        self.size = offset + len(branches)
        self._ties = tuple(ties)
        self._assemble()

    # ------------------------------------------------------------------ assembly

    def _assemble(self) -> None:
        rows: list[int] = []
        cols: list[int] = []
        constant: list[float] = []  # A0 entries
        per_omega: list[float] = []  # A1 entries (multiplied by jω)
        node = self.node_index.get
        from crosscheck.fuzz import faults  # deliberate bugs for measuring the fuzzer; empty unless faults.injected(...)

        broken = faults.active

        def put(r: int | None, c: int | None, a0: float = 0.0, a1: float = 0.0) -> None:
            if r is None or c is None:
                return
            rows.append(r)
            cols.append(c)
            constant.append(a0)
            per_omega.append(a1)

        # Two-terminal admittances and branch incidences are noted as one index row per element here and
        # stamped as arrays below: four entries each, ground (-1) dropped (see _noted_entries).
        two_terminal: list[tuple[int, int, float, float]] = []
        incidence: list[tuple[int, int, int]] = []

        def admittance(a: str, b: str, a0: float, a1: float) -> None:
            two_terminal.append((node(a, -1), node(b, -1), a0, a1))

        def branch_incidence(k: int, a: str, b: str) -> None:
            # KCL: the branch current leaves node a and enters node b; branch row: V(a) - V(b).
            incidence.append((k, node(a, -1), node(b, -1)))

        # With no fault on, R, C, L and V elements (the bulk of a large network) are stamped by numpy in one
        # pass (_bulk_entries) and the loop takes the rest; with a fault on, the loop takes every element.
        bulk, rest = [], self.network.elements
        if not broken:
            bulk, rest = self._bulk_entries()
        by_name = {}  # K elements look up their inductors by name
        if any(e.kind == "K" for e in rest):
            by_name = {e.name: e for e in self.network.elements if e.kind == "L"}
        for e in rest:
            kind = e.kind
            if kind == "R" and not e.is_short:
                admittance(*e.terminals, 1.0 / e.value, 0.0)
            elif kind == "C" and "capacitor-inverted" in broken:  # fault: 1/(jωC), an inductor of C henries
                self.size += 1
                branch_incidence(self.size - 1, *e.terminals)
                put(self.size - 1, self.size - 1, 0.0, -e.value)
            elif kind == "C":
                admittance(*e.terminals, 0.0, e.value)
            elif kind == "G":
                # Current gm·(V(nc+) - V(nc-)) flows from n+ through the source to n-.
                p, m, cp, cm = (node(n) for n in e.nodes)
                gm = -e.value if "vccs-sign" in broken else e.value
                put(p, cp, gm)
                put(p, cm, -gm)
                put(m, cp, -gm)
                put(m, cm, gm)
            elif kind == "F":
                k_ctl = self.branch_index[e.control]  # type: ignore[index]
                put(node(e.nodes[0]), k_ctl, e.value)
                put(node(e.nodes[1]), k_ctl, -e.value)
            elif kind in _BRANCH_KINDS or e.is_short:
                k = self.branch_index[e.name]
                branch_incidence(k, *e.terminals)
                if kind == "L":
                    put(k, k, 0.0, -e.value)
                elif kind == "E":
                    put(k, node(e.nodes[2]), -e.value)
                    put(k, node(e.nodes[3]), e.value)
                elif kind == "H":
                    put(k, self.branch_index[e.control], -e.value)  # type: ignore[index]
            elif kind == "K":
                l1, l2 = (by_name[n] for n in e.coupled)  # type: ignore[union-attr]
                mutual = e.value * math.sqrt(l1.value * l2.value)
                if "mutual-sign" in broken:
                    mutual = -mutual
                k1, k2 = self.branch_index[l1.name], self.branch_index[l2.name]
                put(k1, k2, 0.0, -mutual)
                put(k2, k1, 0.0, -mutual)
        for n in self._ties:
            branch_incidence(self.branch_index[f"tie:{n}"], n, GROUND)
        blocks = [(rows, cols, constant, per_omega), *bulk]
        if two_terminal or incidence:
            blocks.append(_noted_entries(two_terminal, incidence))
        rows, cols, constant, per_omega = _joined(blocks)
        if "f-for-omega" in broken:  # fault: j·f·A1 instead of j·ω·A1
            per_omega = [x / (2.0 * math.pi) for x in per_omega]

        # Sum duplicates once, keeping A0 and A1 on one shared pattern.
        combined = sp.coo_matrix(
            (np.asarray(constant) + 1j * np.asarray(per_omega), (rows, cols)),
            shape=(self.size, self.size),
        ).tocsc()
        combined.sum_duplicates()
        combined.sort_indices()
        self._pattern = combined
        self._a0 = combined.data.real.copy()
        self._a1 = combined.data.imag.copy()

    def _bulk_entries(self) -> tuple[list[_Entries], list]:
        """Blocks of entries for every R, C, L and V element (ideal shorts included), and the other elements.

        Read from the network's element columns (``Network.element_arrays``, built once per network), so
        numpy does the work and Python touches only the elements of other kinds.
        """
        arrays = self.network.element_arrays
        kind, value, a, b = arrays.kind, arrays.value, arrays.a, arrays.b
        chosen = arrays.of_kind(_BULK_KINDS)
        elements = self.network.elements
        rest = [elements[i] for i in np.flatnonzero(~chosen).tolist()]
        resistor = (kind == ord("R")) & (value != 0.0)
        capacitor = kind == ord("C")
        branch = chosen & self._branch_elements  # L, V and ideal shorts carry a branch current
        # Branch rows follow the nodes in element order (see __init__): each one's row is its rank among them.
        k = len(self.node_index) + (np.cumsum(self._branch_elements) - 1)[branch]
        conductance = 1.0 / value[resistor]
        inductor = kind[branch] == ord("L")
        k_l = k[inductor]
        return [
            _admittance_entries(a[resistor], b[resistor], conductance, np.zeros(len(conductance))),
            _admittance_entries(a[capacitor], b[capacitor], np.zeros(int(capacitor.sum())), value[capacitor]),
            _incidence_entries(k, a[branch], b[branch]),
            (k_l, k_l, np.zeros(len(k_l)), -value[branch][inductor]),  # a branch row: V(a) - V(b) - jωL·I = 0
        ], rest

    def matrix(self, freq_hz: float) -> sp.csc_matrix:
        """A(ω) = A0 + jω·A1 on the shared pattern (its index arrays are shared, not copied)."""
        return sp.csc_matrix((self._values(freq_hz), self._pattern.indices, self._pattern.indptr),
                             shape=self._pattern.shape)

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

    # ------------------------------------------------------------------ right-hand sides

    def source_vector(self) -> np.ndarray:
        """The independent sources' phasors, placed in their KCL or branch rows."""
        z = np.zeros(self.size, dtype=complex)
        elements = self.network.elements
        for e in (elements[i] for i in np.flatnonzero(self.network.element_arrays.of_kind(SOURCE_KINDS)).tolist()):
            if e.ac_mag == 0:
                continue
            if e.kind == "V":
                z[self.branch_index[e.name]] += e.phasor
            else:
                # SPICE: the current flows from n+ through the source to n-.
                p, m = (self.node_index.get(n) for n in e.terminals)
                if p is not None:
                    z[p] -= e.phasor
                if m is not None:
                    z[m] += e.phasor
        return z

    def injection_vector(self, a: str, b: str, amps: complex = 1.0) -> np.ndarray:
        """A test current driven into node a and out of node b (sources left out)."""
        z = np.zeros(self.size, dtype=complex)
        ia, ib = self.node_index.get(a), self.node_index.get(b)
        from crosscheck.fuzz import faults  # deliberate bugs for measuring the fuzzer; empty unless faults.injected(...)

        if "injection-node" in faults.active:  # fault: an off-by-one node index on one terminal
            if ia is not None:
                ia = (ia + 1) % len(self.node_index)
            elif ib is not None:
                ib = (ib + 1) % len(self.node_index)
        if ia is not None:
            z[ia] += amps
        if ib is not None:
            z[ib] -= amps
        return z

    def voltage(self, x: np.ndarray, node: str) -> np.ndarray | complex:
        """Node voltage from a solution vector (or columns); ground is 0."""
        i = self.node_index.get(node)
        return 0.0 * x[0] if i is None else x[i]

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
        return Factorization(freq_hz, lambda b: _refined(a, lu, np.asarray(b, dtype=complex), norm_inf),
                             condition)

    def solve_many(self, freqs_hz: Sequence[float], rhs: np.ndarray,
                   estimate_condition: bool = True) -> tuple[np.ndarray, np.ndarray]:
        """Solve A(ω)·X = rhs for every frequency: (F, n, k) solutions and (F,) conditions (NaN if not estimated).

        Small systems go through one batched dense solve. Large ones through sparse LU: the ordering
        once for the sweep, then per frequency one numeric factorization and one solve of every column
        together with the condition estimate's two opening probes (``condition_estimate``). With KLU a
        frequency refactors on the pivot order of the one before (no pivot search, ~2x faster), kept
        only while the right-hand sides' backward error stays below REFINE_ABOVE; else it pivots afresh.
        """
        freqs = np.asarray(freqs_hz, dtype=float)
        rhs = np.asarray(rhs, dtype=complex).reshape(self.size, -1)
        if self.size <= DENSE_LIMIT and len(freqs) > 0:
            return self._solve_dense(freqs, rhs, estimate_condition)
        self._ensure_analysis()
        if self.size < THREADS_FROM:  # never threaded: one chain, no fresh pivot search at each run's start
            chunks = [freqs] if len(freqs) else []
        else:
            chunks = [freqs[i:i + SWEEP_CHUNK] for i in range(0, len(freqs), SWEEP_CHUNK)]
        threads = 1
        if len(chunks) > 1:  # only from THREADS_FROM unknowns
            threads = min(len(chunks), self.sweep_threads or default_threads())
        if threads > 1:
            parts = list(_thread_pool(threads).map(lambda chunk: self._sweep(chunk, rhs, estimate_condition), chunks))
        else:
            parts = [self._sweep(chunk, rhs, estimate_condition) for chunk in chunks]
        if not parts:
            return np.empty((0, self.size, rhs.shape[1]), dtype=complex), np.empty(0)
        return np.concatenate([p[0] for p in parts]), np.concatenate([p[1] for p in parts])

    def _sweep(self, freqs: np.ndarray, rhs: np.ndarray, estimate_condition: bool) -> tuple[np.ndarray, np.ndarray]:
        """``solve_many``'s sparse path for consecutive frequencies: one chain of refactorizations.

        Each frequency costs one factorization, one solve of every column, one sparse product for the
        backward error and, with the estimate, typically one adjoint solve. After a KLU factorization the
        compiled loop (``sweep_kernel``, same steps in C) takes the frequencies that follow for as long as
        they are usual; this loop is the reference, and takes the first frequency of the chain and any
        frequency the compiled loop hands back.
        """
        k = rhs.shape[1]
        n = self.size
        # Solved with the right-hand sides in one call: LAPACK's ramp (the estimator's last safeguard) and the
        # estimator's start vector, which is e/n at the first frequency and then e_j for the column j where
        # the last frequency's estimate peaked (it rarely moves between neighbouring frequencies).
        columns = np.empty((n, k + 2), dtype=complex, order="F") if estimate_condition else np.asfortranarray(rhs)
        if estimate_condition:
            columns[:, :k] = rhs
            columns[:, k] = _ramp(n)
            columns[:, k + 1] = 1.0 / n
        xs = np.empty((len(freqs), n, k), dtype=complex)
        conds = np.full(len(freqs), math.nan)
        # A(ω) on the shared pattern, its values refilled in place at each frequency (the factorization
        # copies them): it serves one frequency at a time.
        a = sp.csc_matrix((np.empty(len(self._a0), dtype=complex), self._pattern.indices, self._pattern.indptr),
                          shape=self._pattern.shape)
        lu = None  # the last frequency's factor: the next refactors on its pivot order when that stays accurate
        peak = None
        rhs_sizes = _column_sizes(rhs)
        sizes = np.empty(len(self._a0))
        compiled = self._compiled_run(k, rhs_sizes)
        freq_list = freqs.tolist()
        i = 0
        while i < len(freq_list):
            if compiled is not None and isinstance(getattr(lu, "numeric", None), klu_library.Numeric):
                # The compiled loop takes the frequencies that follow a KLU factorization for as long as they
                # are usual; the first unusual one (if any) comes back to the loop below, which redoes it.
                done, peak = compiled.advance(lu.numeric, freqs[i:], rhs, rhs_sizes, columns, peak, xs[i:], conds[i:])
                i += done
                if i == len(freq_list):
                    break
            f = freq_list[i]
            self._values(f, out=a.data)
            norm_1, norm_inf = self._norms(a, out=sizes)
            lu = self._factor(f, a, reuse=lu)
            y = lu.solve(columns)
            checked = _backward_error(a, norm_inf, rhs, y[:, :k], rhs_sizes)
            if lu.reused and not checked[1] <= REFINE_ABOVE:
                # The kept pivot order lost accuracy at this frequency: pivot afresh (and keep the new order).
                lu = self._factor(f, a)
                y = lu.solve(columns)
                checked = _backward_error(a, norm_inf, rhs, y[:, :k], rhs_sizes)
            if estimate_condition:
                inverse_norm, j = _inverse_norm(lu, y[:, k + 1], y[:, k], peak)
                if j != peak:  # the next frequency starts from column j
                    columns[:, k + 1] = 0.0
                    columns[j, k + 1] = 1.0
                    peak = j
                conds[i] = norm_1 * inverse_norm
                self._check_condition(f, conds[i], a)
            # Refined only when the backward error asks for it (_refined would return y unchanged otherwise).
            xs[i] = y[:, :k] if checked[1] <= REFINE_ABOVE else _refined(a, lu, rhs, norm_inf, y[:, :k], checked)
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
        return sweep_kernel.Run(symbolic, self._a0, self._a1, self._entry_columns, k, REFINE_ABOVE, SINGULAR_CONDITION)

    def _solve_dense(self, freqs: np.ndarray, rhs: np.ndarray, estimate_condition: bool) -> tuple[np.ndarray, np.ndarray]:
        """The whole sweep as one batched dense solve, with the exact 1-norm condition of each matrix."""
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
        if self._analysis is None or self._analysis.name != wanted:
            self._analysis = sparse_backends.analyse(self._pattern, wanted)
            # C ints, as the compiled loop reads them (so no chain copies them); bincount takes them too.
            self._entry_columns = np.repeat(np.arange(self.size, dtype=np.intc), np.diff(self._pattern.indptr))

    def _norms(self, a: sp.csc_matrix, out: np.ndarray | None = None) -> tuple[float, float]:
        """‖a‖₁ and ‖a‖∞ (largest column and row sums of |a|), from the stored entries in two bincounts;
        ``out``: a buffer for the entries' sizes (a sweep reuses one)."""
        size = np.abs(a.data, out=out)
        norm_1 = float(np.bincount(self._entry_columns, size, minlength=self.size).max(initial=0.0))
        norm_inf = float(np.bincount(a.indices, size, minlength=self.size).max(initial=0.0))
        return norm_1, norm_inf

    def _factor(self, freq_hz: float, a: sp.csc_matrix, reuse: sparse_backends.Factor | None = None
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


THREADS_VAR = "CROSSCHECK_SWEEP_THREADS"


def default_threads() -> int:
    """Threads a sweep may use: ``$CROSSCHECK_SWEEP_THREADS`` (1: none; e.g. on a cluster worker that already
    runs one process per core), else one per core."""
    text = os.environ.get(THREADS_VAR, "").strip()
    if not text:
        return os.cpu_count() or 1
    if not text.isdigit() or int(text) < 1:
        raise ValueError(f"{THREADS_VAR}={text!r} is not a whole number of threads >= 1; "
                         "set it to 1 for no threads, or unset it for one per core")
    return int(text)
_pools: dict[tuple[int, int], ThreadPoolExecutor] = {}


def _thread_pool(threads: int) -> ThreadPoolExecutor:
    """A pool of ``threads`` threads kept for the life of this process (a forked child makes its own)."""
    key = (os.getpid(), threads)
    if key not in _pools:
        _pools[key] = ThreadPoolExecutor(threads, thread_name_prefix="crosscheck-sweep")
    return _pools[key]


#: Matrix entries as (rows, columns, A0 values, A1 values); index -1 is ground.
_Entries = tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]


def _admittance_entries(a: np.ndarray, b: np.ndarray, y0: np.ndarray, y1: np.ndarray) -> _Entries:
    """An admittance y between a and b: +y at (a, a) and (b, b), −y at (a, b) and (b, a)."""
    return (np.concatenate([a, b, a, b]), np.concatenate([a, b, b, a]),
            np.concatenate([y0, y0, -y0, -y0]), np.concatenate([y1, y1, -y1, -y1]))


def _incidence_entries(k: np.ndarray, a: np.ndarray, b: np.ndarray) -> _Entries:
    """Branch k from a to b: its current leaves a and enters b (KCL rows), its row reads V(a) − V(b)."""
    one = np.ones(len(k))
    return (np.concatenate([a, b, k, k]), np.concatenate([k, k, a, b]),
            np.concatenate([one, -one, one, -one]), np.zeros(4 * len(k)))


def _noted_entries(two_terminal: list, incidence: list) -> _Entries:
    """The admittances and incidences noted one element at a time, as entry arrays."""
    adm = np.array(two_terminal, dtype=float).reshape(-1, 4)
    inc = np.array(incidence, dtype=np.intp).reshape(-1, 3)
    return _joined([_admittance_entries(adm[:, 0].astype(np.intp), adm[:, 1].astype(np.intp), adm[:, 2], adm[:, 3]),
                    _incidence_entries(inc[:, 0], inc[:, 1], inc[:, 2])])


def _joined(parts: Sequence[tuple]) -> _Entries:
    """Entry blocks (arrays or lists) as one block, with every entry in a ground row or column dropped."""
    r, c, v0, v1 = (np.concatenate([np.asarray(p[i], dtype=dtype) for p in parts])
                    for i, dtype in enumerate((np.intp, np.intp, float, float)))
    keep = (r >= 0) & (c >= 0)
    return r[keep], c[keep], v0[keep], v1[keep]


def _ramp(n: int) -> np.ndarray:
    """LAPACK's alternating ramp (−1)^i·(1 + i/(n−1)): the estimator's safeguard against a misleading start."""
    i = np.arange(n)
    return ((-1.0) ** i * (1.0 + i / max(n - 1, 1))).astype(complex)


def condition_estimate(a: sp.spmatrix, lu: sparse_backends.Factor, norm_1: float) -> float:
    """κ₁(A) = ‖A‖₁·‖A⁻¹‖₁, with ‖A⁻¹‖₁ from Higham's estimator.

    N. J. Higham, "FORTRAN codes for estimating the one-norm of a real or complex matrix, with
    applications to condition estimation", ACM TOMS 14(4), 1988, Algorithm 4.1 (LAPACK's ZLACN2). It
    gives a lower bound that is usually exact and rarely off by more than a factor 3, from A⁻¹ applied
    to e/n and to a ramp, then typically one or two more solves. Deterministic, unlike scipy's
    randomised block ``onenormest``, which took ~10 solves.
    """
    n = a.shape[0]
    if n == 0:
        return 1.0
    if n <= 4:
        return norm_1 * float(np.abs(lu.solve(np.eye(n, dtype=complex))).sum(axis=0).max())
    y = lu.solve(np.stack([np.full(n, 1.0 / n, dtype=complex), _ramp(n)], axis=1))
    return norm_1 * _inverse_norm(lu, y[:, 0], y[:, 1])[0]


def _inverse_norm(lu: sparse_backends.Factor, y: np.ndarray, ramp: np.ndarray,
                  start: int | None = None) -> tuple[float, int]:
    """Higham's iteration on ‖A⁻¹‖₁, and the column j where it ended; NaN for a solve that is not finite.

    ``y`` = A⁻¹·x for the start vector x: e/n (``start`` None, as in ZLACN2) or the unit vector e_start
    (a sweep passes the column where the frequency before ended). Every iterate is ‖A⁻¹·x‖₁ for some
    ‖x‖₁ = 1, so any start gives a lower bound; from the last frequency's column a typical frequency
    stops after one adjoint solve. ``ramp`` = A⁻¹·(LAPACK's ramp) is the final safeguard.
    """
    n = y.shape[0]
    estimate = float(np.abs(y).sum())
    if not math.isfinite(estimate):
        return math.nan, 0
    j = start if start is not None else -1
    for _ in range(5):  # at most five iterations, as in ZLACN2
        z_size = np.abs(lu.solve(_unit_phases(y), adjoint=True))
        j_last, j = j, int(z_size.argmax())
        if j_last >= 0 and z_size[j_last] >= z_size[j]:
            j = j_last  # no column promises more than the one just taken: converged
            break
        y = lu.solve(_unit(n, j))
        latest = float(np.abs(y).sum())
        if not math.isfinite(latest):
            return math.nan, j
        if latest <= estimate:
            break
        estimate = latest
    return max(estimate, 2.0 * float(np.abs(ramp).sum()) / (3.0 * n)), j


def _unit(n: int, j: int) -> np.ndarray:
    """The unit vector e_j (complex)."""
    e = np.zeros(n, dtype=complex)
    e[j] = 1.0
    return e


_TINY = float(np.finfo(float).tiny)  # the smallest normal double


def _unit_phases(y: np.ndarray) -> np.ndarray:
    """y/|y| elementwise (1 where y is 0): the complex 'sign' vector of Higham's iteration."""
    size = np.abs(y)
    if size.min(initial=math.inf) >= _TINY:  # the usual case, without the masked division's cost
        return y / size
    # Divide only by normal sizes: |Re y|, |Im y| <= |y| then keeps every phase finite.
    return np.divide(y, size, out=np.ones_like(y), where=size >= _TINY)


def _refined(a: sp.spmatrix, lu: sparse_backends.Factor, b: np.ndarray, norm_inf: float, x: np.ndarray | None = None,
             checked: tuple[np.ndarray, float] | None = None) -> np.ndarray:
    """A⁻¹·b, improved by up to two steps of iterative refinement while the backward error exceeds REFINE_ABOVE.

    The normwise backward error ‖r‖∞/(‖A‖∞·‖x‖∞ + ‖b‖∞) of each column (Rigal and Gaches 1967) is ~ε
    after LU with partial pivoting; KLU's threshold pivoting (relative threshold 1e-3) can leave it
    larger. A refinement step in working precision brings it back (Skeel 1980; Higham, "Accuracy and
    Stability of Numerical Algorithms", 2nd ed., chapter 12) for one sparse product and one more solve.
    ``checked``: the residual and backward error of ``x``, when the caller has them already.
    Normwise rather than componentwise: along a long ladder the far nodes' voltages shrink by many
    decades and carry no digits of their own, so their componentwise error stays ~1 whatever is done.
    """
    x = lu.solve(b) if x is None else x
    if not np.isfinite(x).all():
        return x
    residual, error = _backward_error(a, norm_inf, b, x) if checked is None else checked
    for _ in range(2):
        if not error > REFINE_ABOVE:
            break
        better = x + lu.solve(residual)
        residual_better, error_better = _backward_error(a, norm_inf, b, better)
        if not error_better < error:
            break
        x, residual, error = better, residual_better, error_better
    return x


def _backward_error(a: sp.spmatrix, norm_a: float, b: np.ndarray, x: np.ndarray,
                    b_sizes: np.ndarray | None = None) -> tuple[np.ndarray, float]:
    """The residual b − A·x and the largest normwise backward error of its columns (0/0 counts as 0)."""
    residual = b - a @ np.ascontiguousarray(x)  # scipy would copy a column-major block itself, more slowly
    scale = norm_a * _column_sizes(x) + (_column_sizes(b) if b_sizes is None else b_sizes)
    # max over columns of max|r_j|/scale_j is the largest |r_ij|/scale_j over every entry: one pass over the
    # row-major residual instead of a reduction per column (numpy's slow case for a tall, narrow array).
    ratio = np.abs(residual)
    # Divided, not multiplied by 1/scale: a subnormal scale (right-hand sides of ~1e-310) has no finite
    # reciprocal. Scale 0 means x = b = 0, so r = 0 there too.
    ratio /= np.where(scale > 0, scale, 1.0)
    return residual, float(ratio.max(initial=0.0))


def _column_sizes(m: np.ndarray) -> np.ndarray:
    """max |m| of each column (of a vector: one value). In column-major order, where numpy reduces a
    tall two-column array ~5x faster than in row-major (a copy to that order is cheaper than the difference)."""
    m = m.reshape(m.shape[0], -1)
    if not m.flags.f_contiguous:
        m = np.asfortranarray(m)
    return np.abs(m).max(axis=0, initial=0.0)


def singular_error(network: Network, freq_hz: float, detail: str, matrix: sp.spmatrix | None = None,
                   node_names: tuple[str, ...] = (), ties: Sequence[str] = ()) -> SingularNetworkError:
    """Name the likely cause of a singular matrix from the structure at this frequency.

    With no structural cause, the nodes are read from the matrix's null space when it is given.
    """
    from crosscheck.own.diagnose import likely_singularity, nodes_in_null_space  # late import keeps the hot path lean

    cause, nodes = likely_singularity(network, freq_hz, ties)
    if not nodes and matrix is not None:
        nodes = nodes_in_null_space(matrix, node_names)
        if nodes:
            cause += f"; the undetermined voltages are at node(s) {', '.join(nodes[:8])}"
    where = f" at {freq_hz:g} Hz" if freq_hz else " at DC (0 Hz)"
    return SingularNetworkError(f"the network's equations are singular{where}: {cause} ({detail})",
                                nodes=nodes, freq_hz=freq_hz)
