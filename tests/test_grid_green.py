"""Outside check at scale: the two-point resistance of a large uniform square grid of resistors, both engines.

For the infinite square lattice of resistors R, the lattice Green's function gives the resistance between
adjacent nodes as R/2 and between diagonal nodes as 2R/pi (Cserti, Am. J. Phys. 68 (2000) 896 -- from
memory). A finite N x N grid with free edges approaches these at its central nodes as its edges recede;
the tests show the finite-size error falling (about 4x per doubling of N, i.e. as 1/N^2) and meeting the
stated tolerance at the largest N. The port is across the two nodes, so Z_th (at 0 Hz; pure resistors)
is the two-point resistance; the grid has no ground, and each route refers it to the port's b node.
"""

from __future__ import annotations

import math

import pytest

from crosscheck.model.network import Element, Network, Port
from crosscheck.own.equivalent import thevenin

R = 1.0
ADJACENT = R / 2  # Cserti 2000, from memory
DIAGONAL = 2 * R / math.pi  # Cserti 2000, from memory
#: Relative tolerance at N = 81: the measured finite-size error there is 1.7e-4 (adjacent) and 2.6e-4 (diagonal).
TOLERANCE_81 = 5e-4
#: At N = 161 (slow): measured 4.2e-5 and 6.6e-5.
TOLERANCE_161 = 1.2e-4


def square_grid(n: int) -> Network:
    """An n x n grid of R between horizontal and vertical neighbours, nodes g<row>_<column>."""
    elements = []
    for r in range(n):
        for c in range(n):
            if c + 1 < n:
                elements.append(Element(f"rh{r}_{c}", "R", (f"g{r}_{c}", f"g{r}_{c + 1}"), R))
            if r + 1 < n:
                elements.append(Element(f"rv{r}_{c}", "R", (f"g{r}_{c}", f"g{r + 1}_{c}"), R))
    return Network(f"square grid {n}", tuple(elements))


def central_ports(n: int) -> dict[str, Port]:
    m = n // 2
    return {"adjacent": Port(f"g{m}_{m}", f"g{m}_{m + 1}"), "diagonal": Port(f"g{m}_{m}", f"g{m + 1}_{m + 1}")}


def own_errors(n: int) -> dict[str, float]:
    """Relative error of the own route's two-point resistances against the infinite-grid values."""
    network, errors = square_grid(n), {}
    for name, port in central_ports(n).items():
        zth = thevenin(network, port, [0.0])[0].zth
        assert zth is not None
        assert abs(zth.imag) <= 1e-12 * abs(zth)
        errors[name] = abs(zth.real - {"adjacent": ADJACENT, "diagonal": DIAGONAL}[name]) / abs(zth.real)
    return errors


def spice_errors(n: int, timeout_s: float = 120.0) -> dict[str, float]:
    from crosscheck.spice.workers import spice_equivalent

    network, errors = square_grid(n), {}
    for name, port in central_ports(n).items():
        zth = spice_equivalent(network, port, [0.0], timeout_s=timeout_s).points[0].zth
        assert zth is not None
        errors[name] = abs(zth.real - {"adjacent": ADJACENT, "diagonal": DIAGONAL}[name]) / abs(zth.real)
    return errors


def assert_converges(errors: dict[int, dict[str, float]], tolerance: float) -> None:
    sizes = sorted(errors)
    for small, large in zip(sizes, sizes[1:], strict=False):
        for name in ("adjacent", "diagonal"):
            assert errors[large][name] < errors[small][name] / 3, (name, small, large, errors)
    assert max(errors[sizes[-1]].values()) <= tolerance, errors


def test_own_route_converges_to_the_infinite_grid() -> None:
    assert_converges({n: own_errors(n) for n in (21, 41, 81)}, TOLERANCE_81)


@pytest.mark.spice
def test_ngspice_route_converges_to_the_infinite_grid() -> None:
    assert_converges({n: spice_errors(n) for n in (21, 41, 81)}, TOLERANCE_81)


@pytest.mark.slow
@pytest.mark.spice
def test_both_routes_at_161() -> None:
    assert max(own_errors(161).values()) <= TOLERANCE_161
    assert max(spice_errors(161, timeout_s=3600.0).values()) <= TOLERANCE_161  # a 51,520-element mesh: minutes
