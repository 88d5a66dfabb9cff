"""The multi-port reference: ngspice's open-circuit, test-current and short-circuit runs assembled into
voc, Z, isc and Y (conventions in ``model.port_matrices``).

N + 2 runs per frequency group, each a copy of the network written from the model under our own names
(``deck.copy_names``, ``deck.element_cards``; no user text reaches ngspice):

* ``open``: the network as it is; voc[k] = V(a_k) - V(b_k);
* ``test<k>``: independent sources zeroed (dependent ones stay), 1 A into a_k and out of b_k; column k of Z;
* ``short``: every port shorted by a 0 V source ``VPORT..`` (a_k to b_k); isc[k] is its current, which SPICE
  counts entering the + terminal, i.e. flowing out of the network at a_k through the short: the sign of
  ``isc``. Where the shorts would close a loop of voltage-defined branches (an ideal source across a port, two
  ports joined by a voltage source) the run cannot be made; isc is then inv(Z)·voc from the other runs, where
  Z is nonsingular, and the point says so.

Y is inv(Z) of ngspice's Z. The runs share one deck (copies joined only at ground) while the copies stay
under the combined-deck size limit (``progress.COMBINED_LIMIT_ELEMENTS``), else one deck each; 0 Hz runs on
its own, as in ``engine.solve``, so that a missing DC path costs only that point. This runs inside a worker
of the sandboxed pool (``workers.SpicePool.submit_multiport``).
"""

from __future__ import annotations

import math
import time
from collections.abc import Iterable, Sequence
from dataclasses import dataclass

import numpy as np

from crosscheck.errors import CrosscheckError, ReferenceEngineError
from crosscheck.model.graph import UnionFind
from crosscheck.model.network import GROUND, Element, Network, Port, check_excitation, dc_view
from crosscheck.model.port_matrices import MatrixPoint, floating_references
from crosscheck.model.port_spec import validating_port
from crosscheck.spice.deck import Deck, analysis_cards, check_freqs, copy_names, deck_options, element_cards
from crosscheck.spice.engine import Engine, Strategy
from crosscheck.spice.progress import COMBINED_LIMIT_ELEMENTS, tell_progress
from crosscheck.vocabulary import same_frequency

#: A singular value of ngspice's Z below this share of its largest is a rounding zero (no Norton form).
_SINGULAR_SHARE = 1e3 * float(np.finfo(float).eps)


@dataclass(frozen=True)
class MultiportSpiceResult:
    """What the reference route hands back for a multi-port case: one point per requested frequency."""

    points: tuple[MatrixPoint, ...]
    ngspice_version: str
    elapsed_s: float
    notes: tuple[str, ...] = ()
    decks: tuple[str, ...] = ()
    strategy: str = "combined"  # "combined" when every run shared its deck, else "separate"


def shorts_close_a_loop(network: Network, ports: Sequence[Port]) -> bool:
    """True when shorting every port closes a loop of voltage-defined branches (V, E, H, ideal shorts)."""
    uf = UnionFind()
    for e in network.elements:
        if e.kind in "VEH" or e.is_short:
            uf.union(*e.terminals)
    for p in ports:
        if uf.find(p.a) == uf.find(p.b):
            return True
        uf.union(p.a, p.b)
    return False


def _copy(
    network: Network, ports: Sequence[Port], run: str, copy: int, references: Sequence[str]
) -> tuple[list[str], list[str]]:
    """One copy's cards and the vectors to read: port node pairs (open, test runs) or short currents."""
    nodes = network.nodes
    node_of, element_of, _ = copy_names(network, nodes, None, copy * len(nodes), copy * len(network.elements))
    for r in references:  # a floating port's reference node is ground, as the own route refers it
        node_of[r] = GROUND
    zeroed = run.startswith("test")

    def source(e: Element) -> str:
        return "DC 0 AC 0.0 0.0" if e.is_short or zeroed else f"DC 0 AC {e.ac_mag!r} {e.ac_phase_deg!r}"

    lines = element_cards(network, node_of, element_of, source)
    vectors: list[str] = []
    for k, p in enumerate(ports):
        a, b = node_of[p.a], node_of[p.b]
        if run == "short":
            lines.append(f"VPORT{copy}X{k} {a} {b} DC 0 AC 0.0 0.0")
            vectors.append(f"vport{copy}x{k}#branch")
        else:
            vectors += [a, b]
    if zeroed:
        k = int(run[4:])
        a, b = node_of[ports[k].a], node_of[ports[k].b]
        lines.append(f"ITEST{copy} {b} {a} DC 0 AC 1.0 0.0")  # SPICE: from n+ through the source to n-
    return lines, vectors


