"""ngspice ``.control`` ... ``.endc`` blocks: found, skipped, never run, and what they would have changed.

A control block is a script for ngspice's interactive shell: it can run shell commands, write
files, change element values and rerun analyses. crosscheck runs no script. Why this path is safe:
the reader hands each physical line to ``ControlBlocks.take`` before it builds any card, and a line
inside a block is only matched against the few command words below and then dropped; it never
becomes a card, never enters the model or ``Network.source_lines``, and so never reaches ngspice.

Commands that change the circuit or the simulator's options when ngspice runs the block (``alter``,
``altermod``, ``let`` on a device parameter ``@...``, ``option``, ``set`` of a simulator variable)
make the note say that the answer can differ from an interactive run.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field

__all__ = ["ControlBlock", "ControlBlocks"]

_CHANGES = re.compile(
    r"^(alter|altermod|options?|reset)\b|^(let)\s+@|^(set)\s+(?!(?:"
    + "|".join(
        (
            r"units",
            r"wr_\w+",
            r"color\d+",
            r"hcopy\w*",
            r"gnuplot\w*",
            r"filetype",
            r"appendwrite",
            r"numdgt",
            r"width",
            r"height",
            r"nomoremode",
            r"noaskquit",
            r"xbrushwidth",
            r"sqrgraph",
            r"polydegree",
        )
    )
    + r")\b)",
    re.IGNORECASE,
)


@dataclass
class ControlBlock:
    """One block: the lines of ``.control`` and ``.endc`` and the commands in it that change the circuit."""

    first: int
    last: int | None = None
    changes: list[tuple[int, str]] = field(default_factory=list)

    def note(self) -> str:
        """What the reader says about the block (without the file and line, which the note adds)."""
        span = f"lines {self.first}-{self.last}"
        text = f".control block ({span}) skipped: crosscheck never runs ngspice scripts"
        if not self.changes:
            return text + "; it has no effect on the netlist crosscheck reads"
        found = ", ".join(f"{command} (line {line})" for line, command in self.changes[:5])
        extra = f" and {len(self.changes) - 5} more" if len(self.changes) > 5 else ""
        return (
            f"{text}. It contains {found}{extra}, which change the circuit or the simulator's options when "
            "ngspice runs the block interactively: the answer can differ from an interactive run; "
            "put the values those commands set into the netlist's cards"
        )


class ControlBlocks:
    """Fed every non-comment line in order: says which lines belong to a block, and keeps the blocks found."""

    def __init__(self) -> None:
        self.blocks: list[ControlBlock] = []
        self.open: ControlBlock | None = None

    def take(self, number: int, stripped: str) -> bool:
        """True when line ``number`` (comments removed, not blank) starts, ends or lies inside a block."""
        word = stripped.split(None, 1)[0].lower()
        if self.open is None:
            if word != ".control":
                return False
            self.open = ControlBlock(number)
            return True
        if word == ".endc":
            self.open.last = number
            self.blocks.append(self.open)
            self.open = None
            return True
        if word == ".end":
            return False  # the reader refuses an .end inside a block, naming the .control line
        match = _CHANGES.match(stripped)
        if match:
            command = next(g for g in match.groups() if g)
            self.open.changes.append((number, command.lower() + (" @..." if command.lower() == "let" else "")))
        return True
