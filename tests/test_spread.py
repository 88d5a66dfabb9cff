"""Component spread on the own route: stamps as parameters, adjoint sensitivities, worst case, Monte Carlo.

Each answer is held against something computed another way: the matrix against ``MnaSystem`` assembled
afresh from the changed network, the adjoint sensitivities against central differences of the own solver
and against sympy's exact derivatives, the corner search against every corner enumerated, the Monte Carlo
solves against ``thevenin`` on the changed network.
"""

from __future__ import annotations

import dataclasses
import itertools

import numpy as np
import pytest
import sympy

from crosscheck.fuzz.generate import generate_cases
from crosscheck.fuzz.large import build
from crosscheck.model.cases import Limit
from crosscheck.model.netlist import read_netlist
from crosscheck.model.network import Port
from crosscheck.model.vary import SpreadError, SpreadSpec, Vary, apply_values, parse_vary_option, resolve
from crosscheck.own.equivalent import thevenin
from crosscheck.own.solver import DENSE_LIMIT, MnaSystem
from crosscheck.own.spread import adjoint_slopes, draw, own_spread, values_at
from crosscheck.own.spread_matrix import VariedSystem
from crosscheck.own.spread_solve import _sparse_chunk, port_values, solutions_at

#: Every kind that can vary, K-coupled inductors and both controlled-source families included (our own mix).
EVERY_KIND = """every kind
V1 1 0 AC 2 30
I1 0 3 AC 1m
R1 1 2 1k
L1 2 3 1m
L2 4 0 2m
K1 L1 L2 0.9
R4 4 0 50
C1 3 0 100n
G1 3 0 2 0 1m
E1 5 0 3 0 2
R5 5 3 2k
H1 6 0 V1 100
R6 6 2 10k
F1 2 0 V1 0.5
"""
FREQS = np.array([100.0, 5e3, 1e5])


@pytest.fixture(scope="module")
def every_kind():
    network = read_netlist(EVERY_KIND)
    return network, Port("3", "0"), resolve(network, [parse_vary_option("*=5%")])


def _equivalents(network, port, freqs):
    eqs = thevenin(network, port, freqs)
    return np.array([[e.vth, e.zth] for e in eqs])


def test_matrix_at_part_values_is_the_assembled_matrix(every_kind):
    network, port, parts = every_kind
    vs = VariedSystem(network, port, parts)
    rng = np.random.default_rng(3)
    values = values_at(parts, rng.uniform(-1, 1, (3, len(parts))))
    d0, d1 = vs.data(values)
    sources = vs.sources(values)
    for s in range(3):
        fresh = MnaSystem(apply_values(network, parts, {p.name: v for p, v in zip(parts, values[s])}))
        assert np.array_equal(fresh._pattern.indices, vs.system._pattern.indices)
        scale = np.abs(fresh._a0).max()
        assert np.abs(d0[s] - fresh._a0).max() <= 1e-14 * scale
        assert np.abs(d1[s] - fresh._a1).max() <= 1e-14 * np.abs(fresh._a1).max()
        assert np.abs(sources[s] - fresh.source_vector()).max() <= 1e-15 * np.abs(sources[s]).max()


def test_adjoint_agrees_with_central_differences_of_the_own_solver(every_kind):
    """Step h = 1e-5 x |p|: truncation ~h² ~ 1e-10 and rounding ~eps/h ~ 1e-11 (relative), so 1e-7 of the
    largest sensitivity of each quantity and frequency is ample and still catches a wrong stamp."""
    network, port, parts = every_kind
    nominal, slopes = adjoint_slopes(network, port, FREQS, parts)
    assert np.allclose(nominal, _equivalents(network, port, FREQS), rtol=1e-12, atol=0)
    for i, p in enumerate(parts):
        h = 1e-5 * abs(p.nominal)
        up = _equivalents(apply_values(network, parts, {p.name: p.nominal + h}), port, FREQS)
        down = _equivalents(apply_values(network, parts, {p.name: p.nominal - h}), port, FREQS)
        central = (up - down) / (2 * h)
        for f in range(len(FREQS)):
            for k in range(2):
                scale = np.abs(slopes[f, k] * [q.nominal for q in parts]).max() / abs(p.nominal)
                assert abs(central[f, k] - slopes[f, k, i]) <= 1e-7 * scale, (p.name, f, k)


