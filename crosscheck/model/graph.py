"""Graph helpers over node names and node indices: one union-find, and connected parts with scipy.

The union-find serves every check that walks branches one at a time and must name the branch that
closes a loop (validation, the fuzz generators, the engines' diagnoses); ``connected_parts`` counts
parts of thousands of branches at once with scipy, without a Python call per branch (and a graph of
up to a few thousand vertices by a union-find over vertex numbers, cheaper there than importing scipy's).
"""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Iterable

import numpy as np


class UnionFind:
    """Disjoint sets of node names; a name not seen before is a set of its own."""

    def __init__(self) -> None:
        self.parent: dict[str, str] = {}

    def find(self, x: str) -> str:
        """The representative of ``x``'s set (path halving keeps later look-ups short)."""
        self.parent.setdefault(x, x)
        while self.parent[x] != x:
            self.parent[x] = self.parent[self.parent[x]]
            x = self.parent[x]
        return x

    def union(self, a: str, b: str) -> bool:
        """Join two sets; False when they were already one (the new edge closes a loop)."""
        ra, rb = self.find(a), self.find(b)
        if ra == rb:
            return False
        self.parent[ra] = rb
        return True

    def groups(self, items: Iterable[str]) -> dict[str, list[str]]:
        """``items`` grouped by their set's representative, each group in the order given."""
        out: dict[str, list[str]] = defaultdict(list)
        for x in items:
            out[self.find(x)].append(x)
        return out

    def open_pairs(self, nodes: list[str]) -> list[tuple[str, str]]:
        """Every pair (a, b), a before b in ``nodes``, that an edge could join without closing a loop."""
        return [(a, b) for i, a in enumerate(nodes) for b in nodes[i + 1 :] if self.find(a) != self.find(b)]


#: Up to this many vertices ``connected_parts`` walks the branches in Python. Importing scipy's graph module
#: (it pulls in scipy.sparse.linalg) costs about 0.2 s of a command's start, more than the walk takes at
#: 5,000 vertices (measured: 20,000 vertices and 40,000 branches, 33 ms by the walk; scipy 198 ms the first
#: time, 8 ms once loaded), so a network of a few thousand nodes reads without it.
SMALL_GRAPH = 5_000


def connected_parts(a: np.ndarray, b: np.ndarray, size: int) -> tuple[int, np.ndarray]:
    """How many connected parts the branches ``a[i]``–``b[i]`` make over vertices ``0..size-1``, and each
    vertex's part (parts numbered in the order of their lowest vertex, as scipy numbers them)."""
    if size <= SMALL_GRAPH:
        return _small_parts(a.tolist(), b.tolist(), size)
    from scipy.sparse import csr_matrix  # late import: the model itself needs only numpy
    from scipy.sparse.csgraph import connected_components

    # Each branch an arc a -> b, its rows compressed here (half the cost of scipy's COO route at 1,000
    # nodes); the weakly connected parts of these arcs are the connected parts of the branches.
    indptr = np.zeros(size + 1, dtype=np.intp)
    np.cumsum(np.bincount(a, minlength=size), out=indptr[1:])
    graph = csr_matrix((np.ones(len(a)), b[np.argsort(a, kind="stable")], indptr), shape=(size, size))
    parts, labels = connected_components(graph, directed=True, connection="weak")
    return int(parts), labels


def _small_parts(a: list[int], b: list[int], size: int) -> tuple[int, np.ndarray]:
    """``connected_parts`` by a union-find over vertex numbers, for a small graph."""
    parent = list(range(size))

    def root(x: int) -> int:
        while parent[x] != x:
            parent[x] = parent[parent[x]]
            x = parent[x]
        return x

    for x, y in zip(a, b):
        rx, ry = root(x), root(y)
        if rx != ry:
            parent[max(rx, ry)] = min(rx, ry)
    labels: dict[int, int] = {}
    out = [labels.setdefault(root(v), len(labels)) for v in range(size)]
    return len(labels), np.array(out, dtype=np.int32)
