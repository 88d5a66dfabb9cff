"""Deliberate, realistic bugs in the own solver, to measure what the fuzzer can catch.

Only the context manager ``injected`` turns a fault on, and it always turns it off again (also when
the block raises), so a fault cannot be left on by accident::

    from crosscheck.fuzz.faults import injected
    with injected("vccs-sign"):
        summary = run_fuzz(FuzzOptions(count=300, seed=1))
    assert summary.faults == ("vccs-sign",)   # the summary says a fault was on

``MnaSystem._assemble`` and ``MnaSystem.injection_vector`` read ``active`` at the stamps concerned:
one membership test of an (almost always empty) frozenset per stamped element. The ngspice workers
are separate processes and never see a fault, which is the point: the reference stays right.
"""

from __future__ import annotations

from contextlib import contextmanager
from typing import Iterator

#: Every fault, with the bug it imitates.
FAULTS = {
    "vccs-sign": "a VCCS (G) stamped with the wrong sign: gm·(V(nc-) − V(nc+)) instead of gm·(V(nc+) − V(nc-))",
    "mutual-sign": "mutual inductance stamped as −M: the dots of a coupled pair read the wrong way round",
    "f-for-omega": "frequency in hertz used where the angular frequency ω = 2πf belongs (every L, C and M)",
    "capacitor-inverted": "a capacitor's admittance written as 1/(jωC), its impedance, instead of jωC",
    "injection-node": "the 1 A test current of Z_th injected at the next node in the list instead of at the port",
}

#: The faults on right now. Read it at call time (``faults.active``), never import the name: it is rebound.
active: frozenset[str] = frozenset()


@contextmanager
def injected(*names: str) -> Iterator[frozenset[str]]:
    """Turn the named faults on for the ``with`` block only (nested blocks add to the outer ones)."""
    global active
    unknown = [n for n in names if n not in FAULTS]
    if unknown or not names:
        raise ValueError(f"unknown fault(s) {unknown!r}; name one or more of: {', '.join(FAULTS)}"
                         if unknown else f"name at least one fault: {', '.join(FAULTS)}")
    previous = active
    active = previous | frozenset(names)
    try:
        yield active
    finally:
        active = previous


def faulty_route(*names: str):  # TEMPORARY until the stamps seam lands
    from crosscheck.own.equivalent import thevenin  # start-up time: temporary

    def route(network, port, freqs):
        with injected(*names):
            return thevenin(network, port, freqs)

    return route
