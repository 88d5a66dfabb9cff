"""The independent reference: the equivalent as ngspice computes it, through PySpice.

This is the only module that imports PySpice, and only inside functions, so
``import crosscheck`` works where ngspice is not installed. Everything that
leaves it is plain data: ``complex`` values, tuples, strings, our own errors.

Three runs give the equivalent (see ``deck``): open circuit (V_th),
short circuit (I_N) and a 1 A test current with the independent sources
zeroed (Z_th). Two of them determine the third, so ``route_mismatch`` reports
how far V_th/Z_th is from I_N: an independent consistency check on ngspice.

Error detection is ours, not PySpice's: PySpice treats every ``Note:`` on
stderr as fatal yet misses a plot with no rows, and ngspice returns 0 even
when it fails. We capture every line ngspice prints and check that each plot
exists with one row per requested frequency.

The engine functions here are meant to run inside an isolated worker
(``crosscheck.spice.workers``): ngspice is one engine per process, executes a
``.spiceinit`` found in its working directory, and can crash or hang.
"""

from __future__ import annotations

import bisect
import logging
import time
from collections.abc import Callable, Iterable, Sequence
from typing import Literal

import numpy as np

from crosscheck.errors import CrosscheckError, EngineUnavailableError, ReferenceEngineError
from crosscheck.model.network import Network, Port
from crosscheck.model.validation import validate
from crosscheck.spice.dc import solve_dc
from crosscheck.spice.deck import RUNS, Deck, Run, build_combined_deck, build_deck, check_freqs, port_is_voltage_defined
from crosscheck.spice.library import (
    INSTALL_COMMAND,
    library_has_klu,
    library_path,
    solver_text,
    version_text,
)
from crosscheck.spice.library import (
    ngspice_available as ngspice_available,  # re-exported: callers ask the engine module whether ngspice is there
)
from crosscheck.spice.progress import COMBINED_LIMIT_ELEMENTS, tell_progress
from crosscheck.spice.progress import report_progress_to as report_progress_to  # re-exported for the worker
from crosscheck.spice.reading import VECTOR_NAME, ReadingDeck, check_reading
from crosscheck.spice.results import SpicePoint, SpiceResult, route_mismatch
from crosscheck.vocabulary import same_frequency

Strategy = Literal["combined", "separate"]
#: One combined deck per case costs ngspice about half the time of separate runs on small and medium networks
#: and the same on large ones. Both give the same numbers (to ~1e-15); a combined run that fails is
#: repeated as separate runs, so the choice never changes an answer.
DEFAULT_STRATEGY: Strategy = "combined"

#: Words in an ngspice stderr line that mean the run did not do what was asked.
_FAILURE_WORDS = ("error", "not parsed", "singular", "abort", "unknown", "can't find", "cannot", "fatal")


# --------------------------------------------------------------------------- the engine adapter


class _RunFailed(CrosscheckError, RuntimeError):
    """One deck did not give its plots; ``lines`` are ngspice's own words."""

    def __init__(self, summary: str, lines: Sequence[str], deck: str):
        self.lines = tuple(lines)
        self.deck = deck
        self.singular = any("singular" in line.lower() for line in lines)
        super().__init__(summary)


_ENGINE_CLASS = None


def _engine_class():
    """A PySpice ``NgSpiceShared`` that keeps every line ngspice prints (defined on first use)."""
    global _ENGINE_CLASS
    if _ENGINE_CLASS is None:
        try:
            from PySpice.Spice.NgSpice.Shared import NgSpiceShared
        except ImportError as exc:
            raise EngineUnavailableError(
                f"PySpice cannot be imported ({exc}); install it with: pip install 'PySpice>=1.5', "
                f"and ngspice's library with: {INSTALL_COMMAND}"
            ) from None

        class _CapturingNgSpice(NgSpiceShared):
            def __init__(self, *args, **kwargs):
                self.lines: list[tuple[str, str]] = []
                super().__init__(*args, **kwargs)

            def send_char(self, message, ngspice_id):
                stream, _, text = message.partition(" ")
                self.lines.append((stream, text.rstrip("\r\n")))
                return 0

        _ENGINE_CLASS = _CapturingNgSpice
    return _ENGINE_CLASS


