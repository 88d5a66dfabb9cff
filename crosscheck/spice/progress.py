"""Shared by the AC and DC routes of the reference: when decks are combined, and the progress of a run.

``engine`` (AC) and ``dc`` (operating point) both read these; ``engine`` imports ``dc``, so they live here.
The progress words are fixed words of ours and counts, never text from the case.
"""

from __future__ import annotations

from collections.abc import Callable

__all__ = ["COMBINED_LIMIT_ELEMENTS", "report_progress_to", "tell_progress"]

#: Above this many elements the combined deck runs as separate decks: ngspice's ordering costs between
#: n^2 and n^3, so one matrix of three copies costs more than three matrices of one. Measured on the
#: power-grid family at 0 Hz (separate vs combined), rails and straps: 1,537 elements 0.03 vs 0.03 s,
#: 4,823: 0.09 vs 0.13 s, 15,900: 0.73 vs 1.11 s, 48,034: 9.0 vs 15.8 s; two full meshes: 2,127 elements
#: 0.17 vs 0.23 s, 6,793: 1.6 vs 3.0 s, 11,228: 8.1 vs 16.2 s, 22,741: 17.9 vs 38.0 s. One parse with
#: ``alter`` between the runs saves nothing: the second analysis of a loaded circuit orders its matrix
#: again (22,741-element mesh grid: open 18.6 s, then test after altering every source 17.3 s; the 2,537
#: ``alter`` commands took 0.02 s), and the short run needs another topology, hence its own deck anyway.
COMBINED_LIMIT_ELEMENTS = 1_000


#: Told which analysis ``solve`` starts ("open + short + test at 1 frequency"), for the terminal's progress
#: line. The worker sets it to a message to its parent (``sandbox``); None: nobody listens.
_progress_sink: Callable[[str], None] | None = None


def report_progress_to(sink: Callable[[str], None] | None) -> None:
    """Send the name of every analysis ``solve`` starts to ``sink`` (None: stop)."""
    global _progress_sink
    _progress_sink = sink


def tell_progress(stage: str) -> None:
    """Say which analysis starts now (our own words: "open at 1 frequency"), to whoever listens."""
    if _progress_sink is not None:
        _progress_sink(stage)