def test_adjoint_equals_sympy_exact_derivatives():
    """A three-element network solved symbolically by nodal analysis, differentiated by sympy."""
    network = read_netlist("t\nV1 1 0 AC 3\nR1 1 2 470\nC1 2 0 220n\nL1 2 3 4.7m\nR2 3 0 1.5k\n")
    port = Port("3", "0")
    parts = resolve(network, [parse_vary_option("*=1%")])
    r1, c1, l1, r2, vs, w = sympy.symbols("R1 C1 L1 R2 Vs w", positive=True)
    v2, v3 = sympy.symbols("v2 v3")
    j = sympy.I

    def node_voltage_3(source, injected):
        kcl = [
            (v2 - source) / r1 + j * w * c1 * v2 + (v2 - v3) / (j * w * l1),
            (v3 - v2) / (j * w * l1) + v3 / r2 - injected,
        ]
        return sympy.solve(kcl, [v2, v3], dict=True)[0][v3]

    vth, zth = node_voltage_3(vs, 0), node_voltage_3(0, 1)
    symbols = {"v1": vs, "r1": r1, "c1": c1, "l1": l1, "r2": r2}
    freq = 3.3e3
    at = {vs: 3.0, r1: 470.0, c1: 220e-9, l1: 4.7e-3, r2: 1500.0, w: 2 * np.pi * freq}
    _, slopes = adjoint_slopes(network, port, [freq], parts)
    for i, p in enumerate(parts):
        for k, q in enumerate((vth, zth)):
            exact = complex(sympy.diff(q, symbols[p.name]).evalf(30, subs=at))
            assert abs(slopes[0, k, i] - exact) <= 1e-10 * max(abs(exact), 1e-300), (p.name, k)


def test_normalised_sensitivities_are_ranked_and_sum_like_homogeneity():
    """Scaling every R and L by t and every C by 1/t leaves V_th alone and scales Z_th by t (impedance
    scaling), so the normalised |Z_th| sensitivities to R, L sum to 1 minus those to C: 1 = ΣS_R + ΣS_L − ΣS_C."""
    network = read_netlist("t\nV1 1 0 AC 1\nR1 1 2 1k\nL1 2 3 10m\nC1 3 0 100n\nR2 3 0 10k\n")
    parts = resolve(network, [parse_vary_option("*=1%")])
    point = own_spread(network, Port("3", "0"), [4e3], parts, SpreadSpec((), samples=0)).points[0]
    z = point.zth.sensitivities  # type: ignore[union-attr]
    assert z["r1"][0] + z["r2"][0] + z["l1"][0] - z["c1"][0] == pytest.approx(1.0, abs=1e-9)
    assert abs(point.vth.sensitivities["v1"][0] - 1.0) <= 1e-12  # type: ignore[union-attr]
    sizes = [abs(s[0]) for s in z.values()]
    assert sizes == sorted(sizes, reverse=True)


def _every_corner(network, port, parts, freq):
    corners = np.array(list(itertools.product((-1.0, 1.0), repeat=len(parts))))
    vs = VariedSystem(network, port, parts)
    return port_values(vs, values_at(parts, corners), np.array([freq]))[:, 0, :]


def test_corner_search_finds_the_extreme_corner_near_resonance():
    """At resonance |V_th| is not monotonic in L and C: the first-order corner is not always the extreme."""
    network = read_netlist("t\nV1 1 0 AC 10\nR1 1 2 1k\nL1 2 3 10m\nC1 3 0 100n\nR2 3 0 10k\n")
    port = Port("3", "0")
    parts = resolve(network, [parse_vary_option("*=5%")])
    freq = 5.03e3
    spread = own_spread(network, port, [freq], parts, SpreadSpec((), samples=0)).points[0]
    corners = _every_corner(network, port, parts, freq)
    vth = corners[:, 0]
    worst = spread.vth.worst_case  # type: ignore[union-attr]
    assert worst["abs"].maximum == pytest.approx(np.abs(vth).max(), rel=1e-12)
    assert worst["abs"].minimum == pytest.approx(np.abs(vth).min(), rel=1e-12)
    assert worst["re"].minimum == pytest.approx(vth.real.min(), rel=1e-12)
    methods = {e.min_method for e in worst.values()} | {e.max_method for e in worst.values()}
    assert "corner search" in methods  # the first-order corner was beaten at least once here
    corner = worst["abs"].min_corner
    values = np.array([corner[p.name] for p in parts])
    again = port_values(VariedSystem(network, port, parts), values[None], np.array([freq]))[0, 0, 0]
    assert abs(again) == pytest.approx(worst["abs"].minimum, rel=1e-12)


