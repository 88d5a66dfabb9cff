"""A brute-force spread of a small network by the own route, for the tests of ngspice's confirmations.

Independent of ``own.spread`` (the adjoint method): sensitivities by the own route's central differences
with a tiny step, worst cases by solving every corner of the tolerance box (2**n solves), Monte Carlo by
plain sampling. Good for a handful of parts only; it is the tests' yardstick, not a method.
"""

from __future__ import annotations

import cmath
import itertools
import math
from collections.abc import Sequence

import numpy as np

from crosscheck.model.network import Network, Port
from crosscheck.model.vary import (
    PERCENTILES,
    Extreme,
    MonteCarlo,
    OwnSpread,
    PointSpread,
    QuantitySpread,
    SpreadSpec,
    VariedPart,
    apply_values,
    resolve,
)
from crosscheck.own.equivalent import thevenin

_H = 1e-6


def _q(eq, q: str) -> complex | None:
    return eq.in_ if q == "in" else getattr(eq, q)


def _functions(z: complex) -> dict[str, float]:
    return {"abs": abs(z), "phase_deg": math.degrees(cmath.phase(z)), "re": z.real, "im": z.imag}


def brute_spread(network: Network, port: Port, freqs: Sequence[float], spec: SpreadSpec) -> OwnSpread:
    """The spread of ``network`` by brute force (every corner, own-route differences, plain samples)."""
    parts = resolve(network, spec)
    nominal = thevenin(network, port, freqs)
    corners = [
        {p.name: p.at(u) for p, u in zip(parts, signs)} for signs in itertools.product((-1.0, 1.0), repeat=len(parts))
    ]
    at_corner = [thevenin(apply_values(network, parts, c), port, freqs) for c in corners]
    rng = np.random.default_rng(spec.seed)
    samples = [
        {p.name: p.at(float(u)) for p, u in zip(parts, rng.uniform(-1, 1, len(parts)))} for _ in range(spec.samples)
    ]
    at_sample = [thevenin(apply_values(network, parts, s), port, freqs) for s in samples]
    steps = {p.name: _steps(network, port, freqs, parts, p) for p in parts}
    points = []
    for i, f in enumerate(freqs):
        spreads = {}
        for q in ("vth", "zth", "in"):
            z0 = _q(nominal[i], q)
            if z0 is None:
                spreads[q] = None
                continue
            sens = {}
            for p in parts:
                up, down = (_q(steps[p.name][k][i], q) for k in (0, 1))
                sens[p.name] = (
                    (abs(up) - abs(down)) / (2 * _H * abs(z0)),
                    math.degrees(cmath.phase(up / down)) / (2 * _H * 100.0),
                )
            values = [_q(c[i], q) for c in at_corner]
            worst = {}
            for fn in ("abs", "phase_deg", "re", "im"):
                fv = [_functions(v)[fn] for v in values]
                lo, hi = int(np.argmin(fv)), int(np.argmax(fv))
                worst[fn] = Extreme(fv[lo], fv[hi], corners[lo], corners[hi], "corner search", "corner search")
            sampled = [_q(s[i], q) for s in at_sample]
            mc = None
            if sampled:
                mags = np.abs(sampled)
                phases = np.degrees(np.angle(sampled))
                w = int(np.argmax(np.abs(mags - abs(z0))))
                mc = MonteCarlo(
                    len(sampled),
                    spec.seed,
                    dict(zip(PERCENTILES, np.percentile(mags, PERCENTILES))),
                    dict(zip(PERCENTILES, np.percentile(phases, PERCENTILES))),
                    w,
                    sampled[w],
                    samples[w],
                    tuple(sampled[: spec.spice_samples]),
                )
            spreads[q] = QuantitySpread(z0, sens, worst, mc)
        points.append(PointSpread(f, spreads["vth"], spreads["zth"], spreads["in"]))
    return OwnSpread(tuple(parts), tuple(points), (), tuple(samples[: spec.spice_samples]))


def _steps(network: Network, port: Port, freqs: Sequence[float], parts: Sequence[VariedPart], p: VariedPart):
    return [thevenin(apply_values(network, parts, {p.name: p.nominal * (1 + k * _H)}), port, freqs) for k in (1, -1)]
