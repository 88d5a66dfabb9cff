"""The reference route under DC excitation: ngspice's operating point (``.op``) instead of ``.ac``.

``solve_dc`` is what ``engine.solve`` does for a network whose ``excitation`` is "dc": the sources' DC
values drive it, at 0 Hz only. The decks come from ``op_deck`` (written from the model, no user text);
one deck holds the three runs (open, short, test), and when it fails each run goes alone, a singular
run making only its quantity unavailable, with the reason, as ``engine`` does for 0 Hz. Degenerate
ports (voltage-defined branches joining a and b) skip the short run and give I_N = V_th / Z_th, as
``engine`` does. The reading check runs the user's own lines under ``.op`` too (``reading``).

``engine`` imports this module, so it must not import ``engine``: the engine is used through its
``run`` method and ``version`` (``DcEngine``), and a failed run is recognised by its ``singular`` and
``lines`` attributes (``engine._RunFailed``).
"""

from __future__ import annotations

import time
from collections.abc import Callable, Iterable, Sequence
from typing import Any, Protocol

import numpy as np

from crosscheck.errors import CrosscheckError, ReferenceEngineError
from crosscheck.model.network import Network, Port, check_excitation, dc_view
from crosscheck.model.validation import validate
from crosscheck.spice.deck import RUNS, Deck, Run, check_freqs, port_is_voltage_defined
from crosscheck.spice.op_deck import build_op_deck
from crosscheck.spice.progress import COMBINED_LIMIT_ELEMENTS, tell_progress
from crosscheck.spice.reading import check_reading
from crosscheck.spice.results import SpicePoint, SpiceResult, route_mismatch

_QUANTITY = {"open": "V_th", "short": "I_N", "test": "Z_th"}


class DcEngine(Protocol):
    """What the DC route needs of ``engine.Engine`` (a protocol: ``engine`` imports this module)."""

    version: str

    def run(self, deck: Any, while_loaded: Callable[[dict[str, dict[str, np.ndarray]]], None] | None = None) -> Any: ...

    def instance_parameter(self, name: str, parameter: str) -> float | None: ...

    @property
    def last_lines(self) -> tuple[str, ...]: ...


def solve_dc(engine: DcEngine, network: Network, port: Port, freqs: Iterable[float]) -> SpiceResult:
    """ngspice's DC equivalent of ``network`` at ``port`` by ``.op``; ``freqs`` must all be 0 (repeats kept)."""
    requested = check_freqs(freqs)
    check_excitation("dc", requested, "the ngspice route")
    view = dc_view(network)  # refuses a source whose DC value the reader could not tell
    validate(view, port)
    started = time.perf_counter()
    degenerate = port_is_voltage_defined(view, port)
    runs = tuple(r for r in RUNS if not (r == "short" and degenerate))
    op = _OperatingPoint(engine, view, port)
    if requested:
        op.solve(runs)
    notes: list[str] = []
    lone = None
    if degenerate:
        lone = (
            "I_N unavailable from ngspice: voltage-defined branches (V, E, H or ideal shorts) join the "
            "port's nodes, so shorting the port would close a loop of them and that run cannot be made"
        )
        notes.append(lone)
    point = op.point(lone)
    notes += op.notes
    reading = check_reading(engine, view, port, [[0.0]] if requested else [], requested, {0.0: point.vth})
    return SpiceResult(
        points=tuple(point for _ in requested),
        ngspice_version=engine.version,
        strategy=op.strategy,
        elapsed_s=time.perf_counter() - started,
        notes=tuple(
            dict.fromkeys(["ngspice's operating point (.op): the sources' DC values are the excitation", *notes])
        ),
        decks=tuple(op.decks),
        reading=reading,
    )


