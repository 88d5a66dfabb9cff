"""Component spread of the equivalent: adjoint sensitivities, worst case over the box, seeded Monte Carlo.

Sensitivities: at each frequency the nominal system is factored once; the solutions for the sources and
the 1 A test injection, and one transposed solve λ = A⁻ᵀc (c picks V(a) − V(b)), give dV_th/dp and
dZ_th/dp for every varied part at once (dq/dp = λᵀ(db/dp − dA/dp·x), ``spread_matrix``). They are
reported normalised: % change of |q| per % change of the part, and degrees of phase per %.
Worst case: ``spread_worst`` (first-order corner, solved, then a corner search). Monte Carlo: seeded
value sets (numpy ``Generator(seed)``), solved exactly by ``spread_solve`` (batched dense, or KLU
refactorization on the fixed pattern). A Monte Carlo sample beyond a corner's extreme (an extreme inside
the box) replaces it, with the method saying so.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from crosscheck.model.cases import Limit
from crosscheck.model.network import Network, Port, check_excitation, check_port
from crosscheck.model.vary import (
    MAX_SAMPLES,
    PERCENTILES,
    Extreme,
    LimitSpread,
    MonteCarlo,
    OwnSpread,
    PointSpread,
    QuantitySpread,
    SpreadError,
    SpreadSpec,
    VariedPart,
)
from crosscheck.own.spread_matrix import VariedSystem
from crosscheck.own.spread_solve import nominal_and_adjoint, port_values, solutions_at
from crosscheck.own.spread_worst import (
    SAMPLE,
    Found,
    function_slope,
    function_value,
    quantities,
    quantity_slopes,
    search,
)
from crosscheck.vocabulary import same_frequency

#: The quantities a point reports, and the functions of each whose extremes it gives.
REPORTED = ("vth", "zth", "in")
WORST_FUNCTIONS = ("abs", "phase_deg", "re", "im")
#: A limit's function name -> the name used here.
LIMIT_FUNCTION = {"abs": "abs", "phase": "phase_deg", "re": "re", "im": "im", "db": "db"}
#: |Z_th| below this multiple of eps times the test solution's scale is zero: no Norton form to vary.
_ZERO_ROUNDOFF = 1e3 * np.finfo(float).eps


def groups(parts: Sequence[VariedPart]) -> np.ndarray:
    """Each part's group column (P,): each named group is one column, each ungrouped part its own, in part order."""
    column: dict[str, int] = {}
    for i, p in enumerate(parts):
        column.setdefault(f"group:{p.group}" if p.group is not None else f"part:{i}", len(column))
    return np.array(
        [column[f"group:{p.group}" if p.group is not None else f"part:{i}"] for i, p in enumerate(parts)], dtype=np.intp
    )


def values_at(parts: Sequence[VariedPart], u_groups: np.ndarray, column: np.ndarray | None = None) -> np.ndarray:
    """Part values (B, P) at group deviations u (B, G); ``column``: ``groups(parts)`` if already found."""
    nominal = np.array([p.nominal for p in parts])
    delta = np.array([p.delta for p in parts])
    return nominal + np.atleast_2d(u_groups)[:, groups(parts) if column is None else column] * delta


def draw(parts: Sequence[VariedPart], samples: int, seed: int) -> np.ndarray:
    """Seeded group deviations u (S, G): uniform in [-1, 1], normal with sigma 1/3 (unclipped), or ±1.

    One column per group, drawn in group order from one ``numpy.random.Generator(PCG64(seed))``.
    """
    rng = np.random.Generator(np.random.PCG64(seed))
    column = groups(parts)
    first = {int(g): i for i, g in reversed(list(enumerate(column.tolist())))}
    dists = [parts[first[g]].dist for g in range(len(first))]
    u = np.empty((samples, len(dists)))
    for g, dist in enumerate(dists):
        if dist == "normal":
            u[:, g] = rng.normal(0.0, 1.0 / 3.0, samples)
        elif dist == "corners":
            u[:, g] = rng.choice(np.array([-1.0, 1.0]), samples)
        else:
            u[:, g] = rng.uniform(-1.0, 1.0, samples)
    return u


def adjoint_slopes(
    network: Network, port: Port, freqs_hz: Sequence[float], parts: Sequence[VariedPart]
) -> tuple[np.ndarray, np.ndarray]:
    """Nominal (V_th, Z_th) (F, 2) and their derivatives by each part's value (F, 2, P), by the adjoint method."""
    vs = VariedSystem(network, port, parts)
    freqs = np.asarray(freqs_hz, dtype=float)
    xs, lam = nominal_and_adjoint(vs, freqs)
    nominal = vs.port_voltage(np.moveaxis(xs, 1, 0))  # (F, 2)
    return nominal, vs.sensitivities(freqs, xs, lam)


