"""Large networks of five topology families (ladder, tree, grid, random, powergrid), for benchmarks and scale tests.

Each family has a known shape of sparsity: a ladder is near-tridiagonal, a tree has no loops, a grid's
factors fill in, a random geometric graph has irregular fill, and a power grid is two resistor meshes
joined by vias (see ``powergrid``). Values are drawn from one seeded generator.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import replace

import numpy as np

from crosscheck.model.graph import UnionFind
from crosscheck.model.network import GROUND, Element, Network, Port

FAMILIES = ("ladder", "tree", "grid", "random", "powergrid")


def build(family: str, nodes: int, seed: int = 1) -> tuple[Network, Port]:
    """A network of ``family`` with ``nodes`` non-ground nodes (a grid rounds to a square), and its port."""
    rng = np.random.default_rng(seed)
    builders: dict[str, Callable] = {"ladder": _ladder, "tree": _tree, "grid": _grid, "random": _random}
    if family == "powergrid":
        return powergrid(nodes, seed)
    if family not in builders:
        raise ValueError(f"family {family!r} is unknown; choose from {', '.join(FAMILIES)}")
    elements, port = builders[family](nodes, rng)
    return Network(f"bench {family} {nodes}", tuple(elements)), port


def _el(name: str, kind: str, a: str, b: str, value: float = 0.0, ac: float = 0.0) -> Element:
    return Element(name, kind, (a, b), float(value), ac_mag=ac)


def _reactive(name: str, kind: str, a: str, b: str, rng) -> Element:
    value = rng.uniform(1e-9, 1e-7) if kind == "C" else rng.uniform(1e-5, 1e-3)
    return _el(f"{kind.lower()}{name}", kind, a, b, value)


def _ladder(n: int, rng) -> tuple[list[Element], Port]:
    out = [_el("v1", "V", "n1", "0", ac=1.0)]
    for i in range(1, n):
        a, b = f"n{i}", f"n{i + 1}"
        out.append(_el(f"r{i}", "R", a, b, rng.uniform(1.0, 100.0)))
        out.append(_reactive(str(i), "C" if i % 2 else "L", b, "0", rng))
        out.append(_el(f"rs{i}", "R", b, "0", rng.uniform(1e3, 1e5)))
    return out, Port(f"n{n}", "0")


def _tree(n: int, rng) -> tuple[list[Element], Port]:
    out = [_el("v1", "V", "t1", "0", ac=1.0)]
    for i in range(2, n + 1):
        parent = int(rng.integers(max(1, i - 50), i))
        out.append(_el(f"r{i}", "R", f"t{parent}", f"t{i}", rng.uniform(1.0, 100.0)))
        out.append(_reactive(str(i), "C" if i % 2 else "L", f"t{i}", "0", rng))
        if i % 3 == 0:
            out.append(_el(f"rs{i}", "R", f"t{i}", "0", rng.uniform(1e3, 1e5)))
    return out, Port(f"t{n}", "0")


def _grid(n: int, rng) -> tuple[list[Element], Port]:
    side = max(2, round(math.sqrt(n)))
    out = [_el("v1", "V", "g0_0", "0", ac=1.0)]
    for r in range(side):
        for c in range(side):
            here = f"g{r}_{c}"
            if c + 1 < side:
                out.append(_el(f"rh{r}_{c}", "R", here, f"g{r}_{c + 1}", rng.uniform(1.0, 100.0)))
            if r + 1 < side:
                out.append(_el(f"rv{r}_{c}", "R", here, f"g{r + 1}_{c}", rng.uniform(1.0, 100.0)))
            if (r + c) % 3 == 1:
                out.append(_reactive(f"{r}_{c}", "C", here, "0", rng))
            elif (r + c) % 3 == 2:
                out.append(_el(f"rs{r}_{c}", "R", here, "0", rng.uniform(1e3, 1e5)))
    return out, Port(f"g{side - 1}_{side - 1}", "0")


def _random(n: int, rng) -> tuple[list[Element], Port]:
    from scipy.spatial import cKDTree

    points = rng.random((n, 2))
    _, near = cKDTree(points).query(points, 4)
    edges = sorted({(min(i, int(j)), max(i, int(j))) for i in range(n) for j in near[i, 1:]})
    out = [_el("v1", "V", "x0", "0", ac=1.0)]
    for m, (a, b) in enumerate(edges):
        kind = "RRLC"[m % 4]
        if kind == "R":
            out.append(_el(f"r{m}", "R", f"x{a}", f"x{b}", rng.uniform(1.0, 1e3)))
        else:
            out.append(_reactive(str(m), kind, f"x{a}", f"x{b}", rng))
    for i in range(0, n, 5):
        out.append(_el(f"rs{i}", "R", f"x{i}", "0", rng.uniform(1e3, 1e5)))
    joined = UnionFind()
    for e in out:
        joined.union(*e.terminals)
    for i in range(n):  # a cluster of points far from the rest: tie it to ground
        if joined.find(f"x{i}") != joined.find("0"):
            out.append(_el(f"rj{i}", "R", f"x{i}", "0", 1e4))
            joined.union(f"x{i}", "0")
    return out, Port(f"x{n - 1}", "0")


#: Power grid: ohms per segment on the lower (thin, high sheet resistance) and the upper metal layer.
LOWER_OHMS = (0.4, 0.6)
UPPER_OHMS = (0.02, 0.03)
#: An upper strap runs over every ``VIA_PITCH``-th column, with a via at each rail it crosses; a pad sits on
#: a strap every ``PAD_PITCH`` nodes along it, on every ``PAD_PITCH // VIA_PITCH``-th strap.
VIA_PITCH = 4
PAD_PITCH = 16
VIA_OHMS = 0.5
SUPPLY_VOLTS = 1.0
#: Load current drawn to ground at every second lower-layer node (amperes).
LOAD_AMPS = (1e-5, 1e-4)


def powergrid(nodes: int, seed: int = 1, excitation: str = "dc", *, mesh: bool = False) -> tuple[Network, Port]:
    """A power-distribution grid of about ``nodes`` nodes, DC values only, and a port at its centre.

    The lower layer is s horizontal rails of s nodes (``LOWER_OHMS`` per segment); the upper layer is a
    vertical strap over every ``VIA_PITCH``-th column (``UPPER_OHMS``: a lower sheet resistance), joined
    to every rail it crosses by a via of ``VIA_OHMS``, as power grids are drawn (rails on one layer, straps
    across them on the next). ``mesh=True`` makes both layers full square meshes instead (a denser
    network, harder for ngspice's ordering). Pad voltage sources of ``SUPPLY_VOLTS`` to ground sit on the
    straps every ``PAD_PITCH`` nodes; load current sources to ground at every second lower-layer node.
    The port is the lower layer's centre node to ground: an interior node, far from the edges.

    ``excitation="dc"``: the sources carry DC values (``Element.dc_value``) and no AC value, and the
    network says ``excitation = "dc"``. With ``excitation="ac"`` each source's AC magnitude is its DC
    value instead, which gives the same numbers at 0 Hz through the AC route.
    """
    rng = np.random.default_rng(seed)
    share = 2.0 if mesh else 1.0 + 1.0 / VIA_PITCH  # upper-layer nodes per lower-layer node
    side = max(VIA_PITCH + 1, round(math.sqrt(nodes / share)))
    dc = excitation == "dc"
    columns = range(side) if mesh else range(0, side, VIA_PITCH)
    out = _mesh("m", side, range(side), LOWER_OHMS, rng, vertical=mesh)
    out += _mesh("t", side, columns, UPPER_OHMS, rng, horizontal=mesh)
    for r in range(0, side, VIA_PITCH if mesh else 1):
        for c in range(0, side, VIA_PITCH):
            out.append(_el(f"rv{r}_{c}", "R", f"m{r}_{c}", f"t{r}_{c}", VIA_OHMS))
    half = PAD_PITCH // 2
    for r in range(half % side, side, PAD_PITCH):
        for c in range(half % side, side, PAD_PITCH):
            column = c - c % VIA_PITCH  # on a strap
            out.append(_source(f"vp{r}_{column}", "V", f"t{r}_{column}", GROUND, SUPPLY_VOLTS, dc))
    for r in range(side):
        for c in range(r % 2, side, 2):
            out.append(_source(f"il{r}_{c}", "I", f"m{r}_{c}", GROUND, float(rng.uniform(*LOAD_AMPS)), dc))
    network = Network(f"bench powergrid {side * (side + len(columns))}", tuple(out))
    if dc:
        network = replace(network, excitation="dc")
    centre = side // 2
    return network, Port(f"m{centre}_{centre}", GROUND)


def _mesh(
    layer: str,
    side: int,
    columns: range,
    ohms: tuple[float, float],
    rng,
    *,
    horizontal: bool = True,
    vertical: bool = True,
) -> list[Element]:
    """Segments of one layer over ``columns``: along each row (``horizontal``) and down each column (``vertical``)."""
    out = []
    chosen = set(columns)
    for r in range(side):
        for c in columns:
            if horizontal and c + 1 < side and c + 1 in chosen:
                out.append(_el(f"r{layer}h{r}_{c}", "R", f"{layer}{r}_{c}", f"{layer}{r}_{c + 1}", rng.uniform(*ohms)))
            if vertical and r + 1 < side:
                out.append(_el(f"r{layer}v{r}_{c}", "R", f"{layer}{r}_{c}", f"{layer}{r + 1}_{c}", rng.uniform(*ohms)))
    return out


def _source(name: str, kind: str, a: str, b: str, value: float, dc: bool) -> Element:
    if dc:
        return Element(name, kind, (a, b), dc_value=value)
    return Element(name, kind, (a, b), ac_mag=value)
