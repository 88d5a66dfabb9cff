"""A 3-port reduction of a 10,000-node network at 30 frequencies against a one-port reduction of it.

Both run in this process on the own route (``own.multiport.reduce_ports`` and ``own.equivalent.thevenin``),
on the same network from ``crosscheck.fuzz.large``; the goal is that the three ports cost less than twice the
one port (one factorization per frequency serves every right-hand side, so the extra cost is two more solves
per frequency and the Z, Y arithmetic). Each is timed ``--repeats`` times, alternating, and the best of each is
kept (the machine may be shared); the ratio printed is from this one run.

    python benchmarks/multiport.py [--family random] [--nodes 10000] [--freqs 30] [--repeats 3]
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from crosscheck.fuzz.large import FAMILIES, build
from crosscheck.model.network import Port
from crosscheck.model.port_matrices import floating_references
from crosscheck.own.equivalent import thevenin
from crosscheck.own.multiport import reduce_ports

GOAL_RATIO = 2.0


def three_ports(nodes: list[str], port: Port, seed: int = 5) -> list[Port]:
    """The network's own port and two more, each a node to ground, drawn from the network's nodes."""
    rng = np.random.default_rng(seed)
    others = [n for n in rng.choice(nodes, size=8, replace=False).tolist() if n not in (port.a, port.b)]
    return [port, Port(others[0], "0"), Port(others[1], "0")]


def best_of(run, repeats: int) -> float:
    best = float("inf")
    for _ in range(repeats):
        started = time.perf_counter()
        run()
        best = min(best, time.perf_counter() - started)
    return best


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--family", choices=FAMILIES, default="random")
    parser.add_argument("--nodes", type=int, default=10_000)
    parser.add_argument("--freqs", type=int, default=30)
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args()
    network, port = build(args.family, args.nodes)
    ports = three_ports(list(network.nodes), port)
    if floating_references(network, ports):
        print("note: a port's part has no ground; it is referred to its own b node, as the one-port route does")
    freqs = np.logspace(1, 6, args.freqs).tolist()
    reduce_ports(network, ports, freqs[:2])  # warm: the KLU library, the compiled sweep loop, numpy
    thevenin(network, port, freqs[:2])
    one = many = float("inf")
    for _ in range(args.repeats):  # alternate, so a busy moment of the machine falls on both
        one = min(one, best_of(lambda: thevenin(network, port, freqs), 1))
        many = min(many, best_of(lambda: reduce_ports(network, ports, freqs), 1))
    ratio = many / one
    print(
        f"network: {args.family}, {len(network.nodes):,} nodes, {len(network.elements):,} elements; {len(freqs)} freqs"
    )
    print(f"one port  (thevenin):     {one * 1e3:9.1f} ms")
    print(f"three ports (reduce_ports): {many * 1e3:7.1f} ms")
    print(f"ratio three/one: {ratio:.2f} (goal < {GOAL_RATIO:g}: {'met' if ratio < GOAL_RATIO else 'NOT met'})")
    return 0 if ratio < GOAL_RATIO else 1


if __name__ == "__main__":
    raise SystemExit(main())
