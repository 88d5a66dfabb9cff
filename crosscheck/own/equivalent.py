"""Thevenin and Norton equivalents at a port, from the MNA solver.

V_th is the open-circuit voltage V(a) − V(b). Z_th is found with a 1 A test
current into a and out of b on the *same* factorization, with independent
sources zeroed and dependent sources left active (Thévenin 1883, Norton 1926;
see D. H. Johnson, "Origins of the equivalent circuit concept", Proc. IEEE
91, 2003). No series/parallel reduction is used, so dependent sources and
coupled inductors need no special case.

Degenerate ports are explicit: Z_th = 0 (an ideal voltage source at the port)
has no Norton form; Y_N = 0 (an ideal current source at the port, e.g. at DC
behind a capacitor) has no Thevenin form and is found with the port shorted.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from crosscheck.errors import SingularNetworkError
from crosscheck.model.budget import ENTRIES_PER_ELEMENT, NO_DEADLINE, Budget, Deadline, sweep_bytes
from crosscheck.model.network import (
    Network,
    Port,
    check_excitation,
    check_port,
    dc_view,
    floating_reference,
    make_element,
)
from crosscheck.own.assembly import BRANCH_KINDS, STAMPS, Stamps
from crosscheck.own.small import SmallSystem, small_system

if TYPE_CHECKING:  # the general path's solver (and scipy.sparse) is loaded only when a network needs it
    from crosscheck.own.solver import MnaSystem

#: |Z_th| below this multiple of eps times the test solution's largest entry is an exact zero. It is
#: not scaled by the condition number: an ill-conditioned network's small Z_th is still a value (the
#: comparison judges its accuracy), while an ideal source at the port gives zero to within a few ulps.
_ZERO_ROUNDOFF = 1e3 * np.finfo(float).eps


@dataclass(frozen=True)
class ElementForm:
    """An impedance (or admittance) drawn as a resistance (conductance) with one reactive element."""

    resistance: float  # Ω for the series form, S (conductance) for the parallel form
    reactive_kind: str | None  # "L", "C" or None (purely resistive, or DC)
    reactive_value: float | None  # H or F


@dataclass(frozen=True)
class Equivalent:
    """The equivalent at one frequency. None marks a form that does not exist at this port."""

    freq_hz: float
    vth: complex | None
    zth: complex | None
    in_: complex | None
    yn: complex | None
    condition: float
    note: str = ""
    #: Largest node voltage of the open-circuit and of the test solution: the scale against which a
    #: backward-stable solve is accurate (normwise), used to judge tiny components fairly.
    vth_scale: float = 0.0
    zth_scale: float = 0.0

    @property
    def omega(self) -> float:
        return 2.0 * math.pi * self.freq_hz

    def series_form(self) -> ElementForm | None:
        """Z_th as R in series with L (X > 0) or C (X < 0)."""
        if self.zth is None:
            return None
        r, x = self.zth.real, self.zth.imag
        if self.freq_hz == 0 or x == 0:
            return ElementForm(r, None, None)
        if x > 0:
            return ElementForm(r, "L", x / self.omega)
        return ElementForm(r, "C", -1.0 / (self.omega * x))

    def parallel_form(self) -> ElementForm | None:
        """Y_N as G in parallel with C (B > 0) or L (B < 0)."""
        if self.yn is None:
            return None
        g, b = self.yn.real, self.yn.imag
        if self.freq_hz == 0 or b == 0:
            return ElementForm(g, None, None)
        if b > 0:
            return ElementForm(g, "C", b / self.omega)
        return ElementForm(g, "L", -1.0 / (self.omega * b))


def thevenin(
    network: Network,
    port: Port,
    freqs_hz: Sequence[float] | float,
    *,
    stamps: Stamps = STAMPS,
    budget: Budget | None = None,
) -> list[Equivalent]:
    """Equivalents at ``port`` for each frequency (Hz; 0 is DC), one factorization per frequency.

    ``stamps``: how elements and the test current enter the matrix; the correct ones unless a caller
    measuring the comparison passes broken ones (``crosscheck.fuzz.faults``).
    ``budget``: the time and memory this case may use (None: no limit). Its memory limit is held against
    ``model.budget.sweep_bytes`` before assembly (``MemoryBudgetError``); its deadline is checked between
    runs of frequencies (``TimeBudgetError``).
    Under ``network.excitation == "dc"`` the sources' DC values are the excitation (real phasors, 0 Hz only).
    """
    freqs = np.atleast_1d(np.asarray(freqs_hz, dtype=float))
    if network.excitation == "dc":  # the sources' DC values excite it, at 0 Hz only (``model.network.dc_view``)
        check_excitation("dc", freqs.tolist(), "the own route")
        network = dc_view(network)
    check_port(network, port)
    bad = freqs[~np.isfinite(freqs) | (freqs < 0)]
    if bad.size:
        raise ValueError(f"frequency {bad[0]!r} Hz is not allowed; give finite frequencies >= 0")
    ties = [r] if (r := floating_reference(network, port)) is not None else []
    deadline = NO_DEADLINE if budget is None else budget.deadline()
    small = small_system(network, ties, stamps)
    if small is not None:
        solved = _small_sweep(small, port, freqs, budget, deadline)
        if solved is not None:
            return solved
    from crosscheck.own.solver import MnaSystem  # start-up time: scipy.sparse only past the small path

    if budget is not None:
        _check_memory(network, len(ties), len(freqs), budget)
    system = MnaSystem(network, ties, stamps)
    rhs = np.stack([system.source_vector(), system.injection_vector(port.a, port.b)], axis=1)
    try:
        xs, conds = system.solve_many(freqs, rhs, deadline=deadline)
    except SingularNetworkError:
        out = []
        for i, f in enumerate(freqs):  # the slow path: one factorization each, so the deadline is read each
            deadline.check(i, len(freqs))
            out.append(_one_frequency(system, network, port, float(f), ties, stamps))
        return out
    return _from_open_port(system, port, freqs, xs, conds)


def _small_sweep(
    system: SmallSystem, port: Port, freqs: np.ndarray, budget: Budget | None, deadline: Deadline
) -> list[Equivalent] | None:
    """The sweep on the small-network path (``own.small``), its memory held against the budget first;
    None when it hands the network back to the general path (a singular or near-singular matrix)."""
    if budget is not None:
        budget.check_memory(
            sweep_bytes(system.size, system.nonzeros, len(freqs), 2, dense=True),
            lambda: f"this sweep ({system.size:,} unknowns, {len(freqs):,} frequencies x 2 right-hand sides)",
        )
    rhs = np.stack([system.source_vector(), system.injection_vector(port.a, port.b)], axis=1)
    solved = system.solve_many(freqs, rhs, deadline)
    if solved is None:
        return None
    return _from_open_port(system, port, freqs, *solved)


def _check_memory(network: Network, ties: int, frequencies: int, budget: Budget) -> None:
    """Refuse the sweep before assembly when ``sweep_bytes``' estimate is over the budget's memory.

    The nonzeros are bounded by ``ENTRIES_PER_ELEMENT`` per element and four per tie. The unknowns are
    first bounded by nodes + elements + ties (free to count, and enough for almost every case); only when
    that bound is over the limit are they counted as ``MnaSystem`` numbers them (nodes, branch elements,
    ideal shorts, ties), so that the refusal is not the coarse bound's doing.
    """
    from crosscheck.own.solver import DENSE_LIMIT  # start-up time: scipy.sparse only past the small path

    if budget.memory_bytes is None:
        return
    nonzeros = ENTRIES_PER_ELEMENT * len(network.elements) + 4 * ties
    unknowns = len(network.node_index) + len(network.elements) + ties
    paths = (False, True) if len(network.node_index) + ties <= DENSE_LIMIT else (False,)  # which may be taken
    if max(_estimate(unknowns, nonzeros, frequencies, dense) for dense in paths) <= budget.memory_bytes:
        return
    arrays = network.element_arrays
    branches = arrays.of_kind(BRANCH_KINDS) | ((arrays.kind == ord("R")) & (arrays.value == 0.0))
    unknowns = len(network.node_index) + int(np.count_nonzero(branches)) + ties
    budget.check_memory(
        _estimate(unknowns, nonzeros, frequencies, unknowns <= DENSE_LIMIT),
        lambda: (
            f"this sweep ({unknowns:,} unknowns, at most {nonzeros:,} matrix entries, {frequencies:,} frequencies "
            "x 2 right-hand sides)"
        ),
    )


def _estimate(unknowns: int, nonzeros: int, frequencies: int, dense: bool) -> int:
    """``sweep_bytes`` for a sweep of the two right-hand sides on the given path, with the threads
    ``solve_many`` will use."""
    from crosscheck.own.solver import THREADS_FROM, default_threads  # start-up time: see thevenin

    threads = default_threads() if unknowns >= THREADS_FROM else 1
    return sweep_bytes(unknowns, nonzeros, frequencies, 2, dense=dense, threads=threads)


def _one_frequency(
    system: MnaSystem, network: Network, port: Port, f: float, ties: list[str], stamps: Stamps
) -> Equivalent:
    """Open-port route for one frequency; if that is singular, the shorted-port (Norton) route."""
    rhs = np.stack([system.source_vector(), system.injection_vector(port.a, port.b)], axis=1)
    try:
        fac = system.factorize(f)
    except SingularNetworkError as open_error:
        return _from_shorted_port(network, port, f, ties, open_error, stamps)
    return _from_open_port(system, port, [f], fac.solve(rhs)[None], [fac.condition])[0]


def _port_voltage(system: MnaSystem | SmallSystem, x: np.ndarray, port: Port) -> np.ndarray:
    return np.asarray(system.voltage(x, port.a)) - np.asarray(system.voltage(x, port.b))


def _from_open_port(
    system: MnaSystem | SmallSystem,
    port: Port,
    freqs: Sequence[float] | np.ndarray,
    xs: np.ndarray,
    conds: Sequence[float] | np.ndarray,
) -> list[Equivalent]:
    """One equivalent per frequency from the (F, n, 2) solutions: open circuit, then the 1 A test injection."""
    volts = _port_voltage(system, np.moveaxis(xs, 1, 0), port)  # (F, 2), for the whole sweep at once
    # Scales over the whole solution, branch currents included: when a voltage source pins the port,
    # every node voltage of the test solution is 0 while the 1 A test current flows in branches.
    # Column by column: numpy reduces the middle axis of a (F, n, 2) array about ten times more slowly.
    scales = np.stack([np.abs(xs[:, :, c]).max(axis=1, initial=0.0) for c in range(xs.shape[2])], axis=1)  # (F, 2)
    # Plain Python numbers in one conversion each (numpy scalars one at a time cost more than the solve).
    rows = zip(
        np.asarray(freqs, dtype=float).tolist(),
        volts.tolist(),
        np.asarray(conds, dtype=float).tolist(),
        scales.tolist(),
        strict=True,
    )
    return [_equivalent(f, v[0], v[1], c, s[0], s[1]) for f, v, c, s in rows]


def _equivalent(f: float, vth: complex, zth: complex, condition: float, v_scale: float, z_scale: float) -> Equivalent:
    """The equivalent from the open-circuit voltage and the test injection's port voltage (Z_th)."""
    if abs(zth) <= _ZERO_ROUNDOFF * max(z_scale, abs(zth)) or zth == 0:
        return Equivalent(
            f,
            vth,
            0j,
            None,
            None,
            condition,
            "Z_th = 0: an ideal voltage source sits at the port, so there is no Norton form",
            v_scale,
            z_scale,
        )
    return Equivalent(f, vth, zth, vth / zth, 1.0 / zth, condition, "", v_scale, z_scale)


