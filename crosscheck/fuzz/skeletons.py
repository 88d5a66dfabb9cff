"""Topology skeletons of the seeded generator: which node pairs get an R, L or C branch.

Every skeleton joins each node to ground through its edges, so the network is connected and no node
is reached through current sources alone; the families differ in shape (a chain, a mesh, a random
graph, a deep tree, cascaded bridges).
"""

from __future__ import annotations

import math

from crosscheck.fuzz.draft import Draft
from crosscheck.model.network import GROUND


def _ladder(d: Draft, nodes: list[str]) -> list[tuple[str, str]]:
    """Series branches along a chain, shunts to ground (the last node always has one)."""
    edges = [(nodes[-1], GROUND)] + [(nodes[i], nodes[i + 1]) for i in range(len(nodes) - 1)]
    edges += [(n, GROUND) for n in nodes[:-1] if d.chance(0.7)]
    return edges


def _grid(d: Draft, nodes: list[str]) -> list[tuple[str, str]]:
    """A mesh, row by row, with its first corner (and sometimes others) to ground."""
    cols = max(1, math.ceil(math.sqrt(len(nodes))))
    edges = [(nodes[0], GROUND)]
    for i, n in enumerate(nodes):
        if (i + 1) % cols and i + 1 < len(nodes):
            edges.append((n, nodes[i + 1]))
        if i + cols < len(nodes):
            edges.append((n, nodes[i + cols]))
    for corner in (nodes[-1], nodes[min(cols, len(nodes)) - 1]):
        if corner != nodes[0] and d.chance(0.5):
            edges.append((corner, GROUND))
    return edges


def _random_tree(d: Draft, nodes: list[str], depth: int | None) -> list[tuple[str, str]]:
    """Each node hangs from an earlier one (or ground); ``depth`` limits the choice to the last few: deeper trees."""
    edges = []
    earlier = [GROUND]
    for n in nodes:
        pool = earlier if depth is None else earlier[-depth:]
        edges.append((n, d.choice(pool)))
        earlier.append(n)
    return edges


def _random(d: Draft, nodes: list[str]) -> list[tuple[str, str]]:
    """A random tree plus up to as many random chords as nodes (parallel branches allowed)."""
    edges = _random_tree(d, nodes, None)
    everything = [GROUND, *nodes]
    for _ in range(int(d.rng.integers(0, len(nodes) + 1))):
        edges.append(d.pair(everything))
    return edges


def _tree(d: Draft, nodes: list[str]) -> list[tuple[str, str]]:
    """A deep tree with one or two links: few loops, long paths."""
    edges = _random_tree(d, nodes, 2)
    everything = [GROUND, *nodes]
    for _ in range(int(d.rng.integers(1, 3)) if len(everything) > 2 else 0):
        edges.append(d.pair(everything))
    return edges


def _bridge(d: Draft, nodes: list[str]) -> list[tuple[str, str]]:
    """Cascaded Wheatstone sections: from (p, q), two arms to x and y, x-y the bridge; the next section
    is fed from (x, y). The first is fed between nodes[0] and ground; a spare node hangs off the last."""
    top = nodes[0]
    edges = [(top, GROUND)]
    p, q = top, GROUND
    rest = nodes[1:]
    pairs = []
    while len(rest) >= 2:
        x, y, rest = rest[0], rest[1], rest[2:]
        edges += [(p, x), (p, y), (x, q), (y, q), (x, y)]
        pairs.append((x, y))
        p, q = x, y
    for n in rest:
        edges.append((n, d.choice([p, q] if q != GROUND else [p])))
    d.preferred_ports = pairs
    return edges


#: Each family's skeleton: the edges of R, L and C branches that join every node to ground.
SKELETONS = {"ladder": _ladder, "grid": _grid, "random": _random, "tree": _tree, "bridge": _bridge}
