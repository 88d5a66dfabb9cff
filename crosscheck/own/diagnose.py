"""Why a network's equations are singular at one frequency, said in circuit terms.

Validation already refuses what is singular at every frequency; what is left
is singular at some frequencies only: at DC an inductor is a short and a
capacitor is open, and at a lossless resonance a tank's admittance is zero.
``singular_error`` turns that into the error the solver raises.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import scipy.sparse as sp

from crosscheck.errors import SingularNetworkError
from crosscheck.model.graph import UnionFind
from crosscheck.model.network import CURRENT_OUTPUT_KINDS, GROUND, Network

#: Above this many unknowns the null space is not computed (a dense SVD), and no nodes are named.
_NULL_SPACE_LIMIT = 2000


def likely_singularity(network: Network, freq_hz: float, ties: Sequence[str] = ()) -> tuple[str, tuple[str, ...]]:
    """A sentence naming the likely cause, and the nodes or elements involved.

    ``ties``: nodes the solver holds at 0 V (the reference of a part with no ground, see ``MnaSystem``);
    a part tied that way reaches ground through its tie, and is not itself the cause.
    """
    at_dc = freq_hz == 0
    loop = _voltage_loop(network, at_dc)
    if loop:
        kinds = "voltage sources and inductors (short at DC)" if at_dc else "voltage sources"
        return (f"{', '.join(loop)} close a loop of {kinds}; add series resistance or leave out DC", tuple(loop))
    floating = _nodes_without_path(network, at_dc, ties)
    if floating:
        via = "only capacitors (open at DC) or current sources" if at_dc else "only current sources"
        return (
            f"node(s) {', '.join(floating[:8])} reach ground through {via}; add a resistive path "
            "(for example a large resistor to ground) or leave out DC",
            tuple(floating),
        )
    return (
        "no structural cause found: likely a lossless resonance exactly at this frequency, or dependent "
        "source gains that cancel; add a little loss or move the frequency",
        (),
    )


def _voltage_loop(network: Network, at_dc: bool) -> list[str]:
    uf = UnionFind()
    for e in network.elements:
        if e.kind in "VEH" or e.is_short or (at_dc and e.kind == "L"):
            if not uf.union(*e.terminals):
                # Report the closing element and the others on the same nodes' path (all voltage-defined).
                return [
                    x.name
                    for x in network.elements
                    if (x.kind in "VEH" or x.is_short or (at_dc and x.kind == "L"))
                    and uf.find(x.terminals[0]) == uf.find(e.terminals[0])
                ]
    return []


def _nodes_without_path(network: Network, at_dc: bool, ties: Sequence[str] = ()) -> list[str]:
    uf = UnionFind()
    uf.find(GROUND)
    for node in ties:
        uf.union(node, GROUND)
    for e in network.elements:
        if e.kind == "K" or e.kind in CURRENT_OUTPUT_KINDS or (at_dc and e.kind == "C"):
            continue
        uf.union(*e.terminals)
    root = uf.find(GROUND)
    return [n for n in network.nodes if uf.find(n) != root]


def nodes_in_null_space(matrix: sp.spmatrix | np.ndarray, node_names: Sequence[str]) -> tuple[str, ...]:
    """Nodes whose voltages move in the matrix's null space: where a resonance or cancelling gains leave
    the solution undetermined. Empty when the null vector lives in branch currents only."""
    n = matrix.shape[0]
    if n == 0 or n > _NULL_SPACE_LIMIT or not node_names:
        return ()
    dense = matrix if isinstance(matrix, np.ndarray) else matrix.toarray()
    null = np.abs(np.linalg.svd(dense)[2][-1])
    at_nodes = null[: len(node_names)]
    if at_nodes.max(initial=0.0) <= 1e-6 * null.max():
        return ()
    return tuple(name for name, x in zip(node_names, at_nodes) if x >= 0.1 * at_nodes.max())


def singular_error(
    network: Network,
    freq_hz: float,
    detail: str,
    matrix: sp.spmatrix | None = None,
    node_names: tuple[str, ...] = (),
    ties: Sequence[str] = (),
) -> SingularNetworkError:
    """Name the likely cause of a singular matrix from the structure at this frequency.

    With no structural cause, the nodes are read from the matrix's null space when it is given.
    """
    cause, nodes = likely_singularity(network, freq_hz, ties)
    if not nodes and matrix is not None:
        nodes = nodes_in_null_space(matrix, node_names)
        if nodes:
            cause += f"; the undetermined voltages are at node(s) {', '.join(nodes[:8])}"
    where = f" at {freq_hz:g} Hz" if freq_hz else " at DC (0 Hz)"
    return SingularNetworkError(
        f"the network's equations are singular{where}: {cause} ({detail})", nodes=nodes, freq_hz=freq_hz
    )
