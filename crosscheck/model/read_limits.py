"""How large a netlist the reader accepts: defaults for untrusted input, raised on request for trusted work.

A netlist from an unknown source could ask for unbounded memory and time, so the reader refuses one
with more than ``DEFAULT_MAX_ELEMENTS`` element cards (after flattening subcircuits) or a file longer
than ``DEFAULT_MAX_NETLIST_MIB`` MiB. A real large network (a power grid, a million-node ladder) is
not untrusted input: its owner raises the limits with ``--max-elements N`` and ``--max-netlist-mib N``
(``reduce`` and ``verify``) or the case-file keys ``max_elements`` and ``max_netlist_mib``, and every
refusal names the flag and the key to raise. The limits only bound what is read; the own route's time
and memory on a large network are bounded separately (``model.budget``).
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any

from crosscheck.model.case_file import err

__all__ = [
    "DEFAULT_MAX_ELEMENTS",
    "DEFAULT_MAX_NETLIST_MIB",
    "ELEMENTS_FLAG",
    "NETLIST_MIB_FLAG",
    "ReadLimits",
    "limits_from_case",
]

#: Elements and subcircuit instances after flattening, by default: 200,000 cards read in about a second.
DEFAULT_MAX_ELEMENTS = 200_000
#: The longest netlist file (and text) by default, in MiB: 64 MiB holds ~1.5 million plain element lines.
DEFAULT_MAX_NETLIST_MIB = 64
ELEMENTS_FLAG = "--max-elements"
NETLIST_MIB_FLAG = "--max-netlist-mib"
#: Raised limits are still bounded: past these, a 32-bit sparse index or the machine's memory gives out first.
MOST_ELEMENTS = 100_000_000
MOST_NETLIST_MIB = 16 * 1024


@dataclass(frozen=True)
class ReadLimits:
    """The reader's size limits for one netlist (the defaults suit untrusted input)."""

    max_elements: int = DEFAULT_MAX_ELEMENTS
    max_netlist_mib: int = DEFAULT_MAX_NETLIST_MIB

    @classmethod
    def given(cls, max_elements: int | None, max_netlist_mib: int | None) -> ReadLimits | None:
        """The limits a command line gave (a default for the one left out); None when it gave neither."""
        if max_elements is None and max_netlist_mib is None:
            return None
        return cls(max_elements or DEFAULT_MAX_ELEMENTS, max_netlist_mib or DEFAULT_MAX_NETLIST_MIB)

    @property
    def max_netlist_bytes(self) -> int:
        """The longest netlist file in bytes (and text in characters)."""
        return self.max_netlist_mib * 2**20

    def elements_refusal(self) -> str:
        """The message for a netlist with more element cards than ``max_elements``."""
        return (
            f"more than {self.max_elements} element cards; a netlist that large is refused (a limit for "
            f"untrusted input): if you trust this netlist, raise the limit with {ELEMENTS_FLAG} N "
            "(case file: max_elements = N)"
        )

    def size_refusal(self, length: int, unit: str = "characters") -> str:
        """The message for a netlist of ``length`` characters (or bytes, a file's), beyond ``max_netlist_bytes``."""
        needed = -(-length // 2**20)
        return (
            f"the netlist is {length} {unit} long, beyond the limit of {self.max_netlist_mib} MiB "
            f"({self.max_netlist_bytes} {unit}) for untrusted input: if you trust this netlist, raise the "
            f"limit with {NETLIST_MIB_FLAG} {needed} or more (case file: max_netlist_mib = {needed})"
        )


def check_limit(value: int, most: int, name: str) -> str | None:
    """Why ``value`` cannot be the limit called ``name`` (None when it can)."""
    if value < 1 or value > most:
        return f"{name} must be a whole number from 1 to {most} (got {value})"
    return None


def limits_from_case(path: Path, data: dict[str, Any], given: ReadLimits | None) -> ReadLimits:
    """The case file's ``max_elements`` and ``max_netlist_mib`` keys; ``given`` (the command line's) wins."""
    if given is not None:
        return given
    values = {"max_elements": DEFAULT_MAX_ELEMENTS, "max_netlist_mib": DEFAULT_MAX_NETLIST_MIB}
    for key, most in (("max_elements", MOST_ELEMENTS), ("max_netlist_mib", MOST_NETLIST_MIB)):
        if key not in data:
            continue
        raw = data[key]
        if isinstance(raw, bool) or not isinstance(raw, int):
            raise err(path, key, f"must be a whole number (got {str(raw)[:40]!r}); e.g. {key} = {values[key] * 5}")
        problem = check_limit(raw, most, key)
        if problem:
            raise err(path, key, problem)
        values[key] = raw
    return ReadLimits(**values)
