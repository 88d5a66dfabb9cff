"""What a multi-port reduction hands back, one frequency at a time: the seam both routes and every report share.

A network seen from N ports (each an ordered node pair ``a_k``, ``b_k``) is, for linear AC analysis, fully
described by two things per frequency:

* the Thevenin form ``V = voc + Z @ I``;
* the Norton form ``I = Y @ V - isc`` (the same relation solved for the currents, where ``Z`` is invertible).

Sign conventions (the same for the own route, the SPICE route, the reports and the Touchstone export):

* ``V[k] = V(a_k) - V(b_k)``, the voltage across port ``k``;
* ``I[k]`` is the current a test source pushes INTO the network at ``a_k`` (and takes back out at ``b_k``);
  so ``Z[i, k] = V[i] / I[k]`` with every other port open and the network's own sources zeroed: a passive
  network has ``Re Z[k, k] >= 0``, and ``Z`` is exactly the open-circuit impedance matrix of RF usage;
* ``voc[k]`` is ``V[k]`` with every port open (``I = 0``);
* ``isc[k]`` is the current that flows OUT of the network at ``a_k`` (through an external short, from ``a_k``
  to ``b_k``) when every port is shorted (``V = 0``): ``isc = Y @ voc`` and ``0 = Y @ 0 - isc`` gives
  ``I = -isc``, i.e. the current into ``a_k`` is ``-isc[k]``. For one port this is the usual Norton current
  ``I_N = V_th / Z_th`` that the one-port route reports;
* ``y = inv(z)`` where ``z`` is nonsingular; with ``I = Y @ V - isc``.

Degenerate cases are explicit: ``z`` is ``None`` where no Thevenin form exists (a port with no DC path in the
model, a port shorted by an ideal source loop), and ``isc``/``y`` are ``None`` where ``z`` is singular (an ideal
voltage source across a port, two ports joined by a voltage source); ``notes`` says which ports, in words.
"""

from __future__ import annotations

from collections.abc import Iterator, Sequence
from dataclasses import dataclass

import numpy as np

from crosscheck.model.network import GROUND, Network, Port, node_parts


@dataclass(frozen=True)
class NamedPort:
    """One port of a multi-port reduction: its two nodes (``V = V(a) - V(b)``) and the name reports show."""

    name: str
    port: Port

    def __iter__(self) -> Iterator[str]:
        return iter(self.port)


#: The ports of one reduction, in the order of the matrices' rows and columns.
PortList = tuple[NamedPort, ...]


def port_list(pairs: Sequence[tuple[str, str]], names: Sequence[str | None] | None = None) -> PortList:
    """Ports from node pairs, each named by ``names`` or, when unnamed, by its position (``"1"``, ``"2"``...)."""
    given = list(names) if names is not None else [None] * len(pairs)
    return tuple(
        NamedPort(name=name if name else str(k + 1), port=Port(a, b))
        for k, ((a, b), name) in enumerate(zip(pairs, given, strict=True))
    )


def floating_references(network: Network, ports: Sequence[Port]) -> list[str]:
    """One node per ground-less part that holds a port: that port's b node, held at 0 V as the one-port route
    refers a floating port (the first port met in a part chooses; two references in one part would short it).
    Both routes use it, so they refer the same nodes."""
    every = node_parts(network, network.element_arrays.kind != ord("K"))[1]
    chosen: dict[int, str] = {}
    for port in ports:
        if port.b == GROUND or port.b not in network.node_index:
            continue
        part = int(every[network.node_index[port.b]])
        if part != int(every[-1]):
            chosen.setdefault(part, port.b)
    return list(chosen.values())


@dataclass(frozen=True)
class MatrixPoint:
    """One frequency of a multi-port reduction (conventions in the module docstring)."""

    freq_hz: float
    voc: np.ndarray  # (n,) complex: V(a_k) - V(b_k) with every port open
    z: np.ndarray | None  # (n, n) complex: V = voc + Z @ I, I into a_k; None if no Thevenin form
    isc: np.ndarray | None  # (n,) complex: current out of a_k through a short, all ports shorted
    y: np.ndarray | None  # (n, n) complex: inv(Z), I = Y @ V - isc; None where Z is singular
    condition: float | None  # own route: 1-norm condition estimate of the MNA system; ngspice: None
    notes: tuple[str, ...] = ()
    #: own route: 1-norm condition numbers of Z and of Y (both inf where singular); ngspice: None.
    z_condition: float | None = None
    #: ||Z - Z^T|| / ||Z|| (Frobenius): 0 for a reciprocal network; None where Z is missing.
    reciprocity: float | None = None
    #: own route: the largest entry of the open-circuit solution and of the test solutions (node voltages and
    #: branch currents), the scales against which a backward-stable solve is accurate; (0, 0) when not known.
    scales: tuple[float, float] = (0.0, 0.0)

    @property
    def ports(self) -> int:
        return int(self.voc.shape[0])
