"""What the ngspice pool says at the terminal: progress lines of long reference runs, and why a case was stopped.

Both put a user's text (a network's title) only through ``repr``, so a control character in it cannot act
on the terminal; every other word is ours.
"""

from __future__ import annotations

import math
import sys
import threading
from collections.abc import Callable
from typing import TextIO

from crosscheck.model.budget import limits_rule
from crosscheck.model.network import Network
from crosscheck.spice.sandbox import describe_bytes


def stopped_case_text(why: str, network: Network, time_s: float, cpu_s: float, memory_bytes: int | None) -> str:
    """The error of a case whose worker was stopped (``why``): its size, its limits and the size rule."""
    elements, nodes = len(network.elements), len(network.nodes)
    limits = f"this case's limits: {time_s:g} s wall clock, {cpu_s:g} s CPU, {describe_bytes(memory_bytes)} memory"
    return (
        f"{why}; the worker was stopped and replaced, and the other cases go on "
        f"(network {network.title!r}: {elements:,} elements, {nodes:,} nodes; {limits}; "
        f"{limits_rule()}, unless --timeout/--memory set them). ngspice's time grows between the square and "
        "the cube of the element count (ordering its matrix): if the network is this large, raise the limits "
        "with --timeout and --memory; if it is small, report the network."
    )


#: A reference run shows its progress once it has taken this long (seconds).
PROGRESS_AFTER_S = 2.0
#: ... and again every this many seconds while it stays in the same analysis.
PROGRESS_REPEAT_S = 10.0


def terminal_progress(stream: TextIO | None = None) -> Callable[[str, str, float], None] | None:
    """A ``SpicePool`` ``on_progress`` that prints a line for each reference run past ``PROGRESS_AFTER_S``,
    or None when ``stream`` (standard error by default, where the own route's progress bar goes) is not a
    terminal: a log or a pipe gets no progress lines.

    The line names the case's title, the analysis ngspice is running (open, short, test) and the elapsed
    time. The title is the user's, so it is printed through ``repr``: a control character in it cannot act
    on the terminal; the analysis names are the engine's own fixed words. Printed lines go above the
    command line's progress bar (rich redirects standard error while its bar is shown).
    """
    out = sys.stderr if stream is None else stream
    if not out.isatty():
        return None
    lock = threading.Lock()
    shown: dict[str, tuple[str, float]] = {}  # per case title: the stage and elapsed time last printed

    def show(title: str, stage: str, elapsed_s: float) -> None:
        if elapsed_s < PROGRESS_AFTER_S:
            return
        with lock:
            last_stage, last_s = shown.get(title, ("", -math.inf))
            if stage == last_stage and elapsed_s - last_s < PROGRESS_REPEAT_S and elapsed_s >= last_s:
                return  # a new stage at once, the same stage every PROGRESS_REPEAT_S
            shown[title] = (stage, elapsed_s)
            print(f"ngspice: case {title[:60]!r}: {stage}, {elapsed_s:.0f} s so far", file=out, flush=True)

    return show