def _from_shorted_port(
    network: Network, port: Port, f: float, ties: list[str], open_error: SingularNetworkError, stamps: Stamps
) -> Equivalent:
    """Short the port with a 0 V branch: its current is I_N; a 1 V test on it gives Y_N."""
    from crosscheck.own.solver import MnaSystem  # start-up time: scipy.sparse only past the small path

    short = make_element("vport:short", "V", port)
    shorted = network.with_elements(network.elements + (short,))
    system = MnaSystem(shorted, ties, stamps)
    k = system.branch_index[short.name]
    test = np.zeros(system.size, dtype=complex)
    test[k] = 1.0
    try:
        fac = system.factorize(f)
    except SingularNetworkError:
        raise open_error from None
    x = fac.solve(np.stack([system.source_vector(), test], axis=1))
    in_ = complex(x[k, 0])
    yn = complex(-x[k, 1])
    scale = float(np.max(np.abs(x[:, 1]), initial=0.0))
    v_scale = float(np.max(np.abs(x[:, 0]), initial=0.0))
    if abs(yn) <= _ZERO_ROUNDOFF * max(scale, abs(yn)) or yn == 0:
        return Equivalent(
            f,
            None,
            None,
            in_,
            0j,
            fac.condition,
            "Y_N = 0: the port sees an ideal current source, so there is no Thevenin form",
            v_scale,
            math.inf,
        )
    return Equivalent(f, in_ / yn, 1.0 / yn, in_, yn, fac.condition, "", v_scale, 1.0 / abs(yn))
