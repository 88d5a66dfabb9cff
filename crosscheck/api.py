"""What a notebook or script needs in one place: reduce a netlist at a port, run case files, get a DataFrame.

Each call runs the same pipeline as the command line (reader, own route, ngspice in isolated workers,
judgement) and returns the immutable ``CaseResult`` every report is written from.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from os import PathLike
from pathlib import Path
from typing import TYPE_CHECKING

from crosscheck.errors import CrosscheckError
from crosscheck.judge.result import CaseResult
from crosscheck.model.cases import Case, load_case
from crosscheck.model.netlist import read_netlist_text
from crosscheck.model.tolerance import SOLVER_VS_SPICE, Tolerance
from crosscheck.own.equivalent import Equivalent
from crosscheck.run.check import ENGINES, case_from_netlist, held_strictly, run_cases
from crosscheck.spice.engine import SpicePoint
from crosscheck.spice.workers import SpicePool

if TYPE_CHECKING:  # pandas is loaded only when a frame is asked for
    import pandas as pd


def reduce_netlist(
    netlist: str | PathLike[str],
    port: tuple[str, str],
    freqs: Iterable[float],
    *,
    engine: str = "both",
    tolerance: Tolerance = SOLVER_VS_SPICE,
    sources: str = "peak",
    allow_negative: bool = False,
    accept_warnings: Iterable[str] = (),
    strict: bool = False,
    excitation: str = "ac",
) -> CaseResult:
    """Equivalents of one netlist at ``port`` and ``freqs`` (Hz), compared with ngspice unless ``engine="own"``.

    ``netlist`` is the netlist's text when it is a ``str``, and a file when it is a path (``pathlib.Path``).
    The result's ``own`` holds the equivalents point by point; ``verdict`` says how the routes agreed.
    ngspice's own answers are in ``spice``; ``spice_equivalents(result)`` gives them as equivalents.
    What reading said is in ``read_notes`` and ``warnings`` (``open_warnings``: those not in ``accept_warnings``);
    ``strict=True`` makes an open warning an ``error``, as ``--strict`` does.
    ``excitation="dc"``: the sources' DC values drive the network, at 0 Hz only (``freqs`` empty or all 0;
    ngspice's route uses its operating point); a frequency other than 0 raises ``ValueError``.
    """
    if isinstance(netlist, str):
        name, text = "<string>", netlist
    else:
        name, text = str(netlist), read_netlist_text(netlist)
    case = case_from_netlist(name, text, port, freqs, tolerance, allow_negative, sources, accept_warnings, excitation)
    result = run_case_objects([case], engine=engine)[0]
    return held_strictly(result) if strict else result


def run_case_files(
    paths: Iterable[str | PathLike[str]], *, engine: str = "both", workers: int | None = None, strict: bool = False
) -> list[CaseResult]:
    """Run case files (TOML); a file that cannot be read becomes an ``error`` result and the rest go on.
    ``strict=True``: a reading warning its case file does not acknowledge makes the case an ``error``."""
    items: list[Case | tuple[str, CrosscheckError]] = []
    for path in paths:
        try:
            items.append(load_case(Path(path)))
        except CrosscheckError as exc:
            items.append((str(path), exc))
    results = run_case_objects(items, engine=engine, workers=workers)
    return [held_strictly(r) for r in results] if strict else results


def run_case_objects(
    items: Sequence[Case | tuple[str, CrosscheckError]], *, engine: str = "both", workers: int | None = None
) -> list[CaseResult]:
    """Cases already read, through the chosen routes (``own``, ``spice`` or ``both``)."""
    if engine not in ENGINES:
        raise ValueError(f"engine must be one of {', '.join(ENGINES)} (got {engine!r})")
    if engine == "own":
        return run_cases(items, engine="own")
    with SpicePool(workers=workers) as pool:
        return run_cases(items, engine=engine, pool=pool)


def spice_equivalents(result: CaseResult) -> tuple[Equivalent, ...] | None:
    """ngspice's answers of a result as equivalents (what ``engine="spice"`` shows), None when ngspice gave none.

    ngspice reports no matrix condition, so ``condition`` is NaN; Y_N is 1/Z_th where Z_th is finite
    and not 0; a point's notes say why a quantity is missing.
    """
    if result.spice is None:
        return None
    return tuple(_spice_equivalent(p) for p in result.spice.points)


def _spice_equivalent(point: SpicePoint) -> Equivalent:
    zth = point.zth
    yn = 1 / zth if zth is not None and zth != 0 and abs(zth) < float("inf") else None
    return Equivalent(point.requested_hz, point.vth, zth, point.isc, yn, float("nan"), "; ".join(point.notes))


def results_frame(results: Sequence[CaseResult]) -> pd.DataFrame:
    """One row per case, check, frequency and quantity (the CSV report's columns) as a pandas DataFrame."""
    from crosscheck.report.frame import verdict_frame  # start-up time: pandas loads only when a frame is asked for

    return verdict_frame(results)
