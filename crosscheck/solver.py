"""Phasor modified nodal analysis (MNA) with one factorization per frequency.

The stamps are those of Ho, Ruehli and Brennan, "The modified nodal approach
to network analysis", IEEE Trans. Circuits and Systems CAS-22 (1975): node
voltages plus a branch current for every element whose voltage is fixed
(V, E, H, L, ideal shorts). Inductors carry a branch current so that DC
(L is a short) and mutual coupling (K) need no special case.

The matrix is A(ω) = A0 + jω·A1 with a pattern built once per network; each
frequency only refills the values. One LU factorization per frequency serves
every right-hand side (the sources, the port's test injection).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass
from typing import Callable, Sequence

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from .errors import SingularNetworkError
from .network import GROUND, SOURCE_KINDS, Network

#: Below this many unknowns a sweep is solved as one batched dense problem (faster than sparse LU).
DENSE_LIMIT = 80

_BRANCH_KINDS = frozenset("VEHL")


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

    def __init__(self, network: Network, ties: Sequence[str] = ()):
        self.network = network
        self.node_index: dict[str, int] = {n: i for i, n in enumerate(network.nodes)}
        branches = [e.name for e in network.elements if e.kind in _BRANCH_KINDS or e.is_short]
        branches += [f"tie:{n}" for n in ties]
        offset = len(self.node_index)
        self.branch_index: dict[str, int] = {name: offset + i for i, name in enumerate(branches)}
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
        by_name = {e.name: e for e in self.network.elements}
        from . import faults  # deliberate bugs for measuring the fuzzer; empty unless faults.injected(...)

        broken = faults.active

        def put(r: int | None, c: int | None, a0: float = 0.0, a1: float = 0.0) -> None:
            if r is None or c is None:
                return
            rows.append(r)
            cols.append(c)
            constant.append(a0)
            per_omega.append(a1)

        def admittance(a: str, b: str, a0: float, a1: float) -> None:
            ia, ib = node(a), node(b)
            put(ia, ia, a0, a1)
            put(ib, ib, a0, a1)
            put(ia, ib, -a0, -a1)
            put(ib, ia, -a0, -a1)

        def branch_incidence(k: int, a: str, b: str) -> None:
            # KCL: the branch current leaves node a and enters node b; branch row: V(a) - V(b).
            ia, ib = node(a), node(b)
            put(ia, k, 1.0)
            put(ib, k, -1.0)
            put(k, ia, 1.0)
            put(k, ib, -1.0)

        for e in self.network.elements:
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

    def matrix(self, freq_hz: float) -> sp.csc_matrix:
        """A(ω) = A0 + jω·A1 on the shared pattern."""
        omega = 2.0 * math.pi * freq_hz
        a = self._pattern.copy()
        a.data = self._a0 + 1j * omega * self._a1
        return a

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
        for e in self.network.elements:
            if e.kind not in SOURCE_KINDS or e.ac_mag == 0:
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
        from . import faults  # deliberate bugs for measuring the fuzzer; empty unless faults.injected(...)

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
        """LU of A(ω) once; raises SingularNetworkError naming the likely cause."""
        a = self.matrix(freq_hz)
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("error", sp.SparseEfficiencyWarning)
                lu = spla.splu(a, permc_spec="COLAMD")
        except RuntimeError as exc:  # SuperLU: "Factor is exactly singular"
            raise singular_error(self.network, freq_hz, str(exc), a, tuple(self.node_index)) from None
        condition = one_norm_condition(a, lu) if estimate_condition else math.nan
        if not math.isfinite(condition) or condition > 1e17:
            raise singular_error(self.network, freq_hz, f"condition number {condition:.3g}", a, tuple(self.node_index))
        return Factorization(freq_hz, lu.solve, condition)

    def solve_many(self, freqs_hz: Sequence[float], rhs: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Solve A(ω)·X = rhs for every frequency: (F, n, k) solutions and (F,) conditions.

        Small systems go through one batched dense solve; large ones through sparse LU per frequency.
        """
        freqs = np.asarray(freqs_hz, dtype=float)
        rhs = np.asarray(rhs, dtype=complex).reshape(self.size, -1)
        if self.size <= DENSE_LIMIT and len(freqs) > 0:
            mats = self.dense_matrices(freqs)
            conds = np.linalg.cond(mats, p=1) if self.size else np.ones(len(freqs))
            bad = ~np.isfinite(conds) | (conds > 1e17)
            if bad.any():
                raise singular_error(self.network, float(freqs[np.argmax(bad)]), f"condition number {conds[bad][0]:.3g}")
            xs = np.linalg.solve(mats, np.broadcast_to(rhs, (len(freqs),) + rhs.shape))
            return xs, conds
        xs = np.empty((len(freqs), self.size, rhs.shape[1]), dtype=complex)
        conds = np.empty(len(freqs))
        for i, f in enumerate(freqs):
            fac = self.factorize(float(f))
            xs[i] = fac.solve(rhs)
            conds[i] = fac.condition
        return xs, conds


def one_norm_condition(a: sp.spmatrix, lu: spla.SuperLU) -> float:
    """κ₁(A) = ‖A‖₁·‖A⁻¹‖₁ with ‖A⁻¹‖₁ estimated from a few solves (Hager 1984; Higham 2000)."""
    n = a.shape[0]
    if n == 0:
        return 1.0
    inverse = spla.LinearOperator(
        (n, n),
        matvec=lambda v: lu.solve(np.asarray(v, dtype=complex).ravel()),
        rmatvec=lambda v: lu.solve(np.asarray(v, dtype=complex).ravel(), trans="H"),
        dtype=complex,
    )
    norm_a = spla.norm(a, 1)
    if n <= 4:
        inv_norm = np.abs(lu.solve(np.eye(n, dtype=complex))).sum(axis=0).max()
    else:
        inv_norm = spla.onenormest(inverse)
    return float(norm_a * inv_norm)


def singular_error(network: Network, freq_hz: float, detail: str, matrix: sp.spmatrix | None = None,
                   node_names: tuple[str, ...] = ()) -> SingularNetworkError:
    """Name the likely cause of a singular matrix from the structure at this frequency.

    With no structural cause, the nodes are read from the matrix's null space when it is given.
    """
    from .diagnose import likely_singularity, nodes_in_null_space  # late import keeps the hot path lean

    cause, nodes = likely_singularity(network, freq_hz)
    if not nodes and matrix is not None:
        nodes = nodes_in_null_space(matrix, node_names)
        if nodes:
            cause += f"; the undetermined voltages are at node(s) {', '.join(nodes[:8])}"
    where = f" at {freq_hz:g} Hz" if freq_hz else " at DC (0 Hz)"
    return SingularNetworkError(f"the network's equations are singular{where}: {cause} ({detail})",
                                nodes=nodes, freq_hz=freq_hz)
