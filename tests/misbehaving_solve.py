"""Case solvers for ngspice workers that misbehave on purpose: the worker tests' seam into ``SpicePool``.

A pool runs these only when the test builds it with ``solve=MISBEHAVING`` (``SpicePool``'s constructor);
then a network whose title is in ``TITLES`` makes its worker hang (sleep), spin (burn CPU), die (SIGKILL)
or hog memory instead of running ngspice (or, "slow", hold ngspice's answer back for 2.5 s), and every other case goes to ngspice as usual. Nothing in the
package imports this module, so no netlist can select it.
"""

from __future__ import annotations

import os
import signal
import time
from pathlib import Path

from crosscheck.model.network import Network, Port
from crosscheck.spice.engine import Engine, SpiceResult, Strategy, solve as engine_solve
from crosscheck.spice.sandbox import CaseSolver

#: Network titles and the misbehaviour each asks for.
TITLES = {
    "crosscheck-test-fault:hang": "hang",
    "crosscheck-test-fault:spin": "spin",
    "crosscheck-test-fault:die": "die",
    "crosscheck-test-fault:hog": "hog",
    "crosscheck-test-fault:slow": "slow",
}

#: This module's ``solve``, for ``SpicePool(..., solve=MISBEHAVING)``: the worker imports it from this directory.
MISBEHAVING = CaseSolver(module="misbehaving_solve", name="solve", path=str(Path(__file__).resolve().parent))


def solve(engine: Engine, network: Network, port: Port, freqs: tuple[float, ...], strategy: Strategy) -> SpiceResult:
    """Misbehave as the title asks (see TITLES); any other title is solved by ngspice."""
    kind = TITLES.get(network.title)
    if kind == "hang":
        while True:
            time.sleep(3600)
    elif kind == "spin":
        while True:
            pass
    elif kind == "die":
        os.kill(os.getpid(), signal.SIGKILL)
    elif kind == "hog":
        hoard = [bytearray(1 << 28) for _ in range(64)]  # 16 GiB: past any sane memory limit
        raise AssertionError(f"the memory limit did not stop an allocation of {len(hoard) >> 2} GiB")
    result = engine_solve(engine, network, port, freqs, strategy)
    if kind == "slow":  # ngspice's answer, held back past the progress interval
        time.sleep(2.5)
    return result