def normalised(q: complex, dq: np.ndarray, parts: Sequence[VariedPart]) -> np.ndarray:
    """(P, 2): % change of |q| per % change of each part, and degrees of phase per %.

    A part whose nominal value is 0 (an absolute tolerance on a silent source) is scaled by its tolerance
    instead: % change of |q| per % of its tolerance. A quantity that is exactly 0 has NaN sensitivities.
    """
    scale = np.array([p.nominal if p.nominal != 0 else p.delta for p in parts])
    if q == 0:  # exactly 0 (or underflowed): a relative change has no meaning
        return np.full((len(parts), 2), np.nan)
    with np.errstate(all="ignore"):
        relative = dq * scale / q
    return np.stack([relative.real, np.degrees(relative.imag) / 100.0], axis=1)


def own_spread(
    network: Network,
    port: Port,
    freqs_hz: Sequence[float],
    parts: Sequence[VariedPart],
    spec: SpreadSpec,
    limits: Sequence[Limit] = (),
) -> OwnSpread:
    """Sensitivities, worst case and (with ``spec.samples``) Monte Carlo at each frequency, and each limit."""
    if not parts:
        raise SpreadError("no part varies; state at least one with [[vary]] or --vary")
    if not 0 <= spec.samples <= MAX_SAMPLES:
        raise SpreadError(
            f"samples = {spec.samples} is outside 0 (no Monte Carlo) to {MAX_SAMPLES:,}; give a count in it"
        )
    freqs = np.asarray(freqs_hz, dtype=float)
    check_excitation(network.excitation, freqs.tolist(), "the spread analysis")
    check_port(network, port)
    vs = VariedSystem(network, port, parts)
    xs, lam = nominal_and_adjoint(vs, freqs)
    nominal = vs.port_voltage(np.moveaxis(xs, 1, 0))
    slopes = vs.sensitivities(freqs, xs, lam)
    scales = np.abs(xs[:, :, 1]).max(axis=1)
    norton = np.abs(nominal[:, 1]) > _ZERO_ROUNDOFF * np.maximum(scales, np.abs(nominal[:, 1]))
    limit_targets = [(lim.quantity, LIMIT_FUNCTION[lim.function]) for lim in limits]
    found = []
    for f in range(len(freqs)):
        names = [q for q in ("vth", "zth", "in", "yn") if norton[f] or q in ("vth", "zth")]
        targets = [(q, fn) for q in REPORTED if q in names for fn in WORST_FUNCTIONS]
        targets += [t for t in limit_targets if t[0] in names and t not in targets]
        found.append(_worst_at(vs, parts, float(freqs[f]), nominal[f], slopes[f], targets))
    samples = np.empty((0, len(parts)))
    sampled = None
    if spec.samples:
        samples = values_at(parts, draw(parts, spec.samples, spec.seed))
        sampled = port_values(vs, samples, freqs)
        for f in range(len(freqs)):
            _samples_beyond(found[f], sampled[:, f, 0], sampled[:, f, 1], nominal[f], samples)
    points = tuple(
        _point(float(freqs[f]), nominal[f], slopes[f], found[f], parts, norton[f], (samples, sampled), f, spec)
        for f in range(len(freqs))
    )
    limit_spreads = tuple(
        s for lim in limits if (s := _limit_spread(lim, freqs, nominal, found, parts, (samples, sampled))) is not None
    )
    names = [p.name for p in parts]
    shown = tuple(dict(zip(names, row.tolist())) for row in samples[: spec.spice_samples])
    return OwnSpread(tuple(parts), points, limit_spreads, shown)


def spread_points(
    network: Network, port: Port, freqs_hz: Sequence[float], parts: Sequence[VariedPart], spec: SpreadSpec
) -> tuple[PointSpread, ...]:
    """The spread of the equivalent at each frequency (``own_spread`` without limits)."""
    return own_spread(network, port, freqs_hz, parts, spec).points


def limit_extremes(
    network: Network,
    port: Port,
    freqs_hz: Sequence[float],
    parts: Sequence[VariedPart],
    spec: SpreadSpec,
    limits: Sequence[Limit],
) -> tuple[LimitSpread, ...]:
    """Each limit's function over the spread, over the points in its band (limits with no point are left out)."""
    return own_spread(network, port, freqs_hz, parts, spec, limits).limits