def test_groups_move_together():
    network = read_netlist("t\nV1 1 0 AC 1\nR1 1 2 1k\nR2 2 0 1k\n")
    parts = resolve(network, [parse_vary_option("R1,R2=1%@pair")])
    point = own_spread(network, Port("2", "0"), [0.0], parts, SpreadSpec((), samples=50)).points[0]
    vth = point.vth  # type: ignore[union-attr]
    assert vth.worst_case["abs"].maximum == pytest.approx(0.5, rel=1e-14)  # a matched divider does not move
    for corner in (vth.worst_case["abs"].min_corner, vth.worst_case["abs"].max_corner):
        assert corner["r1"] == corner["r2"]
    u = draw(parts, 10, seed=4)
    assert u.shape == (10, 1)


def test_monte_carlo_is_seeded_and_exact(every_kind):
    network, port, parts = every_kind
    spec = SpreadSpec((), samples=300, seed=7, spice_samples=5)
    first = own_spread(network, port, FREQS, parts, spec)
    again = own_spread(network, port, FREQS, parts, spec)
    other = own_spread(network, port, FREQS, parts, SpreadSpec((), samples=300, seed=8))
    mc = first.points[1].zth.monte_carlo  # type: ignore[union-attr]
    assert mc is not None and mc.samples == 300 and len(mc.subset) == 5 and len(first.sample_values) == 5
    assert mc.abs_percentiles == again.points[1].zth.monte_carlo.abs_percentiles  # type: ignore[union-attr]
    assert mc.abs_percentiles != other.points[1].zth.monte_carlo.abs_percentiles  # type: ignore[union-attr]
    levels = list(mc.abs_percentiles.values())
    assert levels == sorted(levels)
    worst = first.points[1].zth.worst_case["abs"]  # type: ignore[union-attr]
    assert worst.minimum <= levels[0] and levels[-1] <= worst.maximum
    for s, values in enumerate(first.sample_values):
        eq = thevenin(apply_values(network, parts, values), port, FREQS)[1]
        assert abs(mc.subset[s] - eq.zth) <= 1e-12 * abs(eq.zth)
    exact = thevenin(apply_values(network, parts, mc.worst_values), port, FREQS)[1]
    assert abs(mc.worst_value - exact.zth) <= 1e-12 * abs(exact.zth)


def test_draws_follow_their_distribution():
    network = read_netlist("t\nV1 1 0 AC 1\nR1 1 2 1k\nR2 2 0 1k\nR3 2 0 1k\n")
    parts = resolve(network, [parse_vary_option(t) for t in ("R1=3%", "R2=3%:normal", "R3=3%:corners")])
    u = draw(parts, 20_000, seed=1)
    assert np.abs(u[:, 0]).max() <= 1.0 and abs(u[:, 0].std() - 1 / np.sqrt(3)) < 0.01
    assert abs(u[:, 1].std() - 1 / 3) < 0.01  # tol = 3 sigma
    assert set(np.unique(u[:, 2])) == {-1.0, 1.0}


