"""A worker-side fault for the independence canary: the ngspice worker runs ngspice, then returns
crosscheck's own numbers instead of ngspice's (version, decks and notes left intact).

This is the worst bug the project can have: the reference quietly becomes the own solver and every
comparison agrees. A pool runs it only when a test builds it with ``solve=ECHO``; nothing in the
package imports this module, so no netlist can select it.
"""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

from crosscheck.model.network import Network, Port
from crosscheck.own.equivalent import thevenin
from crosscheck.spice.engine import Engine, SpiceResult, Strategy
from crosscheck.spice.engine import solve as engine_solve
from crosscheck.spice.sandbox import CaseSolver

#: This module's ``solve``, for ``SpicePool(..., solve=ECHO)``: the worker imports it from this directory.
ECHO = CaseSolver(module="echo_solve", name="solve", path=str(Path(__file__).resolve().parent))


def solve(engine: Engine, network: Network, port: Port, freqs: tuple[float, ...], strategy: Strategy) -> SpiceResult:
    """ngspice runs as usual; its numbers are then replaced by the own route's, point by point."""
    real = engine_solve(engine, network, port, freqs, strategy)
    own = thevenin(network, port, freqs)
    points = tuple(replace(p, vth=o.vth, zth=o.zth, isc=o.in_) for p, o in zip(real.points, own))
    return replace(real, points=points)
