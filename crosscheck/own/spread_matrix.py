"""The MNA matrix as a function of the varied parts: values at any part values, and its derivative.

``MnaSystem`` assembles A(ω) = A0 + jω·A1 once on a fixed sparsity pattern; a varied part only moves the
values of a few stored entries. Each part's stamp is written here as unit entries times a coefficient
(1/R for a resistor, the value itself for C, L and the controlled sources' gains), so the matrix at any
part values is the nominal one plus a sparse correction, and dA/dp is the unit entries times the
coefficient's derivative. Coupled inductors are the one nonlinear case (M = k·sqrt(L1·L2)): their two
entries are recomputed from the part values. Source magnitudes move the right-hand side only.

The stamps mirror ``own.assembly`` (the correct stamps); ``tests/test_spread.py`` holds the values built
here against ``MnaSystem`` assembled afresh from the changed network, entry for entry.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, replace

import numpy as np
import scipy.sparse as sp

from crosscheck.model.network import Network, Port, dc_view, floating_reference
from crosscheck.model.vary import SpreadError, VariedPart
from crosscheck.own.solver import MnaSystem


@dataclass(frozen=True)
class _Coupling:
    """One K element touched by a varied part: where its -M entries sit, and which parts set k, L1, L2."""

    entries: tuple[int, int]  # data indices of (k1, k2) and (k2, k1) in A1
    nominal: tuple[float, float, float]  # k, L1, L2
    parts: tuple[int, int, int]  # the varied part setting each of k, L1, L2 (-1: not varied)


class VariedSystem:
    """One network's MNA system with the varied parts as parameters (``values`` is (S, P): S value sets)."""

    def __init__(self, network: Network, port: Port, parts: Sequence[VariedPart]):
        if network.excitation == "dc":
            network = dc_view(network)
        ties = [r] if (r := floating_reference(network, port)) is not None else []
        self.system = MnaSystem(network, ties)
        self.network = network
        self.parts = tuple(parts)
        self.nominal = np.array([p.nominal for p in parts], dtype=float)
        self.size = self.system.size
        pattern = self.system._pattern
        self._rows = pattern.indices.astype(np.intp)
        self._cols = np.repeat(np.arange(self.size), np.diff(pattern.indptr))
        self._keys = self._cols * self.size + self._rows  # CSC order with sorted rows: increasing
        self.a0 = self.system._a0
        self.a1 = self.system._a1
        self.resistor = np.array([p.kind == "R" and p.parameter == "value" for p in parts], dtype=bool)
        self.rhs = np.stack([self.system.source_vector(), self.system.injection_vector(port.a, port.b)], axis=1)
        self.port_rows = (self.system.node_index.get(port.a), self.system.node_index.get(port.b))
        self._build_units(network)

    # ------------------------------------------------------------------ stamps as unit entries

    def _index(self, r: int | None, c: int | None) -> int | None:
        if r is None or c is None:
            return None
        i = int(np.searchsorted(self._keys, c * self.size + r))
        if i >= len(self._keys) or self._keys[i] != c * self.size + r:
            raise AssertionError(f"entry ({r}, {c}) is not in the pattern")
        return i

    def _build_units(self, network: Network) -> None:
        """W0, W1 (P x nnz, sparse), the source units (P x n), and the couplings."""
        w0: list[tuple[int, int, float]] = []
        w1: list[tuple[int, int, float]] = []
        self.source_units = np.zeros((len(self.parts), self.size), dtype=complex)
        node = self.system.node_index.get
        branch = self.system.branch_index
        by_name = {e.name: e for e in network.elements}
        for i, p in enumerate(self.parts):
            e = by_name[p.element]
            put0 = lambda r, c, w, i=i: self._put(w0, i, r, c, w)  # noqa: E731
            put1 = lambda r, c, w, i=i: self._put(w1, i, r, c, w)  # noqa: E731
            if e.kind in "RC":
                a, b = (node(n) for n in e.terminals)
                put = put0 if e.kind == "R" else put1
                put(a, a, 1.0), put(b, b, 1.0), put(a, b, -1.0), put(b, a, -1.0)
            elif e.kind == "L":
                put1(branch[e.name], branch[e.name], -1.0)
            elif e.kind == "G":
                pn, mn, cp, cm = (node(n) for n in e.nodes)
                put0(pn, cp, 1.0), put0(pn, cm, -1.0), put0(mn, cp, -1.0), put0(mn, cm, 1.0)
            elif e.kind == "F":
                k = branch[e.control]  # type: ignore[index]
                put0(node(e.nodes[0]), k, 1.0), put0(node(e.nodes[1]), k, -1.0)
            elif e.kind == "E":
                k = branch[e.name]
                put0(k, node(e.nodes[2]), -1.0), put0(k, node(e.nodes[3]), 1.0)
            elif e.kind == "H":
                put0(branch[e.name], branch[e.control], -1.0)  # type: ignore[index]
            elif e.kind in "VI":
                # d(phasor)/d(parameter): e^{jφ} for an AC magnitude; 1 for a DC value (its phasor is the value)
                unit = 1.0 + 0j if p.parameter == "dc_value" else replace(e, ac_mag=1.0).phasor
                if e.kind == "V":
                    self.source_units[i, branch[e.name]] = unit
                else:
                    for n, sign in zip(e.terminals, (-1.0, 1.0)):
                        row = node(n)
                        if row is not None:
                            self.source_units[i, row] += sign * unit
        nnz = len(self._keys)
        self.w0 = _units(w0, len(self.parts), nnz)
        self.w1 = _units(w1, len(self.parts), nnz)
        self._couplings = self._find_couplings(network)
        self._slots0, self._slots1 = _slots(self.w0), _slots(self.w1)
        self._moving_sources = np.flatnonzero([p.kind in "VI" for p in self.parts])

    def _put(self, out: list, part: int, r: int | None, c: int | None, w: float) -> None:
        i = self._index(r, c)
        if i is not None:
            out.append((part, i, w))

    def _find_couplings(self, network: Network) -> tuple[_Coupling, ...]:
        position = {p.element: i for i, p in enumerate(self.parts)}
        branch = self.system.branch_index
        by_name = {e.name: e for e in network.elements}
        out = []
        for e in network.by_kind("K"):
            l1, l2 = (by_name[n] for n in e.coupled)  # type: ignore[union-attr]
            who = (position.get(e.name, -1), position.get(l1.name, -1), position.get(l2.name, -1))
            if who == (-1, -1, -1):
                continue
            k1, k2 = branch[l1.name], branch[l2.name]
            entries = (self._index(k1, k2), self._index(k2, k1))
            out.append(_Coupling(entries, (e.value, l1.value, l2.value), who))  # type: ignore[arg-type]
        return tuple(out)

    # ------------------------------------------------------------------ values

    def coefficients(self, values: np.ndarray) -> np.ndarray:
        """The stamp coefficient of each part: 1/R for resistors, the value itself otherwise."""
        out = np.array(values, dtype=float, copy=True)
        out[..., self.resistor] = 1.0 / out[..., self.resistor]
        return out

    def _coupling_values(self, values: np.ndarray) -> list[np.ndarray]:
        """Each coupling's mutual inductance M at each value set (S,)."""
        out = []
        for c in self._couplings:
            k, l1, l2 = (values[:, j] if j >= 0 else np.full(len(values), nom) for j, nom in zip(c.parts, c.nominal))
            out.append(k * np.sqrt(l1 * l2))
        return out

    def data(self, values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """A0 and A1 entries (S, nnz) at S value sets (rows of ``values``, in part order)."""
        values = np.atleast_2d(values)
        change = self.coefficients(values) - self.coefficients(self.nominal)
        d0 = _moved(self.a0, self._slots0, change)
        d1 = _moved(self.a1, self._slots1, change)
        for c, m in zip(self._couplings, self._coupling_values(values)):
            nominal_m = c.nominal[0] * math.sqrt(c.nominal[1] * c.nominal[2])
            for idx in c.entries:
                d1[:, idx] -= m - nominal_m
        return np.ascontiguousarray(d0), np.ascontiguousarray(d1)

    def sources(self, values: np.ndarray) -> np.ndarray:
        """The source right-hand side (S, n) at S value sets (source magnitudes are linear)."""
        values = np.atleast_2d(values)
        moving = self._moving_sources
        out = np.repeat(self.rhs[None, :, 0], len(values), axis=0)
        if len(moving):
            out += (values[:, moving] - self.nominal[moving]) @ self.source_units[moving]
        return out

    # ------------------------------------------------------------------ derivatives at nominal

    def sensitivities(
        self, freqs_hz: np.ndarray, xs: np.ndarray, lam: np.ndarray, values: np.ndarray | None = None
    ) -> np.ndarray:
        """d(port voltage)/dp for both right-hand sides: (F, 2, P) from solutions xs (F, n, 2), λ = A⁻ᵀc (F, n).

        dq/dp = λᵀ(db/dp − dA/dp·x): one product per stored entry, shared by every part. Row f is taken at
        ``freqs_hz[f]`` and at the part values ``values[f]`` (None: nominal values for every row).
        """
        omega = 2.0 * np.pi * np.asarray(freqs_hz, dtype=float)
        out = np.empty((len(omega), 2, len(self.parts)), dtype=complex)
        for f, w in enumerate(omega):
            at = self.nominal if values is None else values[f]
            slope = np.where(self.resistor, -1.0 / at**2, 1.0)
            for k in range(2):
                t = lam[f, self._rows] * xs[f, self._cols, k]  # (nnz,)
                da = (self.w0 @ t + 1j * w * (self.w1 @ t)) * slope
                for c in self._couplings:
                    kml = [at[j] if j >= 0 else nom for j, nom in zip(c.parts, c.nominal)]
                    m = kml[0] * math.sqrt(kml[1] * kml[2])
                    shared = -1j * w * (t[c.entries[0]] + t[c.entries[1]])
                    for i, j in enumerate(c.parts):
                        if j >= 0:  # dM/dk = M/k; dM/dL = M/(2L)
                            da[j] += shared * m / (kml[0] if i == 0 else 2.0 * kml[i])
                out[f, k] = -da
                if k == 0 and len(self._moving_sources):
                    out[f, k, self._moving_sources] += self.source_units[self._moving_sources] @ lam[f]
        return out

    def port_voltage(self, x: np.ndarray) -> np.ndarray:
        """V(a) − V(b) along the first axis of ``x``."""
        a, b = self.port_rows
        zero = np.zeros_like(x[0])
        return np.asarray((x[a] if a is not None else zero) - (x[b] if b is not None else zero))

    def port_vector(self) -> np.ndarray:
        """c with V(a) − V(b) = cᵀx."""
        c = np.zeros(self.size)
        a, b = self.port_rows
        if a is not None:
            c[a] += 1.0
        if b is not None:
            c[b] -= 1.0
        return c

    def dense(self, d0: np.ndarray, d1: np.ndarray, freq_hz: float) -> np.ndarray:
        """(S, n, n) dense matrices from entries (S, nnz) at one frequency."""
        mats = np.zeros((len(d0), self.size, self.size), dtype=complex)
        mats[:, self._rows, self._cols] = d0 + 2j * math.pi * freq_hz * d1
        return mats

    def singular(self, freq_hz: float, nominal: bool = False) -> SpreadError:
        if nominal:
            return SpreadError(
                f"the network with the port open is singular at {freq_hz:g} Hz at nominal values (it has no "
                "Thevenin form there); spread analysis works on the open-port form: leave that frequency out"
            )
        return SpreadError(
            f"the network is singular at {freq_hz:g} Hz at some part values of the spread; narrow the "
            "tolerances or check the network at nominal values"
        )


def _units(entries: list[tuple[int, int, float]], parts: int, nnz: int) -> sp.csr_matrix:
    if not entries:
        return sp.csr_matrix((parts, nnz))
    p, i, w = zip(*entries)
    m = sp.coo_matrix((w, (p, i)), shape=(parts, nnz)).tocsr()
    m.sum_duplicates()
    return m


def _slots(w: sp.csr_matrix) -> list[tuple[np.ndarray, np.ndarray, np.ndarray]]:
    """W (P x nnz) as slots of (parts, entries, weights) in which no entry repeats, so that each slot adds
    its columns with one fancy-indexed update (a node's diagonal entry takes one part per slot)."""
    coo = w.tocoo()
    order = np.lexsort((coo.row, coo.col))
    part, entry, weight = coo.row[order], coo.col[order], coo.data[order]
    first = np.r_[True, entry[1:] != entry[:-1]]
    rank = np.arange(len(entry)) - np.maximum.accumulate(np.where(first, np.arange(len(entry)), 0))
    return [(part[rank == r], entry[rank == r], weight[rank == r]) for r in range(int(rank.max(initial=-1)) + 1)]


def _moved(base: np.ndarray, slots: list[tuple[np.ndarray, np.ndarray, np.ndarray]], change: np.ndarray) -> np.ndarray:
    """base + change @ W, (S, nnz), row by row contiguous (each row is one value set's entries)."""
    out = np.repeat(base[None, :], len(change), axis=0)
    for part, entry, weight in slots:
        out[:, entry] += change[:, part] * weight
    return out