def test_sparse_paths_agree_with_the_solver():
    network, port = build("ladder", 120, seed=2)
    parts = resolve(network, [parse_vary_option("r*=2%"), parse_vary_option("c*=5%")])
    vs = VariedSystem(network, port, parts)
    assert vs.size > DENSE_LIMIT
    freqs = np.array([1e3, 1e5])
    values = values_at(parts, draw(parts, 70, seed=3))
    compiled = port_values(vs, values, freqs)
    python = _sparse_chunk(vs, values, freqs)
    assert np.allclose(compiled, python, rtol=1e-12, atol=0)
    for s in (0, 69):
        exact = _equivalents(apply_values(network, parts, {p.name: v for p, v in zip(parts, values[s])}), port, freqs)
        assert np.allclose(compiled[s], exact, rtol=1e-11, atol=0)
    xs, lam = solutions_at(vs, values[:3], 1e5)
    assert np.allclose(vs.port_voltage(np.moveaxis(xs, 1, 0)), compiled[:3, 1], rtol=1e-12, atol=0)
    c = vs.port_vector()
    for s in range(3):  # λ solves Aᵀλ = c at that value set
        d0, d1 = vs.data(values[s : s + 1])
        a = vs.dense(d0, d1, 1e5)[0]
        assert np.abs(a.T @ lam[s] - c).max() <= 1e-12 * np.abs(a).max() * np.abs(lam[s]).max()
    _, slopes = adjoint_slopes(network, port, freqs, parts)
    i = 5
    h = 1e-5 * parts[i].nominal
    up = _equivalents(apply_values(network, parts, {parts[i].name: parts[i].nominal + h}), port, freqs)
    down = _equivalents(apply_values(network, parts, {parts[i].name: parts[i].nominal - h}), port, freqs)
    assert np.allclose((up - down) / (2 * h), slopes[:, :, i], rtol=1e-6, atol=1e-9 * np.abs(slopes).max())


def test_a_limit_that_passes_at_nominal_fails_at_a_corner():
    network = read_netlist("t\nV1 1 0 AC 10\nR1 1 2 1k\nR2 2 0 1k\n")
    parts = resolve(network, [parse_vary_option("R*=5%")])
    limit = Limit("abs", "vth", 4.9, 5.1, None, "abs(vth)", 1)
    spread = own_spread(network, Port("2", "0"), [0.0, 50.0], parts, SpreadSpec((), samples=400, seed=2), [limit])
    (result,) = spread.limits
    assert not result.holds and result.failing_corner is not None
    # |V| = 10·R2/(R1+R2): the highest at R1 low, R2 high.
    assert result.highest == pytest.approx(10 * 1050 / (950 + 1050), rel=1e-13)
    assert result.highest_corner == {"r1": 950.0, "r2": 1050.0}
    assert result.violating_fraction is not None and 0.0 < result.violating_fraction < 1.0
    assert result.worst_sample is not None and result.worst_sample_values is not None
    r1, r2 = result.worst_sample_values["r1"], result.worst_sample_values["r2"]
    worst_v = 10 * r2 / (r1 + r2)
    assert worst_v > 5.1 or worst_v < 4.9  # the sample with the least margin does break the limit
    holds = own_spread(
        network, Port("2", "0"), [0.0], parts, SpreadSpec((), 0), [Limit("abs", "vth", 4.0, 6.0, None, "abs(vth)", 2)]
    ).limits[0]
    assert holds.holds and holds.failing_corner is None and holds.violating_fraction is None


def test_dc_sources_vary_their_dc_value_with_its_sign():
    network = dataclasses.replace(read_netlist("t\nV1 1 0 DC -5 AC 1 90\nR1 1 2 1k\nR2 2 0 1k\n"), excitation="dc")
    parts = resolve(network, [parse_vary_option("V1=10%")])
    assert parts[0].parameter == "dc_value" and parts[0].nominal == -5.0
    point = own_spread(network, Port("2", "0"), [0.0], parts, SpreadSpec((), samples=20)).points[0]
    re = point.vth.worst_case["re"]  # type: ignore[union-attr]
    assert (re.minimum, re.maximum) == (pytest.approx(-2.75, rel=1e-14), pytest.approx(-2.25, rel=1e-14))
    assert re.min_corner == {"v1": -5.5}
    assert point.vth.sensitivities["v1"] == (pytest.approx(1.0, rel=1e-14), pytest.approx(0.0, abs=1e-14))  # type: ignore[union-attr]


def test_no_thevenin_form_is_refused_with_the_reason():
    network = read_netlist("t\nI1 0 1 AC 1m\nC1 1 2 1u\nR1 2 0 1k\n")  # at DC the port sees only a current source
    parts = resolve(network, [parse_vary_option("R1=1%")])
    with pytest.raises(SpreadError, match="no Thevenin form"):
        own_spread(network, Port("1", "0"), [0.0], parts, SpreadSpec(()))


