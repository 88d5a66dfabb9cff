"""How much time and memory one case may use: the ``Budget`` both routes are held to.

The ngspice route enforces it from outside (its worker processes get ``RLIMIT_AS`` and a wall-clock
limit, ``spice.workers``); the own route runs in the caller's process, so it checks the budget itself,
cooperatively (``own.equivalent.thevenin(..., budget=)``): before assembly it estimates the memory the
sweep will need (``sweep_bytes``, the rule is stated there) and refuses a case over ``memory_bytes``
before allocating anything large; during the sweep it checks the deadline between runs of frequencies.

The defaults are defined here once (60 s of wall-clock time, 2 GiB of memory per case) and the ngspice
workers use the same. A limit is never the reason a real network cannot run: the command line's
``--timeout`` and ``--memory`` raise it, and every refusal names the flag.

Limits that grow with the network (``scaled_time_s``, ``scaled_memory_bytes``, ``Budget.for_elements``):
a limit left at its default becomes max(default, rule(elements)); a limit given any other value
(``--timeout``, ``--memory``, ``Budget(...)``) is used as given. The rule follows ngspice, the slower
route, whose Sparse 1.3 solver (the packaged library has no KLU) spends nearly all of a large run
ordering the matrix. Measured, one case at 0 Hz, three separate runs, on this 2-core machine shared with
other work (``fuzz.large.powergrid``; ngspice's peak RSS in brackets):

* rails and straps: 1,537 elements 0.03 s, 4,823: 0.09 s, 15,900: 0.73 s, 48,034: 9.0 s (204 MiB);
* both layers full meshes (the hardest for ngspice's ordering): 2,127 elements 0.17 s, 6,793: 1.6 s,
  22,741: 17.9 s (146 MiB), 67,515: 503 s (339 MiB) -- growing as elements^3.

The time rule is the worst of these, doubled: ``TIME_UNIT_S`` * (elements / ``TIME_UNIT_ELEMENTS``)^3 =
60 s * (elements / 26,000)^3 (60 s up to 26,000 elements, 1,050 s at 67,500, 14,000 s at 160,000). The
memory rule, 16 KiB per element over the 2 GiB floor, is many times the peak RSS measured.
"""

from __future__ import annotations

import math
import re
import time
from collections.abc import Callable
from dataclasses import dataclass

from crosscheck.errors import CrosscheckError

#: Wall-clock seconds one case may take by default (each route, per case).
DEFAULT_TIME_S = 60.0
#: Bytes of memory one case may use by default (2 GiB).
DEFAULT_MEMORY_BYTES = 2 << 30

#: The size-scaled time limit: TIME_UNIT_S seconds * (elements / TIME_UNIT_ELEMENTS) ** TIME_EXPONENT.
TIME_UNIT_S = 60.0
TIME_UNIT_ELEMENTS = 26_000
TIME_EXPONENT = 3
#: The size-scaled memory limit: MEMORY_PER_ELEMENT bytes per element over the default's floor.
MEMORY_PER_ELEMENT = 16 << 10


def scaled_time_s(elements: int) -> float:
    """The default wall-clock limit for a network of ``elements`` elements: max(60 s, 60 s * (elements/26,000)^3)."""
    return max(DEFAULT_TIME_S, TIME_UNIT_S * (elements / TIME_UNIT_ELEMENTS) ** TIME_EXPONENT)


def scaled_memory_bytes(elements: int) -> int:
    """The default memory limit for ``elements`` elements: max(2 GiB, 16 KiB per element)."""
    return max(DEFAULT_MEMORY_BYTES, MEMORY_PER_ELEMENT * elements)


def limits_rule() -> str:
    """The size rule in words, for messages and the README."""
    return (
        f"default limits grow with the network: max({DEFAULT_TIME_S:g} s, {TIME_UNIT_S:g} s x "
        f"(elements / {TIME_UNIT_ELEMENTS:,})^{TIME_EXPONENT}) and max({describe_memory(DEFAULT_MEMORY_BYTES)}, "
        f"{MEMORY_PER_ELEMENT >> 10} KiB per element)"
    )