def multiport_deck(
    network: Network, ports: Sequence[Port], freqs: Sequence[float], runs: Sequence[str], *, klu: bool = False
) -> tuple[Deck, dict[str, list[str]]]:
    """One deck holding a copy per run (copies share only ground), and each run's vectors to read."""
    cards = analysis_cards(freqs)
    references = floating_references(network, ports)
    lines = [f"crosscheck multi-port deck ({len(ports)} ports)", deck_options(klu=klu, sweep=len(set(freqs)) > 1)]
    wanted: dict[str, list[str]] = {}
    for copy, run in enumerate(runs):
        body, vectors = _copy(network, ports, run, copy, references)
        lines += body
        wanted[run] = vectors
    saved = sorted({v for vs in wanted.values() for v in vs if v != GROUND})
    lines.append(".save " + " ".join(f"i({v[:-7]})" if v.endswith("#branch") else f"v({v})" for v in saved))
    lines += [*cards, ".end"]
    text = "\n".join(lines) + "\n"
    deck = Deck(text=text, runs=("open",), probes={}, freqs=tuple(sorted(set(freqs))), cards=cards, names={})
    return deck, wanted


def _rows(plots: dict[str, dict[str, np.ndarray]], freqs: Sequence[float]) -> dict[float, tuple[dict, int]]:
    """Each requested frequency's plot and row (ngspice may split the analysis into several plots)."""
    rows: dict[float, tuple[dict, int]] = {}
    for vectors in plots.values():
        freq = vectors.get("frequency")
        if freq is None:
            continue
        for row, got in enumerate(freq.real.tolist()):
            match = [f for f in freqs if same_frequency(f, got)]
            if len(match) == 1:
                rows[match[0]] = (vectors, row)
    return rows


def _read(vectors: dict, row: int, names: list[str], run: str) -> np.ndarray:
    def value(name: str) -> complex:
        return 0j if name == GROUND else complex(vectors[name][row])

    if run == "short":
        return np.array([value(v) for v in names], dtype=complex)
    return np.array([value(a) - value(b) for a, b in zip(names[::2], names[1::2], strict=True)], dtype=complex)


class _Runs:
    """The values of every run at every frequency, with the fallbacks: combined -> separate -> one frequency."""

    def __init__(self, engine: Engine, network: Network, ports: Sequence[Port]):
        self.engine, self.network, self.ports = engine, network, ports
        self.klu = bool(getattr(engine, "klu", False))
        self.values: dict[tuple[str, float], np.ndarray] = {}
        self.notes: list[str] = []
        self.decks: list[str] = []
        self.separate = False  # whether some run had a deck of its own

    def run(self, runs: Sequence[str], freqs: Sequence[float]) -> None:
        deck, wanted = multiport_deck(self.network, self.ports, freqs, runs, klu=self.klu)
        self.decks.append(deck.text)
        tell_progress(f"{len(runs)} multi-port runs at {len(freqs)} frequencies")
        plots, notes = self.engine.run(deck)
        self.notes += [f"ngspice: {n}" for n in notes]
        rows = _rows(plots, freqs)
        for f in freqs:
            if f not in rows:
                raise ReferenceEngineError(f"ngspice returned no row for {f!r} Hz in the multi-port runs")
            vectors, row = rows[f]
            for r in runs:
                self.values[(r, f)] = _read(vectors, row, wanted[r], r)

    def group(self, runs: Sequence[str], freqs: list[float], combined: bool) -> None:
        if combined:
            try:
                self.run(runs, freqs)
                return
            except CrosscheckError as exc:
                self.notes.append(
                    f"the combined multi-port run failed ({str(exc)[:200]}); the runs were repeated one by one"
                )
        self.separate = True
        for r in runs:
            self._separate(r, freqs)

    def _separate(self, r: str, freqs: list[float]) -> None:
        try:
            self.run([r], freqs)
        except CrosscheckError as exc:
            if len(freqs) == 1:
                self.notes.append(f"the {r} run is unavailable at {freqs[0]!r} Hz (ngspice: {str(exc)[:200]})")
                return
            for f in freqs:
                self._separate(r, [f])


