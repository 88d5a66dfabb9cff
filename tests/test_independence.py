"""Independence canaries: the reference route must be ngspice's own arithmetic, never crosscheck's numbers.

Two independent LU factorizations of the same matrix agree to rounding but rarely to the last bit: on the
40 seeded random networks below, 28 of the 152 compared values (18 %) come out bit-identical (measured
with ngspice 39 when this test was written). A reference that returned the own route's numbers would be identical everywhere. The canary
holds the share of bit-identical values below one half, and is shown to catch exactly that mutation
(a worker-side fault through the pool's solve seam, ``tests/echo_solve.py``).
"""

from __future__ import annotations

import pytest

from crosscheck.fuzz.generate import case_seed, generate_case
from crosscheck.own.equivalent import thevenin
from crosscheck.spice.workers import SpicePool
from echo_solve import ECHO

#: Largest share of compared values that may be bit-identical between the routes (measured: 0.18).
IDENTICAL_SHARE_LIMIT = 0.5
CASES = 40


def _identical_share(pool: SpicePool) -> tuple[float, int]:
    """Share of V_th and Z_th values the two routes give bit for bit, and how many were compared."""
    same = total = 0
    for i in range(CASES):
        case = generate_case(case_seed(7, i))
        try:
            own = thevenin(case.network, case.port, case.freqs_hz)
        except ArithmeticError:  # a singular case: the generator's caveat, nothing to compare
            continue
        reference = pool.submit(case.network, case.port, case.freqs_hz).result()
        assert "ngspice" in reference.ngspice_version and reference.decks, "the worker did not run ngspice"
        for o, p in zip(own, reference.points):
            for a, b in ((o.vth, p.vth), (o.zth, p.zth)):
                if a is not None and b is not None:
                    total += 1
                    same += a == b
    return same / total, total


@pytest.mark.spice
def test_the_reference_is_not_the_own_route():
    """On seeded random networks the two routes differ in the last bits for most values, as two
    independent factorizations do: the reference did not quietly become the own solver."""
    with SpicePool(workers=2) as pool:
        share, compared = _identical_share(pool)
    assert compared >= 100
    assert share < IDENTICAL_SHARE_LIMIT, f"{share:.0%} of {compared} values are bit-identical between the routes"


@pytest.mark.spice
def test_the_canary_catches_a_reference_that_echoes_the_own_route():
    """With the worker returning crosscheck's numbers (ngspice still run, version and decks intact), every
    value is bit-identical and the canary's limit is exceeded: the check above can fail."""
    with SpicePool(workers=2, solve=ECHO) as pool:
        share, compared = _identical_share(pool)
    assert compared >= 100 and share == 1.0
    assert share >= IDENTICAL_SHARE_LIMIT