class Engine:
    """One ngspice instance in this process. Not thread-safe: ngspice is one engine per process."""

    def __init__(self, library: str | None = None):
        # PySpice logs every stderr line as an error and an "Unsupported Ngspice version" warning;
        # we read the lines ourselves.
        logging.getLogger("PySpice").setLevel(logging.CRITICAL + 1)
        cls = _engine_class()
        path = library_path(library)
        cls.LIBRARY_PATH = path
        try:
            self._ng = cls.new_instance()
        except OSError as exc:
            raise EngineUnavailableError(
                f"ngspice's shared library {path!r} could not be started ({exc}); install it with: {INSTALL_COMMAND}"
            ) from None
        banner = [text for _, text in self._ng.lines]
        self._ng.lines.clear()
        #: The library has ngspice's KLU solver (``library_has_klu``); decks then ask for it (``deck_options``).
        self.klu = library_has_klu(path)
        self.version = f"{version_text(banner, self._ng.ngspice_version)}; {solver_text(self.klu)}"
        self.last_lines: tuple[str, ...] = ()  # every line ngspice printed in the last good run
        self.broken = False  # ngspice said it cannot recover from a deck: its worker must retire

    def _command(self, command: str) -> None:
        from PySpice.Spice.NgSpice.Shared import NgSpiceCommandError

        try:
            self._ng.exec_command(command)
        except NgSpiceCommandError:
            pass  # PySpice's guess; the captured lines are judged by the caller

    def run(
        self, deck: Deck | ReadingDeck, while_loaded: Callable[[dict[str, dict[str, np.ndarray]]], None] | None = None
    ) -> tuple[dict[str, dict[str, np.ndarray]], tuple[str, ...]]:
        """Load and run ``deck``; its plots (vectors as complex128 arrays) and the stderr lines that were not fatal.

        ``while_loaded(plots)`` is called after a good run, with the circuit still loaded (``reading``).
        """
        from PySpice.Spice.NgSpice.Shared import NgSpiceCircuitError

        ng = self._ng
        if [p for p in ng.plot_names if p != "const"]:
            self._command("destroy all")
        ng.lines.clear()
        try:
            try:
                ng.load_circuit(deck.text)
            except (NgSpiceCircuitError, NameError):  # NameError: PySpice's word for a refused deck
                self.broken = self.broken or any("cannot recover" in text for _, text in ng.lines)
            errors = _failures(ng.lines)
            if errors:
                raise _RunFailed("ngspice did not accept the deck", errors, deck.text)
            self._command("run")
            errors = _failures(ng.lines)
            plots = {}
            for name in ng.plot_names:
                if name == "const":
                    continue
                plot = ng.plot(None, name)
                plots[name] = {key.lower(): np.asarray(vec._data, dtype=np.complex128) for key, vec in plot.items()}
            if errors:
                raise _RunFailed("ngspice stopped the analysis", errors, deck.text)
            notes = tuple(text for stream, text in ng.lines if stream == "stderr" and text.strip())
            self.last_lines = tuple(text for _, text in ng.lines)
            if while_loaded is not None:
                while_loaded(plots)
            return plots, notes
        finally:
            self._command("remcirc")
            self._command("destroy all")

    def instance_parameter(self, name: str, parameter: str) -> float | None:
        """The loaded circuit's ``@name[parameter]`` by the vector interface (no command; ``reading.VECTOR_NAME``)."""
        from PySpice.Spice.NgSpice.Shared import FFI

        if not VECTOR_NAME.match(name) or not parameter.isalnum():
            return None
        info = self._ng._ngspice_shared.ngGet_Vec_Info(f"@{name}[{parameter}]".encode("ascii"))
        if info == FFI.NULL or info.v_length < 1 or info.v_realdata == FFI.NULL:
            return None
        return float(info.v_realdata[0])


def _failures(lines: Sequence[tuple[str, str]]) -> list[str]:
    """ngspice's stderr lines when one reports a failure (all of them, for context), else [].

    ngspice prints some errors on stdout, so a stdout line that says "error" counts too.
    """
    err = [text.strip() for stream, text in lines if stream == "stderr" and text.strip()]
    err += [text.strip() for stream, text in lines if stream != "stderr" and "error" in text.lower()]
    if any(word in line.lower() for line in err for word in _FAILURE_WORDS):
        return err
    return []


# --------------------------------------------------------------------------- solving one case