def test_slopes_at_a_corner_agree_with_central_differences_there(every_kind):
    """The corner search's exact slopes (``solutions_at`` + ``sensitivities`` at part values): same step rule."""
    network, port, parts = every_kind
    vs = VariedSystem(network, port, parts)
    corner = values_at(parts, np.where(np.arange(len(parts)) % 2, 1.0, -1.0)[None])[0]
    xs, lam = solutions_at(vs, corner[None], 5e3)
    slopes = vs.sensitivities(np.array([5e3]), xs, lam, corner[None])[0]
    at = {p.name: v for p, v in zip(parts, corner)}
    for i, p in enumerate(parts):
        h = 1e-5 * abs(corner[i])
        up = _equivalents(apply_values(network, parts, {**at, p.name: corner[i] + h}), port, [5e3])[0]
        down = _equivalents(apply_values(network, parts, {**at, p.name: corner[i] - h}), port, [5e3])[0]
        for k in range(2):
            scale = np.abs(slopes[k] * corner).max() / abs(corner[i])
            assert abs((up[k] - down[k]) / (2 * h) - slopes[k, i]) <= 1e-7 * scale, (p.name, k)


def test_adjoint_agrees_with_central_differences_on_generated_networks():
    """The fuzzer's seeded networks (every family, controlled sources and couplings included). Step h = 1e-4·|p|;
    the allowance is the difference's truncation (1e-6 of the largest sensitivity times p) plus its rounding:
    the solve's error κ·ε·(solution scale), divided by h, times 10. Where the port quantity is tiny against the
    network's own voltages the difference is mostly rounding; the count at the end makes sure that enough checks
    are tight (allowance under a tenth of the sensitivity itself) to catch a wrong stamp."""
    checked = tight = 0
    for case in generate_cases(11, 16):
        network, port = case.network, case.port
        names = tuple(
            e.name
            for e in network.elements
            if "." not in e.name
            and (e.kind in "LCEFGH" or (e.kind == "R" and e.value != 0) or (e.kind in "VI" and e.ac_mag != 0)
                 or (e.kind == "K" and e.value <= 0.98))
        )  # fmt: skip
        eqs = thevenin(network, port, case.freqs_hz)
        if case.caveat or network.excitation != "ac" or any(e.vth is None or e.zth is None for e in eqs):
            continue
        parts = resolve(network, [Vary(names, 0.01, None)])
        _, slopes = adjoint_slopes(network, port, case.freqs_hz, parts)
        nominal = np.array([p.nominal for p in parts])
        for i, p in enumerate(parts):
            h = 1e-4 * abs(p.nominal)
            up = _equivalents(apply_values(network, parts, {p.name: p.nominal + h}), port, case.freqs_hz)
            down = _equivalents(apply_values(network, parts, {p.name: p.nominal - h}), port, case.freqs_hz)
            central = (up - down) / (2 * h)
            for f, eq in enumerate(eqs):
                for k, scale in enumerate((eq.vth_scale, eq.zth_scale)):
                    truncation = 1e-6 * np.abs(slopes[f, k] * nominal).max() / abs(p.nominal)
                    rounding = 10 * eq.condition * np.finfo(float).eps * scale / h
                    assert abs(central[f, k] - slopes[f, k, i]) <= truncation + rounding, (case.seed, p.name, f, k)
                    tight += truncation + rounding < 0.1 * abs(slopes[f, k, i])
            checked += 1
    assert checked >= 100 and tight >= 150  # measured: 133 parts of 15 networks, 186 tight checks of 520


def test_sample_count_and_empty_spread_are_refused():
    network = read_netlist("t\nV1 1 0 AC 1\nR1 1 2 1k\nR2 2 0 1k\n")
    parts = resolve(network, [parse_vary_option("R1=1%")])
    with pytest.raises(SpreadError, match="samples = -1 is outside"):
        own_spread(network, Port("2", "0"), [0.0], parts, SpreadSpec((), samples=-1))
    with pytest.raises(SpreadError, match="no part varies"):
        own_spread(network, Port("2", "0"), [0.0], [], SpreadSpec(()))