def _worst_at(
    vs: VariedSystem,
    parts: Sequence[VariedPart],
    freq_hz: float,
    nominal: np.ndarray,
    slopes: np.ndarray,
    targets: list[tuple[str, str]],
) -> dict[tuple[str, str, int], Found]:
    """Every target's two extremes at one frequency (``spread_worst.search``)."""
    vth, zth = complex(nominal[0]), complex(nominal[1])
    q_nominal = {k: complex(v) for k, v in quantities(np.array(vth), np.array(zth)).items()}
    dq = quantity_slopes(vth, zth, slopes[0], slopes[1])
    delta = np.array([p.delta for p in parts])
    column = groups(parts)
    count = int(column.max()) + 1
    gradients = {
        (q, fn): np.bincount(column, function_slope(fn, q_nominal[q], dq[q]) * delta, minlength=count)
        for q, fn in targets
    }

    def evaluate(u: np.ndarray) -> dict[str, np.ndarray]:
        pv = port_values(vs, values_at(parts, u, column), np.array([freq_hz]))
        return quantities(pv[:, 0, 0], pv[:, 0, 1])

    def corner_slopes(u: np.ndarray, wanted: Sequence[tuple[str, str]]) -> np.ndarray:
        values = values_at(parts, u, column)
        xs, lam = solutions_at(vs, values, freq_hz)
        dv = vs.sensitivities(np.full(len(values), freq_hz), xs, lam, values)  # (B, 2, P)
        out = np.empty((len(values), count))
        for b, (q, fn) in enumerate(wanted):
            vth_b, zth_b = (complex(v) for v in vs.port_voltage(xs[b]))
            q_b = complex(quantities(np.array(vth_b), np.array(zth_b))[q])
            dq_b = quantity_slopes(vth_b, zth_b, dv[b, 0], dv[b, 1])[q]
            out[b] = np.bincount(column, function_slope(fn, q_b, dq_b) * delta, minlength=count)
        return out

    found = search(targets, q_nominal, gradients, evaluate, corner_slopes)
    for end in found.values():
        end.u = values_at(parts, end.u, column)[0]  # from here on: the part values of the extreme
    return found


def _samples_beyond(
    found: dict[tuple[str, str, int], Found], vth: np.ndarray, zth: np.ndarray, nominal: np.ndarray, values
) -> None:
    """Replace an extreme by a Monte Carlo sample that goes beyond it (the extreme lies inside the box)."""
    qs = quantities(vth, zth)
    q_nominal = quantities(np.array(complex(nominal[0])), np.array(complex(nominal[1])))
    for (q, fn, d), end in found.items():
        v = function_value(fn, qs[q], complex(q_nominal[q]))
        if np.isnan(v).all():
            continue
        i = int(np.nanargmax(d * v))
        if d * v[i] > d * end.value + 1e-12 * max(abs(end.value), 1e-300):
            found[(q, fn, d)] = Found(float(v[i]), values[i].copy(), SAMPLE, end.first_order)


def _corner(parts: Sequence[VariedPart], values: np.ndarray) -> dict[str, float]:
    return {p.name: float(v) for p, v in zip(parts, values.tolist())}


def _point(
    freq_hz: float,
    nominal: np.ndarray,
    slopes: np.ndarray,
    found: dict,
    parts: Sequence[VariedPart],
    norton: bool,
    drawn: tuple[np.ndarray, np.ndarray | None],
    f: int,
    spec: SpreadSpec,
) -> PointSpread:
    """The point's three quantities; ``drawn``: the Monte Carlo part values (S, P) and port values (S, F, 2)."""
    samples, sampled = drawn
    vth, zth = complex(nominal[0]), complex(nominal[1])
    q_nominal = {k: complex(v) for k, v in quantities(np.array(vth), np.array(zth)).items()}
    dq = quantity_slopes(vth, zth, slopes[0], slopes[1])
    qs = quantities(sampled[:, f, 0], sampled[:, f, 1]) if sampled is not None else None
    out: dict[str, QuantitySpread | None] = {}
    for q in REPORTED:
        if q == "in" and not norton:
            out[q] = None
            continue
        sens = normalised(q_nominal[q], dq[q], parts)
        order = np.lexsort((-np.abs(sens[:, 1]), -np.abs(sens[:, 0]))).tolist()
        ranked = dict(zip([parts[i].name for i in order], zip(sens[order, 0].tolist(), sens[order, 1].tolist())))
        worst = {fn: _extreme(found[(q, fn, -1)], found[(q, fn, 1)], parts) for fn in WORST_FUNCTIONS}
        mc = _monte_carlo(qs[q], q_nominal[q], parts, samples, spec) if qs is not None else None
        out[q] = QuantitySpread(q_nominal[q], ranked, worst, mc)
    return PointSpread(freq_hz, out["vth"], out["zth"], out["in"])