def solve(
    engine: Engine, network: Network, port: Port, freqs: Iterable[float], strategy: Strategy = DEFAULT_STRATEGY
) -> SpiceResult:
    """The equivalent at ``freqs`` from ``engine``, in this process (workers call this; callers use a pool).

    Frequencies keep their order and repeats. 0 Hz is an AC analysis at ω = 0 (L short, C open, any
    source phase kept), run on its own so that a missing DC path costs only that point.
    """
    if network.excitation == "dc":  # the sources' DC values, by ngspice's operating point (``spice.dc``)
        return solve_dc(engine, network, port, freqs)
    validate(network, port)
    requested = check_freqs(freqs)
    if strategy not in ("combined", "separate"):
        raise ValueError(f"strategy must be 'combined' or 'separate' (got {strategy!r})")
    started = time.perf_counter()
    case = _Case(engine, network, port)
    notes: list[str] = []
    degenerate = port_is_voltage_defined(network, port)
    runs = tuple(r for r in RUNS if not (r == "short" and degenerate))
    if degenerate:
        notes.append(
            "I_N unavailable from ngspice: voltage-defined branches (V, E, H or ideal shorts) join the "
            "port's nodes, so shorting the port would close a loop of them and that run cannot be made "
            "(with V sources and shorts alone Z_th = 0 and there is no Norton form at all)"
        )
    # 0 Hz runs on its own: a node reached only through capacitors has no DC path, which makes the
    # 0 Hz matrix singular and would otherwise stop the whole sweep.
    groups = [g for g in (sorted({f for f in requested if f > 0}), [0.0] if 0.0 in requested else []) if g]
    used = set()
    if strategy == "combined" and len(network.elements) > COMBINED_LIMIT_ELEMENTS:
        strategy = "separate"
    for group in groups:
        used.add(case.solve_group(group, runs, strategy))
    points = [_point(case, f, notes[0] if degenerate else None) for f in requested]
    notes += case.notes
    model_vth = {f: (None if (v := case.values.get(("open", f))) is None else v[1]) for f in requested}
    reading = check_reading(engine, network, port, groups, requested, model_vth)
    return SpiceResult(
        points=tuple(points),
        ngspice_version=engine.version,
        strategy="combined" if used == {"combined"} else "separate",
        elapsed_s=time.perf_counter() - started,
        notes=tuple(dict.fromkeys(notes)),
        decks=tuple(case.decks),
        reading=reading,
    )


def _point(case: _Case, f: float, degenerate: str | None) -> SpicePoint:
    """The point at requested frequency ``f`` from the runs' values; ``degenerate`` is the no-short-run note.

    With no shorted run possible, I_N is V_th / Z_th from ngspice's own two other runs.
    """
    got = {run: case.values.get((run, f)) for run in RUNS}
    point_notes = [why for run in RUNS if (why := case.reasons.get((run, f)))]
    if degenerate:
        point_notes.append(degenerate)
    freq_hz = next((v[0] for v in got.values() if v is not None and v[0] is not None), f)
    vth, isc, zth = (None if (v := got[r]) is None else v[1] for r in ("open", "short", "test"))
    derived = False
    if degenerate and isc is None and vth is not None and zth:
        derived = True
        isc = vth / zth
        point_notes.append("I_N here is V_th / Z_th from ngspice's open-circuit and test runs")
    return SpicePoint(
        freq_hz=freq_hz,
        requested_hz=f,
        vth=vth,
        zth=zth,
        isc=isc,
        route_mismatch=None if derived else route_mismatch(vth, zth, isc),
        notes=tuple(point_notes),
    )


