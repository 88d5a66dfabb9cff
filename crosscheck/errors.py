"""One root error for everything crosscheck refuses or cannot do.

Each subclass also derives from the built-in it resembles, so callers that
catch ``ValueError`` or ``ArithmeticError`` keep working. Messages say what is
wrong, with the offending value, and then what to do about it.
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Location:
    """Where a piece of input came from: a file (or ``<string>``) and a 1-based line."""

    file: str = "<string>"
    line: int | None = None

    def __str__(self) -> str:
        return f"{self.file}:{self.line}" if self.line is not None else self.file


class CrosscheckError(Exception):
    """Root of every error crosscheck raises on purpose."""


class ValueSyntaxError(CrosscheckError, ValueError):
    """A number or phasor could not be read. Fix the text; the message shows the accepted forms."""


class NetlistError(CrosscheckError, ValueError):
    """The netlist text is malformed or uses a construct outside the supported subset.

    Carries ``location`` (file and line) so the user can go straight to it, and ``problems``: every
    problem found in one pass, each ``(Location, message)`` in line order (one entry for a single
    problem; ``location`` is always the first one's). ``more`` counts problems found beyond those listed.
    """

    def __init__(
        self,
        message: str,
        location: Location | None = None,
        problems: tuple[tuple[Location, str], ...] = (),
        more: int = 0,
    ):
        self.location = location or Location()
        self.bare_message = message
        self.problems = problems or ((self.location, message),)
        self.more = more
        super().__init__(f"{self.location}: {message}")

    @classmethod
    def of_problems(cls, problems: list[tuple[Location, str]], cap: int) -> NetlistError:
        """One error listing ``problems`` (already in line order), at most ``cap`` of them, each on its own line."""
        shown, more = tuple(problems[:cap]), max(len(problems) - cap, 0)
        if len(problems) == 1:
            return cls(shown[0][1], shown[0][0])
        lines = [f"the netlist has {len(problems)} problems, in line order:"]
        lines += [f"  {where}: {message}" for where, message in shown]
        if more:
            lines.append(f"  ... and {more} more after these {cap}; fix these and read the netlist again")
        return cls("\n".join(lines), shown[0][0], shown, more)


class NetworkError(CrosscheckError, ValueError):
    """The network is read correctly but is ill-posed (floating part, source loop, bad value).

    Carries ``location`` of the element at fault when known.
    """

    def __init__(self, message: str, location: Location | None = None):
        self.location = location or Location()
        self.bare_message = message
        prefix = f"{self.location}: " if location is not None else ""
        super().__init__(f"{prefix}{message}")


class PortError(NetworkError):
    """The requested port does not exist or cannot be measured in this network."""


class SingularNetworkError(CrosscheckError, ArithmeticError):
    """The MNA matrix is singular at a frequency; the message names the likely cause and nodes."""

    def __init__(self, message: str, nodes: tuple[str, ...] = (), freq_hz: float | None = None):
        self.nodes = nodes
        self.freq_hz = freq_hz
        super().__init__(message)


class CaseFileError(CrosscheckError, ValueError):
    """A case file is malformed: the message names the file and the key at fault."""


class ReferenceEngineError(CrosscheckError, RuntimeError):
    """ngspice could not produce an answer; the message carries ngspice's own words."""


class EngineUnavailableError(ReferenceEngineError):
    """ngspice (or PySpice) is not installed or cannot be loaded; the message says how to install it."""