class _OperatingPoint:
    """The ``.op`` runs of one case: combined first, then each run alone; the values by run."""

    def __init__(self, engine: DcEngine, network: Network, port: Port):
        self.engine, self.network, self.port = engine, network, port
        self.values: dict[str, complex | None] = {}
        self.reasons: dict[str, str] = {}
        self.notes: list[str] = []
        self.decks: list[str] = []
        self.strategy = "combined"

    def solve(self, runs: tuple[Run, ...]) -> None:
        klu = bool(getattr(self.engine, "klu", False))
        if len(runs) > 1 and len(self.network.elements) <= COMBINED_LIMIT_ELEMENTS:
            try:
                tell_progress(f"{' + '.join(runs)} (operating point)")
                self._read(self._run(build_op_deck(self.network, self.port, runs, klu=klu)))
                return
            except CrosscheckError as exc:
                self.notes.append(f"the combined operating point failed ({_said(exc)}); the runs were repeated alone")
        self.strategy = "separate"
        for run in runs:
            tell_progress(f"{run} (operating point)")
            deck = build_op_deck(self.network, self.port, (run,), klu=klu)
            try:
                self._read(self._run(deck))
            except CrosscheckError as exc:
                if not getattr(exc, "singular", False):
                    raise _engine_error(exc, run) from None
                self.values[run] = None
                self.reasons[run] = f"{_QUANTITY[run]} unavailable at 0 Hz: {self._why(run)} (ngspice: {_said(exc)})"

    def _why(self, run: str) -> str:
        if run == "short" and self.values.get("open") is not None:
            return "shorting the port makes the network singular: Z_th = 0 here, so there is no Norton form"
        return "no DC path: a node reached only through capacitors, or an inductor loop with a voltage source"

    def _run(self, deck: Deck) -> tuple[Deck, dict[str, dict[str, np.ndarray]]]:
        self.decks.append(deck.text)
        plots, said = self.engine.run(deck)
        self.notes += [f"ngspice: {n}" for n in said]
        return deck, plots

    def _read(self, ran: tuple[Deck, dict[str, dict[str, np.ndarray]]]) -> None:
        """Each run's probe from the operating-point plot (one row, no frequency vector)."""
        deck, plots = ran
        wanted = {v for p in deck.probes.values() for v in p.vectors}
        found = [v for v in plots.values() if "frequency" not in v and wanted <= set(v)]
        if len(found) != 1:
            raise ReferenceEngineError(
                f"ngspice's operating point gave {len(found)} plots holding {', '.join(sorted(wanted))} "
                f"(plots: {', '.join(plots) or 'none'}); expected one. The deck:\n{deck.text[:2000]}"
            )
        vectors = found[0]
        for run, probe in deck.probes.items():
            if probe.current is not None:
                value = vectors[probe.current][0]
            else:
                value = (vectors[probe.plus][0] if probe.plus else 0j) - (
                    vectors[probe.minus][0] if probe.minus else 0j
                )
            self.values[run] = complex(value)

    def point(self, lone: str | None) -> SpicePoint:
        """The point at 0 Hz; with no shorted run possible (``lone``), I_N is V_th / Z_th from the other two."""
        vth, isc, zth = (self.values.get(r) for r in ("open", "short", "test"))
        notes = [why for run in RUNS if (why := self.reasons.get(run))]
        derived = False
        if lone:
            notes.append(lone)
            if vth is not None and zth:
                derived, isc = True, vth / zth
                notes.append("I_N here is V_th / Z_th from ngspice's open-circuit and test runs")
        return SpicePoint(
            freq_hz=0.0,
            requested_hz=0.0,
            vth=vth,
            zth=zth,
            isc=isc,
            route_mismatch=None if derived else route_mismatch(vth, zth, isc),
            notes=tuple(notes),
        )


def _said(exc: Exception) -> str:
    lines: Sequence[str] = getattr(exc, "lines", ())
    return "; ".join(lines[-3:]) if lines else str(exc)


def _engine_error(exc: Exception, run: str) -> ReferenceEngineError:
    lines: Sequence[str] = getattr(exc, "lines", ())
    said = "\n".join(f"  {line}" for line in lines) or "  (ngspice printed nothing)"
    err = ReferenceEngineError(
        f"ngspice could not find the operating point for the {run} run: {exc}. ngspice said:\n{said}\n"
        "The deck is attached to this error (.deck); run it with ngspice -b to see the whole output, "
        "and report it if the network is valid."
    )
    err.deck = getattr(exc, "deck", "")  # type: ignore[attr-defined]
    return err