#: Upper bound on the stored matrix entries one element writes (an E or H source's branch row and incidence).
ENTRIES_PER_ELEMENT = 8
#: Fill of the sparse LU, as a multiple of the matrix's entries, assumed by the memory estimate.
LU_FILL = 10
#: Bytes per LU entry: a complex value (16), its row index, and KLU's per-column bookkeeping, rounded up.
LU_ENTRY_BYTES = 32
#: Bytes per matrix entry while assembling and sweeping: the COO triples (two int64 indices, two floats),
#: the summed complex CSC matrix, A0 and A1 and the per-frequency values buffer and sizes, rounded up.
ASSEMBLY_ENTRY_BYTES = 96
#: Complex entries in one batch of the dense path (frequencies x n x n), which the solver never exceeds.
DENSE_BATCH_ENTRIES = 1 << 20


class BudgetSettingError(CrosscheckError, ValueError):
    """A time or memory limit that is not a usable limit (a usage error: fix the flag)."""


class BudgetExceededError(CrosscheckError):
    """The own route stopped (or refused to start) a case because of its budget; the message names the flag."""


class MemoryBudgetError(BudgetExceededError, MemoryError):
    """The own route's estimate of a sweep's memory is over ``Budget.memory_bytes``."""


class TimeBudgetError(BudgetExceededError, TimeoutError):
    """The own route's sweep ran past ``Budget.time_s``."""


def describe_memory(n: float | None) -> str:
    """A number of bytes in words ("2 GiB", "512 MiB"), or "no limit"."""
    if n is None:
        return "no limit"
    for unit, size in (("TiB", 2**40), ("GiB", 2**30), ("MiB", 2**20), ("KiB", 2**10)):
        if n >= size:
            return f"{n / size:.3g} {unit}"
    return f"{int(n)} bytes"


_MEMORY_TEXT = re.compile(r"\s*(\d+(?:\.\d+)?)\s*([kmgt]?)(?:i?b)?\s*", re.IGNORECASE)


def parse_memory(text: str) -> int:
    """``--memory`` text as bytes: a number with an optional binary suffix K, M, G or T ("4G", "512M", "4GiB")."""
    match = _MEMORY_TEXT.fullmatch(text)
    if match is None:
        raise BudgetSettingError(
            f"--memory {text!r} is not an amount of memory; give a number of bytes with K, M, G or T, e.g. --memory 4G"
        )
    scale = 1024 ** "kmgt".find(match.group(2).lower()) * 1024 if match.group(2) else 1
    memory_bytes = int(float(match.group(1)) * scale)
    _checked_memory(memory_bytes)
    return memory_bytes


def _checked_memory(memory_bytes: int | None) -> int | None:
    if memory_bytes is None:
        return None
    if isinstance(memory_bytes, bool) or not isinstance(memory_bytes, int) or memory_bytes < 1 << 20:
        raise BudgetSettingError(
            f"--memory {memory_bytes!r} is not a usable memory limit; give at least 1 MiB, e.g. --memory 4G"
        )
    return memory_bytes


@dataclass(frozen=True)
class Budget:
    """Wall-clock seconds and bytes of memory one case may use; None: no limit of that kind.

    ``time_s`` must be a finite number of seconds above 0: ``--timeout inf`` (or nan) is refused as a
    usage error rather than read as "no limit". In a run that gates a pull request the wall-clock limit
    is what stops a hanging ngspice worker; a run without it would hang the CI job until CI's own limit
    kills it, and every result with it. Any finite limit can be set, so refusing infinity never keeps a
    real network from running; a program that wants no limit on the own route passes ``time_s=None``.
    """

    time_s: float | None = DEFAULT_TIME_S
    memory_bytes: int | None = DEFAULT_MEMORY_BYTES

    def __post_init__(self) -> None:
        if self.time_s is not None:
            t = self.time_s
            if isinstance(t, bool) or not isinstance(t, int | float) or not math.isfinite(t) or t <= 0:
                raise BudgetSettingError(
                    f"--timeout {t!r} is not a usable time limit; give a finite number of seconds above 0, "
                    "e.g. --timeout 3600 (an unlimited run would let one hanging case stall the whole run)"
                )
            object.__setattr__(self, "time_s", float(t))
        _checked_memory(self.memory_bytes)

    def for_elements(self, elements: int) -> Budget:
        """This budget for a network of ``elements`` elements: a limit left at its default grows by the size
        rule (``scaled_time_s``, ``scaled_memory_bytes``); a limit set to anything else stays as set."""
        time_s = scaled_time_s(elements) if self.time_s == DEFAULT_TIME_S else self.time_s
        memory = scaled_memory_bytes(elements) if self.memory_bytes == DEFAULT_MEMORY_BYTES else self.memory_bytes
        return Budget(time_s, memory)

    def deadline(self) -> Deadline:
        """A deadline ``time_s`` from now (never, with no time limit)."""
        return Deadline(None if self.time_s is None else time.monotonic() + self.time_s, self.time_s)

    def check_memory(self, estimate: int, what: Callable[[], str]) -> None:
        """Refuse the work when ``estimate`` bytes are over ``memory_bytes``; ``what()`` puts the work in words
        (called only then: formatting it costs more than the check)."""
        if self.memory_bytes is not None and estimate > self.memory_bytes:
            raise MemoryBudgetError(
                f"the own solver would need about {describe_memory(estimate)} for {what()}, over the memory limit of "
                f"{describe_memory(self.memory_bytes)}; raise the limit with --memory (e.g. --memory "
                f"{math.ceil(estimate / 2**30)}G) if the machine has it, or give fewer frequencies"
            )


