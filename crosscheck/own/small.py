"""The own route's path for small networks: A(ω) as dense numpy arrays, a sweep as one batched solve.

Most cases a user or the fuzzer checks have a few to a few dozen nodes, where the solve itself takes
microseconds and the cost is everything around it. This path builds A0 and A1 from the same entries as
the sparse path (``assembly.entries``, the same stamps), sums them into dense arrays with two
``bincount`` calls, and solves every frequency in one batched LAPACK call, with the exact 1-norm
condition number from the batched inverse. It does the same arithmetic as ``solver``'s dense path
(summing duplicate entries may differ in order, so results agree to rounding), without importing
scipy.sparse or making a sparse matrix: a small ``reduce`` starts faster, and a small case costs less.

Anything out of the ordinary goes back to the general path (``SmallSystem.solve_many`` returns None):
a singular or near-singular matrix, whose cause ``own.diagnose`` names and whose Norton form the general
path finds with the port shorted.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from crosscheck.model.budget import DENSE_BATCH_ENTRIES, NO_DEADLINE, Deadline
from crosscheck.model.network import Network
from crosscheck.own.assembly import (
    BRANCH_KINDS,
    STAMPS,
    RightHandSides,
    Stamps,
    entries,
)

#: Up to this many unknowns (nodes, branch currents and ties) a network takes this path. The same bound
#: as ``solver.DENSE_LIMIT``, below which a batched dense solve beats sparse LU: this path replaces that
#: one for the networks it takes and leaves the larger ones where they were.
SMALL_LIMIT = 80
#: A 1-norm condition number above this is a singular matrix in double precision (1/ε ≈ 4.5e15, with
#: room); ``solver`` holds the same bound (``SINGULAR_CONDITION``), and such a matrix goes back to it.
SINGULAR_CONDITION = 1e17


class SmallSystem(RightHandSides):
    """The MNA equations of one small network as dense A0 and A1 (unknowns numbered as ``MnaSystem`` does:
    nodes, then branch currents in element order, then ties)."""

    def __init__(
        self,
        network: Network,
        ties: Sequence[str] = (),
        stamps: Stamps = STAMPS,
        branch_elements: np.ndarray | None = None,
    ):
        self.network = network
        self.node_index: dict[str, int] = network.node_index
        if branch_elements is None:
            branch_elements = _branch_elements(network)
        elements = network.elements
        branches = [elements[i].name for i in np.flatnonzero(branch_elements).tolist()]
        branches += [f"tie:{n}" for n in ties]
        offset = len(self.node_index)
        self.branch_index: dict[str, int] = dict(zip(branches, range(offset, offset + len(branches))))
        self._stamps = stamps
        plain = type(stamps) is Stamps and not ties  # the correct stamps, no ties: R, C, L, V written directly
        if plain and network.element_arrays.of_kind(_DIRECT_KINDS).all():
            rows, cols, a0, a1 = _direct_entries(network, branch_elements, offset)
            n = offset + len(branches)
        else:
            rows, cols, a0, a1, n = entries(network, self.node_index, self.branch_index, branch_elements, ties, stamps)
        self.size = n
        self.nonzeros = len(rows)
        # Ground is index -1: modulo n + 1 it is the extra last row and column, dropped after summing.
        flat = (rows % (n + 1)) * (n + 1) + cols % (n + 1)
        self.a0 = np.bincount(flat, weights=a0, minlength=(n + 1) ** 2).reshape(n + 1, n + 1)[:n, :n]
        self.a1 = np.bincount(flat, weights=a1, minlength=(n + 1) ** 2).reshape(n + 1, n + 1)[:n, :n]

    def solve_many(
        self, freqs: np.ndarray, rhs: np.ndarray, deadline: Deadline = NO_DEADLINE
    ) -> tuple[np.ndarray, np.ndarray] | None:
        """(F, n, k) solutions of A(ω)·X = rhs and the (F,) exact 1-norm condition numbers, in batches of at
        most DENSE_BATCH_ENTRIES matrix entries (the deadline checked between them); None when some A(ω)
        is singular or nearly so (the caller takes the general path, which names the cause)."""
        n, k = self.size, rhs.shape[1]
        if n == 0:
            return None
        batch = max(1, DENSE_BATCH_ENTRIES // (n * n))
        if len(freqs) <= batch:
            return self._solve_batch(freqs, rhs)
        xs = np.empty((len(freqs), n, k), dtype=complex)
        conds = np.empty(len(freqs))
        for start in range(0, len(freqs), batch):
            deadline.check(start, len(freqs))
            solved = self._solve_batch(freqs[start : start + batch], rhs)
            if solved is None:
                return None
            xs[start : start + batch], conds[start : start + batch] = solved
        return xs, conds

    def _solve_batch(self, freqs: np.ndarray, rhs: np.ndarray) -> tuple[np.ndarray, np.ndarray] | None:
        """One batched LAPACK solve of the right-hand sides and the identity together (the inverse is what
        ``numpy.linalg.inv`` computes, on the same factors); κ₁ = ‖A‖₁·‖A⁻¹‖₁ as ``numpy.linalg.cond(A, 1)``."""
        omega = (2.0 * math.pi) * freqs
        mats = self.a0 + (1j * omega)[:, None, None] * self.a1
        k = rhs.shape[1]
        columns = np.concatenate([rhs, np.eye(self.size)], axis=1)
        try:
            both = np.linalg.solve(mats, np.broadcast_to(columns, (len(freqs),) + columns.shape))
        except np.linalg.LinAlgError:  # an exactly singular A(ω)
            return None
        conds = np.abs(mats).sum(axis=-2).max(axis=-1) * np.abs(both[:, :, k:]).sum(axis=-2).max(axis=-1)
        if not (conds <= SINGULAR_CONDITION).all():  # NaN included
            return None
        return both[:, :, :k], conds


def small_system(network: Network, ties: Sequence[str], stamps: Stamps = STAMPS) -> SmallSystem | None:
    """The dense system of ``network`` when it has at most SMALL_LIMIT unknowns (counted before assembly,
    capacitors stamped as impedances included), else None."""
    branch_elements = _branch_elements(network)
    unknowns = len(network.node_index) + len(ties) + int(np.count_nonzero(branch_elements))
    if stamps.capacitor_as_impedance:
        unknowns += int(np.count_nonzero(network.element_arrays.kind == ord("C")))
    if unknowns > SMALL_LIMIT:
        return None
    return SmallSystem(network, ties, stamps, branch_elements)


#: The kinds ``_direct_entries`` writes (every other kind goes through ``assembly.entries``).
_DIRECT_KINDS = frozenset("RCLV")


def _branch_elements(network: Network) -> np.ndarray:
    """Which elements carry a branch current: V, E, H, L and ideal shorts (R = 0), as ``MnaSystem`` has it."""
    arrays = network.element_arrays
    return arrays.of_kind(BRANCH_KINDS) | ((arrays.kind == ord("R")) & (arrays.value == 0.0))


def _direct_entries(
    network: Network, branch_elements: np.ndarray, nodes: int
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """The correct stamps' entries of a network of R, C, L and V only (``assembly._bulk_entries``' stamps,
    written as one array each: rows, columns, A0 and A1 values; -1 is ground, kept for the caller to drop).

    An admittance y between a and b: +y at (a, a) and (b, b), -y at (a, b) and (b, a). A branch k from a
    to b (L, V, ideal short): +1 at (a, k) and (k, a), -1 at (b, k) and (k, b); an inductor adds -L at
    (k, k) in A1 (its row reads V(a) - V(b) - jωL·I = 0).
    """
    arrays = network.element_arrays
    kind, value, a, b = arrays.kind, arrays.value, arrays.a, arrays.b
    admittance = ~branch_elements  # R (not 0) and C
    resistor = kind[admittance] == ord("R")
    ya, yb, yv = a[admittance], b[admittance], value[admittance]
    y0 = np.where(resistor, 1.0 / np.where(resistor, yv, 1.0), 0.0)
    y1 = np.where(resistor, 0.0, yv)
    k = nodes + np.arange(int(np.count_nonzero(branch_elements)))
    ka, kb = a[branch_elements], b[branch_elements]
    inductance = np.where(kind[branch_elements] == ord("L"), value[branch_elements], 0.0)
    ones, zeros_k = np.ones(len(k)), np.zeros(len(k))
    rows = np.concatenate([ya, yb, ya, yb, ka, kb, k, k, k])
    cols = np.concatenate([ya, yb, yb, ya, k, k, ka, kb, k])
    a0 = np.concatenate([y0, y0, -y0, -y0, ones, -ones, ones, -ones, zeros_k])
    a1 = np.concatenate([y1, y1, -y1, -y1, zeros_k, zeros_k, zeros_k, zeros_k, -inductance])
    return rows, cols, a0, a1
