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
from crosscheck.run.check import ENGINES, case_from_netlist, run_cases
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
) -> CaseResult:
    """Equivalents of one netlist at ``port`` and ``freqs`` (Hz), compared with ngspice unless ``engine="own"``.

    ``netlist`` is the netlist's text when it is a ``str``, and a file when it is a path (``pathlib.Path``).
    The result's ``own`` holds the equivalents point by point; ``verdict`` says how the routes agreed.
    """
    if isinstance(netlist, str):
        name, text = "<string>", netlist
    else:
        name, text = str(netlist), read_netlist_text(netlist)
    case = case_from_netlist(name, text, port, freqs, tolerance, allow_negative, sources)
    return run_case_objects([case], engine=engine)[0]


def run_case_files(
    paths: Iterable[str | PathLike[str]], *, engine: str = "both", workers: int | None = None
) -> list[CaseResult]:
    """Run case files (TOML); a file that cannot be read becomes an ``error`` result and the rest go on."""
    items: list[Case | tuple[str, CrosscheckError]] = []
    for path in paths:
        try:
            items.append(load_case(Path(path)))
        except CrosscheckError as exc:
            items.append((str(path), exc))
    return run_case_objects(items, engine=engine, workers=workers)


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


def results_frame(results: Sequence[CaseResult]) -> pd.DataFrame:
    """One row per case, check, frequency and quantity (the CSV report's columns) as a pandas DataFrame."""
    from crosscheck.report.frame import verdict_frame  # start-up time: pandas loads only when a frame is asked for

    return verdict_frame(results)
