"""Multi-port Thevenin and Norton forms from the MNA solver: V = voc + Z·I, I = Y·V - isc.

The one-port route (``own.equivalent``) generalised to N ports: per frequency one factorization of the
network's matrix and N+1 right-hand sides, the network's own sources (the open-circuit voltages ``voc``)
and a 1 A test current into ``a_k`` and out of ``b_k`` for each port with the sources zeroed (column k of
Z). Dependent sources stay active, so nothing is assumed about reciprocity: ``||Z - Z^T|| / ||Z||`` is
measured and reported. Y = inv(Z) and ``isc = Y·voc`` exist where Z is nonsingular; where it is singular
(an ideal source across a port, two ports joined by a voltage source) the point says which ports, from Z's
null vector. Where the open network itself is singular at a frequency (a port reached only through an
ideal current source, or behind a capacitor at DC) the ports are shorted by 0 V branches instead, and the
point has the Norton form only (Z from inv(Y) where that exists). Sign conventions: ``model.port_matrices``.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from crosscheck.errors import PortError, SingularNetworkError
from crosscheck.model.budget import ENTRIES_PER_ELEMENT, NO_DEADLINE, Budget, sweep_bytes
from crosscheck.model.network import Network, Port, check_excitation, check_port, dc_view, make_element
from crosscheck.model.port_matrices import MatrixPoint, NamedPort, floating_references
from crosscheck.own.assembly import STAMPS, Stamps
from crosscheck.own.equivalent import _ZERO_ROUNDOFF
from crosscheck.own.solver import DENSE_LIMIT, THREADS_FROM, MnaSystem, default_threads

#: A port takes part in Z's null space when its entry of the null vector is at least this share of the largest.
_NULL_SHARE = 0.1


def plain_ports(ports: Sequence[Port | NamedPort]) -> tuple[Port, ...]:
    """The node pairs of ``ports``, named or not."""
    return tuple(p.port if isinstance(p, NamedPort) else p for p in ports)


def reduce_ports(
    network: Network,
    ports: Sequence[Port | NamedPort],
    freqs_hz: Sequence[float] | float,
    *,
    stamps: Stamps = STAMPS,
    budget: Budget | None = None,
) -> tuple[MatrixPoint, ...]:
    """The multi-port forms at ``ports`` for each frequency (Hz; 0 is DC), one factorization per frequency.

    ``stamps`` and ``budget`` as for ``own.equivalent.thevenin``; with one port the numbers are those of
    ``thevenin`` (V_th, Z_th, I_N, Y_N as 1x1 arrays).
    """
    pairs = plain_ports(ports)
    if not pairs:
        raise PortError("no port given; name at least one port (two nodes)")
    freqs = np.atleast_1d(np.asarray(freqs_hz, dtype=float))
    if network.excitation == "dc":
        check_excitation("dc", freqs.tolist(), "the own route")
        network = dc_view(network)
    for port in pairs:
        check_port(network, port)
    bad = freqs[~np.isfinite(freqs) | (freqs < 0)]
    if bad.size:
        raise ValueError(f"frequency {bad[0]!r} Hz is not allowed; give finite frequencies >= 0")
    ties = floating_references(network, pairs)
    deadline = NO_DEADLINE
    if budget is not None:
        deadline = budget.deadline()
        _check_memory(network, len(ties), len(freqs), len(pairs) + 1, budget)
    system = MnaSystem(network, ties, stamps)
    rhs = np.stack([system.source_vector()] + [system.injection_vector(p.a, p.b) for p in pairs], axis=1)
    try:
        xs, conds = system.solve_many(freqs, rhs, deadline=deadline)
    except SingularNetworkError:
        out = []
        for i, f in enumerate(freqs):  # one factorization each, so a singular frequency costs only itself
            deadline.check(i, len(freqs))
            out.append(_one_frequency(system, network, pairs, float(f), ties, stamps, rhs))
        return tuple(out)
    volts = _port_voltages(system, xs, pairs)  # (F, N, N+1)
    # Column by column: numpy reduces the middle axis of a (F, n, k) array far more slowly (``own.equivalent``).
    scales = np.max([np.abs(xs[:, :, c]).max(axis=1, initial=0.0) for c in range(1, xs.shape[2])], axis=0)
    v_scales = np.abs(xs[:, :, 0]).max(axis=1, initial=0.0)
    return tuple(
        from_open_ports(
            float(f), volts[i, :, 0], volts[i, :, 1:], float(conds[i]), float(scales[i]), float(v_scales[i])
        )
        for i, f in enumerate(freqs)
    )


def _check_memory(network: Network, ties: int, frequencies: int, columns: int, budget: Budget) -> None:
    """Refuse the sweep before assembly when its memory estimate (``sweep_bytes``, unknowns bounded by nodes +
    elements + ties, both solve paths that may be taken) is over the budget."""
    nonzeros = ENTRIES_PER_ELEMENT * len(network.elements) + 4 * ties
    unknowns = len(network.node_index) + len(network.elements) + ties
    threads = default_threads() if unknowns >= THREADS_FROM else 1
    dense = unknowns <= DENSE_LIMIT
    estimate = sweep_bytes(unknowns, nonzeros, frequencies, columns, dense=dense, threads=threads)
    budget.check_memory(
        estimate,
        lambda: (
            f"this multi-port sweep (at most {unknowns:,} unknowns, {frequencies:,} frequencies x {columns} "
            "right-hand sides)"
        ),
    )


def _port_voltages(system: MnaSystem, xs: np.ndarray, ports: Sequence[Port]) -> np.ndarray:
    """(F, N, columns): V(a_k) - V(b_k) of every solution column at every frequency."""
    rows = []
    for port in ports:
        plus = system.node_index.get(port.a)
        minus = system.node_index.get(port.b)
        v = xs[:, plus, :] if plus is not None else np.zeros(xs.shape[::2], dtype=complex)
        if minus is not None:
            v = v - xs[:, minus, :]
        rows.append(v)
    return np.stack(rows, axis=1)


def from_open_ports(
    f: float, voc: np.ndarray, z: np.ndarray, condition: float, scale: float, voc_scale: float = 0.0
) -> MatrixPoint:
    """The point from the open-circuit voltages and Z; Y and isc where Z is nonsingular, else which ports not.

    ``scale``: the largest entry of the test solutions, against which a singular value of Z is a rounding
    zero (the one-port rule of ``own.equivalent``: with one port, |Z_th| at most 1e3·eps of it);
    ``voc_scale``: the largest entry of the open-circuit solution. Both go into ``MatrixPoint.scales``.
    """
    voc, z = np.asarray(voc, dtype=complex), np.asarray(z, dtype=complex)
    scales = (voc_scale, scale)
    reciprocity = _reciprocity(z)
    u, s, vh = np.linalg.svd(z)
    if s[-1] <= _ZERO_ROUNDOFF * max(scale, float(s[0])) or s[-1] == 0:
        which = null_ports(vh[-1].conj())
        note = (
            f"Z is singular (smallest singular value {s[-1]:.3g} against largest {s[0]:.3g}): an ideal source or a "
            f"loop of voltage-defined branches fixes the voltage of {_ports_words(which)}, so there is no Norton "
            "form (no Y, no isc)"
        )
        return MatrixPoint(f, voc, z, None, None, condition, (note,), math.inf, reciprocity, scales)
    y = np.linalg.inv(z)
    isc = y @ voc
    z_condition = float(np.linalg.norm(z, 1) * np.linalg.norm(y, 1))
    return MatrixPoint(f, voc, z, isc, y, condition, (), z_condition, reciprocity, scales)


def null_ports(vector: np.ndarray) -> list[int]:
    """The ports (0-based) that carry a null vector of Z: those whose entry is a fair share of its largest."""
    size = np.abs(vector)
    return [int(k) for k in np.flatnonzero(size >= _NULL_SHARE * size.max())]


def _ports_words(which: Sequence[int]) -> str:
    names = [str(k + 1) for k in which]
    if len(names) == 1:
        return f"port {names[0]}"
    return "ports " + ", ".join(names[:-1]) + " and " + names[-1] + " together"


def _reciprocity(z: np.ndarray) -> float:
    """||Z - Z^T||_F / ||Z||_F: 0 for a reciprocal network (and for Z = 0)."""
    norm = float(np.linalg.norm(z))
    return 0.0 if norm == 0 else float(np.linalg.norm(z - z.T)) / norm


def _one_frequency(
    system: MnaSystem,
    network: Network,
    ports: Sequence[Port],
    f: float,
    ties: list[str],
    stamps: Stamps,
    rhs: np.ndarray,
) -> MatrixPoint:
    """The open-port route at one frequency; where the open network is singular, the shorted-port route."""
    try:
        fac = system.factorize(f)
    except SingularNetworkError as open_error:
        return _from_shorted_ports(network, ports, f, ties, open_error, stamps)
    x = fac.solve(rhs)[None]
    volts = _port_voltages(system, x, ports)[0]
    z_scale, v_scale = float(np.abs(x[0, :, 1:]).max(initial=0.0)), float(np.abs(x[0, :, 0]).max(initial=0.0))
    return from_open_ports(f, volts[:, 0], volts[:, 1:], fac.condition, z_scale, v_scale)


def _from_shorted_ports(
    network: Network, ports: Sequence[Port], f: float, ties: list[str], open_error: SingularNetworkError, stamps: Stamps
) -> MatrixPoint:
    """Every port shorted by a 0 V branch: the branch currents are isc; a 1 V test on each gives Y's column."""
    shorts = tuple(make_element(f"vport:short:{k + 1}", "V", p) for k, p in enumerate(ports))
    system = MnaSystem(network.with_elements(network.elements + shorts), ties, stamps)
    rows = [system.branch_index[s.name] for s in shorts]
    tests = np.zeros((system.size, len(ports)), dtype=complex)
    tests[rows, range(len(ports))] = 1.0
    try:
        fac = system.factorize(f)
    except SingularNetworkError:
        raise open_error from None
    x = fac.solve(np.concatenate([system.source_vector()[:, None], tests], axis=1))
    isc = x[rows, 0]
    y = -x[rows][:, 1:]
    scale = float(np.abs(x[:, 1:]).max(initial=0.0))
    u, s, vh = np.linalg.svd(y)
    nan = np.full(len(ports), complex(math.nan, math.nan))
    if s[-1] <= _ZERO_ROUNDOFF * max(scale, float(s[0])) or s[-1] == 0:
        which = null_ports(vh[-1].conj())
        note = (
            f"the open network is singular here and Y is singular: an ideal current source (or a part reached "
            f"only through one) drives {_ports_words(which)}, so there is no Thevenin form (no voc, no Z)"
        )
        return MatrixPoint(f, nan, None, isc, y, fac.condition, (note,), math.inf, None)
    z = np.linalg.inv(y)
    note = "the open network is singular here; Z = inv(Y) and voc = Z·isc come from the shorted ports"
    z_condition = float(np.linalg.norm(z, 1) * np.linalg.norm(y, 1))
    return MatrixPoint(f, z @ isc, z, isc, y, fac.condition, (note,), z_condition, _reciprocity(z))