def solve_multiport(
    engine: Engine, network: Network, ports: Sequence[Port], freqs: Iterable[float], strategy: Strategy = "combined"
) -> MultiportSpiceResult:
    """ngspice's multi-port forms at ``freqs`` (in a worker; callers use ``SpicePool.submit_multiport``)."""
    requested = check_freqs(freqs)
    dc = network.excitation == "dc"
    if dc:  # the sources' DC values as real phasors (``model.network.dc_view``), ngspice's AC analysis at 0 Hz
        check_excitation("dc", requested, "the multi-port reference")
        network = dc_view(network)
    validating_port(network, ports)
    started = time.perf_counter()
    loop = shorts_close_a_loop(network, ports)
    runs = ["open", *(f"test{k}" for k in range(len(ports))), *([] if loop else ["short"])]
    done = _Runs(engine, network, ports)
    if dc:
        done.notes.append("DC excitation: ngspice's AC analysis at 0 Hz with each source's DC value as its phasor")
    if loop:
        done.notes.append(
            "no short-circuit run: shorting every port would close a loop of voltage-defined branches (an ideal "
            "source across a port, or ports joined by a voltage source); isc is inv(Z)·voc where Z is nonsingular"
        )
    combined = strategy == "combined" and len(network.elements) <= COMBINED_LIMIT_ELEMENTS  # as engine.solve
    for group in (sorted({f for f in requested if f > 0}), [0.0] if 0.0 in requested else []):
        if group:
            done.group(runs, group, combined)
    points = tuple(_point(done.values, f, len(ports), loop) for f in requested)
    return MultiportSpiceResult(
        points,
        engine.version,
        time.perf_counter() - started,
        tuple(dict.fromkeys(done.notes)),
        tuple(done.decks),
        "separate" if done.separate else "combined",
    )


def _point(values: dict[tuple[str, float], np.ndarray], f: float, n: int, loop: bool) -> MatrixPoint:
    """The point at ``f`` from the runs that gave values there."""
    nan = np.full(n, complex(math.nan, math.nan))
    voc = values.get(("open", f), nan)
    columns = [values.get((f"test{k}", f)) for k in range(n)]
    notes: list[str] = []
    z = None if any(c is None for c in columns) else np.stack([c for c in columns if c is not None], axis=1)
    if z is None:
        notes.append(f"ngspice gave no Z at {f!r} Hz (a test run failed)")
    isc = values.get(("short", f))
    y = None
    if z is not None:
        s = np.linalg.svd(z, compute_uv=False)
        if s[-1] > _SINGULAR_SHARE * s[0]:
            y = np.linalg.inv(z)
            if isc is None and loop:
                isc = y @ voc
                notes.append("isc here is inv(Z)·voc from ngspice's open-circuit and test runs")
        else:
            notes.append("ngspice's Z is singular here: no Norton form")
            isc = None
    reciprocity = None
    if z is not None:
        norm = float(np.linalg.norm(z))
        reciprocity = 0.0 if norm == 0 else float(np.linalg.norm(z - z.T)) / norm
    return MatrixPoint(f, voc, z, isc, y, None, tuple(notes), None, reciprocity)