@dataclass(frozen=True)
class Deadline:
    """When the current case must be finished (``monotonic`` seconds; None: never).

    ``offset`` and ``total`` place a run of frequencies in its whole sweep, for the message only.
    """

    at: float | None
    time_s: float | None = None
    offset: int = 0
    total: int | None = None

    def within(self, offset: int, total: int) -> Deadline:
        """The same deadline for a run that starts at frequency ``offset`` of a sweep of ``total``."""
        return Deadline(self.at, self.time_s, offset, total)

    def check(self, done: int, total: int) -> None:
        """Raise ``TimeBudgetError`` if the deadline has passed; ``done`` of ``total`` frequencies are finished."""
        if self.at is not None and time.monotonic() > self.at:
            raise TimeBudgetError(
                f"the own solver did not finish this case within {self.time_s:g} s of wall-clock time "
                f"(stopped at frequency {self.offset + done + 1} of {self.total or total}); raise the limit with "
                "--timeout if the network is genuinely that large, or give fewer frequencies"
            )


#: A deadline that never passes (no budget).
NO_DEADLINE = Deadline(None)


def sweep_bytes(unknowns: int, nonzeros: int, frequencies: int, rhs: int, *, dense: bool, threads: int = 1) -> int:
    """A conservative estimate of the peak memory of one own-route sweep, in bytes.

    The rule (n unknowns, z stored matrix entries, F frequencies, k right-hand sides):

    * solutions: 16·F·n·k bytes, twice (each run's array and their concatenation), plus 8·F·n·k for the
      per-column magnitudes the equivalents are scaled by;
    * the matrix: ``ASSEMBLY_ENTRY_BYTES`` per entry (assembly's triples and the matrices made from them);
    * the sparse path: ``LU_FILL``·z LU entries of ``LU_ENTRY_BYTES`` each, two factors alive at once
      (the kept one and a fresh one when pivoting again), per sweep thread, and n·(k + 6) complex work
      vectors per thread;
    * the dense path (n at most ``solver.DENSE_LIMIT``): four copies of one batch of at most
      ``DENSE_BATCH_ENTRIES`` complex entries (the matrices, the condition's and the solve's copies, the
      right-hand sides broadcast).

    ``LU_FILL`` = 10 is several times the fill KLU's ordering gives on ladder, grid and random networks
    (2-4x), so the estimate errs on the high side: it refuses early rather than let a sweep run the
    process out of memory; ``--memory`` raises the limit when the machine has it. Measured against the
    peak memory growth of real sweeps it is 1.3-2.8x too high (ladders of 20 to 20,000 nodes and a
    1,000-node grid, 200 to 9,601 frequencies).
    """
    n, z, f, k = unknowns, nonzeros, frequencies, rhs
    total = 2 * 16 * f * n * k + 8 * f * n * k + ASSEMBLY_ENTRY_BYTES * z
    if dense:
        batch = min(f * n * n, max(DENSE_BATCH_ENTRIES, n * n))
        total += 4 * 16 * batch
    else:
        total += threads * (2 * LU_FILL * z * LU_ENTRY_BYTES + 16 * n * (k + 6))
    return total