def _extreme(low: Found, high: Found, parts: Sequence[VariedPart]) -> Extreme:
    return Extreme(
        low.value,
        high.value,
        _corner(parts, low.u),
        _corner(parts, high.u),
        low.method,
        high.method,
        low.first_order,
        high.first_order,
    )


def _monte_carlo(
    q: np.ndarray, nominal: complex, parts: Sequence[VariedPart], samples: np.ndarray, spec: SpreadSpec
) -> MonteCarlo:
    magnitude = np.abs(q)
    phase = function_value("phase_deg", q, nominal)
    with np.errstate(divide="ignore", invalid="ignore"):
        departure = np.abs(magnitude / abs(nominal) - 1.0) if nominal != 0 else magnitude
    worst = int(np.nanargmax(departure))
    values = _corner(parts, samples[worst])
    return MonteCarlo(
        samples=len(q),
        seed=spec.seed,
        abs_percentiles={p: float(v) for p, v in zip(PERCENTILES, np.percentile(magnitude, PERCENTILES))},
        phase_percentiles={p: float(v) for p, v in zip(PERCENTILES, np.percentile(phase, PERCENTILES))},
        worst_index=worst,
        worst_value=complex(q[worst]),
        worst_values=values,
        subset=tuple(complex(v) for v in q[: spec.spice_samples]),
    )


def _in_band(f: float, band: tuple[float, float] | None) -> bool:
    if band is None:
        return True
    low, high = band
    return low <= f <= high or same_frequency(f, low) or same_frequency(f, high)


def _limit_spread(
    limit: Limit,
    freqs: np.ndarray,
    nominal: np.ndarray,
    found: list[dict],
    parts: Sequence[VariedPart],
    drawn: tuple[np.ndarray, np.ndarray | None],
) -> LimitSpread | None:
    """One limit over the points in its band: lowest and highest value with their corners; MC violations."""
    samples, sampled = drawn
    fn = LIMIT_FUNCTION[limit.function]
    inside = [
        f for f in range(len(freqs)) if _in_band(float(freqs[f]), limit.band) and (limit.quantity, fn, 1) in found[f]
    ]
    if not inside:
        return None
    low_f = min(inside, key=lambda f: found[f][(limit.quantity, fn, -1)].value)
    high_f = max(inside, key=lambda f: found[f][(limit.quantity, fn, 1)].value)
    low, high = found[low_f][(limit.quantity, fn, -1)], found[high_f][(limit.quantity, fn, 1)]
    below = limit.minimum - low.value if limit.minimum is not None else -math.inf
    above = high.value - limit.maximum if limit.maximum is not None else -math.inf
    holds = below <= 0 and above <= 0
    failing, failing_hz = None, None
    if not holds:
        worse_low = below / max(abs(limit.minimum or 0.0), 1e-300) >= above / max(abs(limit.maximum or 0.0), 1e-300)
        end, at = (low, low_f) if worse_low else (high, high_f)
        failing, failing_hz = _corner(parts, end.u), float(freqs[at])
    fraction, worst = _violations(limit, fn, freqs, nominal, inside, sampled)
    return LimitSpread(
        limit.index, limit.text, limit.minimum, limit.maximum, low.value, high.value,
        float(freqs[low_f]), float(freqs[high_f]), _corner(parts, low.u), _corner(parts, high.u),
        low.method, high.method, holds, failing, failing_hz, fraction, worst,
        None if worst is None else _corner(parts, samples[worst]),
    )  # fmt: skip


def _violations(
    limit: Limit, fn: str, freqs: np.ndarray, nominal: np.ndarray, inside: list[int], sampled: np.ndarray | None
) -> tuple[float | None, int | None]:
    """The share of samples breaking the limit at any point of its band, and the sample with the least margin."""
    if sampled is None:
        return None, None
    margins = np.full(sampled.shape[0], np.inf)
    for f in inside:
        qs = quantities(sampled[:, f, 0], sampled[:, f, 1])
        q_nominal = quantities(np.array(complex(nominal[f, 0])), np.array(complex(nominal[f, 1])))
        v = function_value(fn, qs[limit.quantity], complex(q_nominal[limit.quantity]))
        if limit.minimum is not None:
            margins = np.minimum(margins, v - limit.minimum)
        if limit.maximum is not None:
            margins = np.minimum(margins, limit.maximum - v)
    return float(np.mean(margins < 0)), int(np.argmin(margins))