class _Case:
    """The runs of one case, with the fallbacks: combined -> separate -> one frequency at a time."""

    def __init__(self, engine: Engine, network: Network, port: Port):
        self.engine = engine
        self.klu = bool(getattr(engine, "klu", False))
        self.network = network
        self.port = port
        self.values: dict[tuple[str, float], tuple[float, complex] | None] = {}
        self.reasons: dict[tuple[str, float], str] = {}
        self.notes: list[str] = []
        self.decks: list[str] = []

    def solve_group(self, freqs: list[float], runs: tuple[Run, ...], strategy: Strategy) -> str:
        if strategy == "combined" and len(runs) > 1:
            deck = build_combined_deck(self.network, self.port, freqs, runs, klu=self.klu)
            try:
                self._read(deck, self._run(deck))
                return "combined"
            except _RunFailed as exc:
                self.notes.append(f"the combined run failed ({_short(exc)}); the runs were repeated separately")
        for run in runs:
            self._solve_run(run, freqs)
        return "separate"

    def _solve_run(self, run: str, freqs: list[float]) -> None:
        deck = build_deck(self.network, self.port, freqs, run, klu=self.klu)  # type: ignore[arg-type]
        try:
            self._read(deck, self._run(deck))
            return
        except _RunFailed as exc:
            if not exc.singular:
                raise _engine_error(exc, run, freqs) from None
            if len(freqs) == 1:
                self._unavailable(run, freqs[0], exc)
                return
        for f in freqs:  # find the frequencies at which the matrix is singular
            self._solve_run(run, [f])

    def _unavailable(self, run: str, f: float, exc: _RunFailed) -> None:
        quantity = {"open": "V_th", "short": "I_N", "test": "Z_th"}[run]
        if run == "short" and self.values.get(("open", f)) is not None:
            why = "shorting the port makes the network singular: Z_th = 0 here, so there is no Norton form"
        elif f == 0:
            why = "no DC path: a node reached only through capacitors, or an inductor loop with a voltage source"
        else:
            why = "the network is singular at this frequency (a resonance or a loop of ideal elements)"
        self.values[(run, f)] = None
        self.reasons[(run, f)] = f"{quantity} unavailable at {f!r} Hz: {why} (ngspice: {_short(exc)})"

    def _run(self, deck: Deck) -> dict[str, dict[str, np.ndarray]]:
        self.decks.append(deck.text)
        count = len(deck.freqs)
        tell_progress(f"{' + '.join(deck.runs)} at {count} frequenc{'y' if count == 1 else 'ies'}")
        plots, notes = self.engine.run(deck)
        self.notes += [f"ngspice: {n}" for n in notes]
        return plots

    def _read(self, deck: Deck, plots: dict[str, dict[str, np.ndarray]]) -> None:
        """Match each requested frequency to the row ngspice returned for it and read the probes."""
        rows: dict[float, tuple[dict[str, np.ndarray], int, float]] = {}
        wanted = deck.freqs  # sorted and distinct
        for name, vectors in plots.items():
            freq = vectors.get("frequency")
            if freq is None:
                continue
            missing = [v for p in deck.probes.values() for v in p.vectors if v not in vectors]
            if missing:
                raise _RunFailed(f"plot {name} lacks the vectors {', '.join(missing)}", [], deck.text)
            for row, got in enumerate(freq.real.tolist()):
                i = bisect.bisect_left(wanted, got)
                match = [f for f in wanted[max(i - 1, 0) : i + 1] if same_frequency(f, got)]
                if len(match) != 1 or match[0] in rows:
                    raise _RunFailed(f"plot {name} has a row at {got!r} Hz that was not asked for once", [], deck.text)
                rows[match[0]] = (vectors, row, got)
        lost = [f for f in deck.freqs if f not in rows]
        if lost:
            raise _RunFailed(
                f"ngspice returned no row for {', '.join(map(repr, lost[:5]))} Hz"
                f"{' …' if len(lost) > 5 else ''} (plots: {', '.join(plots) or 'none'})",
                [],
                deck.text,
            )
        for run, probe in deck.probes.items():
            for f, (vectors, row, got) in rows.items():
                if probe.current is not None:
                    value = vectors[probe.current][row]
                else:
                    value = (vectors[probe.plus][row] if probe.plus else 0j) - (
                        vectors[probe.minus][row] if probe.minus else 0j
                    )
                self.values[(run, f)] = (got, complex(value))


def _short(exc: _RunFailed) -> str:
    return "; ".join(exc.lines[-3:]) if exc.lines else str(exc)


def _engine_error(exc: _RunFailed, run: str, freqs: Sequence[float]) -> ReferenceEngineError:
    said = "\n".join(f"  {line}" for line in exc.lines) or "  (ngspice printed nothing)"
    span = f"{freqs[0]!r} Hz" if len(freqs) == 1 else f"{len(freqs)} frequencies from {freqs[0]!r} to {freqs[-1]!r} Hz"
    err = ReferenceEngineError(
        f"ngspice could not do the {run} run at {span}: {exc}. ngspice said:\n{said}\n"
        "The deck is attached to this error (.deck); run it with ngspice -b to see the whole output, "
        "and report it if the network is valid."
    )
    err.ngspice_lines = exc.lines  # type: ignore[attr-defined]
    err.deck = exc.deck  # type: ignore[attr-defined]
    return err
