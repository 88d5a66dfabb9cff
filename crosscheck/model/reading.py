"""What reading a netlist produced besides the network: notes, warnings and the lines accepted.

The reader (``model.netlist``) fills a ``Reading``; the run layer carries its notes and warnings
into every report, and hands ``Network.source_lines`` (the user's own lines the reader accepted)
to ngspice for the reading check (``spice.reading``). A note says that something was read and
has no effect on an AC answer; a warning says that the answer is probably not what the author
meant (a trap), and has a stable code a case file can acknowledge with ``accept_warnings``.
"""

from __future__ import annotations

from dataclasses import dataclass

from crosscheck.errors import Location

#: Warning codes, each with what it means; a case file acknowledges one by its code.
WARNING_CODES = {
    "no-ac-source": "no independent source has an AC value, so V_th is zero by construction",
    "no-dc-source": "under DC excitation: no independent source has a DC value, so V_th is zero by construction",
    "title-is-element": "the first line looks like an element card; SPICE reads it as the title",
    "suffix-milli": "a value ends in M or MHz, which SPICE reads as milli, not mega",
    "suffix-femto": "a capacitor's value ends in F, which SPICE reads as femto, not farad",
    "suffix-mega-mixed": "a resistor's value ends in M (milli) among values that suggest mega (Meg)",
}


@dataclass(frozen=True)
class ReadWarning:
    """A trap found while reading: ``code`` (a key of ``WARNING_CODES``), what was found, and where."""

    code: str
    message: str
    location: Location

    def __str__(self) -> str:
        return f"{self.location}: {self.message} [{self.code}]"


@dataclass(frozen=True)
class Reading:
    """A netlist read: ``notes`` (each names file and line) and ``warnings`` in line order."""

    notes: tuple[str, ...] = ()
    warnings: tuple[ReadWarning, ...] = ()
