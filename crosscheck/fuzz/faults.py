"""Deliberate, realistic bugs in the own solver, to measure what the fuzzer can catch.

Each fault is a broken ``Stamps`` object (``crosscheck.own.assembly``) handed to the solver through its
``stamps`` parameter; the solver holds no switch of its own and reads no global::

    from crosscheck.fuzz.faults import faulty_route
    broken = faulty_route("vccs-sign")      # thevenin with the VCCS stamped with the wrong sign
    equivalents = broken(network, port, [1e3])

A fuzz run names its faults in ``FuzzOptions(faults=...)`` and passes this route to every case and to
the shrinking; the run's summary reports them. The ngspice workers never see a fault, which is the
point: the reference stays right.
"""

from __future__ import annotations

import functools
import math
from collections.abc import Callable, Sequence

import numpy as np

from crosscheck.errors import CrosscheckError
from crosscheck.model.network import Network, Port
from crosscheck.own.assembly import Stamps
from crosscheck.own.equivalent import Equivalent, thevenin

#: Every fault, with the bug it imitates.
FAULTS = {
    "vccs-sign": "a VCCS (G) stamped with the wrong sign: gm·(V(nc-) − V(nc+)) instead of gm·(V(nc+) − V(nc-))",
    "mutual-sign": "mutual inductance stamped as −M: the dots of a coupled pair read the wrong way round",
    "f-for-omega": "frequency in hertz used where the angular frequency ω = 2πf belongs (every L, C and M)",
    "capacitor-inverted": "a capacitor's admittance written as 1/(jωC), its impedance, instead of jωC",
    "injection-node": "the 1 A test current of Z_th injected at the next node in the list instead of at the port",
}

#: The own solver's route: ``thevenin``'s signature without the keyword arguments.
OwnRoute = Callable[[Network, Port, Sequence[float]], list[Equivalent]]


class UnknownFaultError(CrosscheckError, ValueError):
    """A fault name that is not in ``FAULTS``, or no name at all."""


class FaultyStamps(Stamps):
    """The correct stamps with the named faults in them; every element is stamped one at a time."""

    bulk = False

    def __init__(self, names: frozenset[str]):
        self.names = names
        self.capacitor_as_impedance = "capacitor-inverted" in names  # 1/(jωC): an inductor of C henries

    def vccs_gain(self, gm: float) -> float:
        return -gm if "vccs-sign" in self.names else gm

    def mutual(self, m: float) -> float:
        return -m if "mutual-sign" in self.names else m

    def per_omega(self, entries: np.ndarray) -> np.ndarray:
        # j·f·A1 instead of j·ω·A1
        return entries / (2.0 * math.pi) if "f-for-omega" in self.names else entries

    def injection_rows(self, a: int | None, b: int | None, nodes: int) -> tuple[int | None, int | None]:
        if "injection-node" not in self.names:  # else an off-by-one node index on one terminal
            return a, b
        if a is not None:
            return (a + 1) % nodes, b
        if b is not None:
            return a, (b + 1) % nodes
        return a, b


def _checked(names: Sequence[str]) -> frozenset[str]:
    unknown = [n for n in names if n not in FAULTS]
    if unknown:
        raise UnknownFaultError(f"unknown fault(s) {unknown!r}; name one or more of: {', '.join(FAULTS)}")
    if not names:
        raise UnknownFaultError(f"no fault named; name at least one of: {', '.join(FAULTS)}")
    return frozenset(names)


def faulty_stamps(*names: str) -> FaultyStamps:
    """Stamps with the named faults (one or more of ``FAULTS``), for ``MnaSystem(..., stamps=...)``."""
    return FaultyStamps(_checked(names))


def faulty_route(*names: str) -> OwnRoute:
    """``thevenin`` with the named faults: a drop-in for the own solver's route."""
    return functools.partial(thevenin, stamps=faulty_stamps(*names))
