"""The SPICE subset the netlist reader takes, and what it says about everything else.

Shared by the reader (``model.netlist``) and the writer (``model.netlist_writer``): one name grammar
for both, so a name the writer puts out is a name the reader takes back. The tables pair each card
or device crosscheck does not model with the reason and what to do instead.
"""

from __future__ import annotations

import re

SUBSET = "crosscheck reads linear R L C V I E F G H K networks and X subcircuits"
FREQS = "crosscheck chooses the frequencies from the command line or the case file"
#: Element, node, subcircuit and inductor names: what SPICE takes and no character that starts a comment or card.
NAME = re.compile(r"^[a-z0-9_.:#+\-\[\]<>!/]+(?:-\([a-z0-9_.:#+\-\[\]<>!/]*\))?$", re.IGNORECASE)
NAME_CHARS = "letters, digits and _ . : # + - [ ] < > ! / (and a schematic editor's -(...) ending: Net-(R1-Pad2))"
CONTROL_CHAR = re.compile(r"[\x00-\x08\x0b\x0e-\x1f\x7f]")

_NO_AC_EFFECT = "it does not change the AC answer"
#: Cards read and ignored, with the note the reader gives (each note also names the file, line and card).
IGNORED_CARDS = {
    ".ac": FREQS,
    ".op": "the operating point does not change a linear network",
    **dict.fromkeys((".options", ".option", ".opt", ".opts"), "crosscheck sets the simulator's options itself"),
    **dict.fromkeys((".print", ".plot", ".save", ".probe", ".width"), "crosscheck chooses what to report"),
    **dict.fromkeys((".meas", ".measure"), "crosscheck makes its own measurements at the port"),
    ".title": "the title is line 1; a .title card only renames the output, " + _NO_AC_EFFECT,
    ".ic": "initial conditions only affect transient analysis; " + _NO_AC_EFFECT,
    ".nodeset": "node sets only steer the operating-point search; " + _NO_AC_EFFECT,
    **{
        card: f"{card[1:]} analysis is not run: crosscheck runs its own AC analysis ({FREQS})"
        for card in (".tran", ".dc", ".noise", ".four", ".disto", ".sens", ".tf", ".pz", ".sp", ".pss")
    },
}
#: Keys of an .options card that could change an answer if they were applied (the note names them).
OPTIONS_THAT_MATTER = ("temp", "tnom")
_OTHER_FILES = (
    "crosscheck reads one self-contained file and never opens files named inside it; paste the "
    "subcircuits you need into this netlist"
)
#: Cards refused, with the reason and the fix.
REFUSED_CARDS = {
    ".endc": "an .endc with no .control before it; remove it (crosscheck skips .control ... .endc blocks)",
    **dict.fromkeys((".include", ".inc", ".lib"), _OTHER_FILES),
}
#: Why a .global naming a node other than ground is refused when a subcircuit uses that node.
GLOBAL_REFUSED = (
    "global nodes across subcircuits are not implemented (crosscheck would keep {node!r} local to each "
    "subcircuit, ngspice joins them); pass the node through the subcircuit's terminals instead "
    "(ground, 0, is always global)"
)

#: Element letters of devices outside the subset, by what they are.
DEVICES = {
    "d": "a diode",
    "q": "a bipolar transistor",
    "m": "a MOSFET",
    "j": "a JFET",
    "z": "a MESFET",
    "s": "a voltage-controlled switch",
    "w": "a current-controlled switch",
    "t": "a transmission line",
    "o": "a lossy transmission line",
    "u": "a distributed RC line",
    "y": "a transmission line",
    "p": "a coupled multiconductor line",
    "n": "a compiled device model",
    "b": "a behavioural source",
    "a": "an XSPICE code model",
}
TRANSIENT = frozenset({"sin", "pulse", "pwl", "exp", "sffm", "am", "trnoise", "trrandom", "pat"})
BEHAVIOURAL = frozenset({"poly", "value", "table", "laplace", "freq", "vol", "cur"})
USAGE = {  # the card's form; its last word names the value
    "r": "Rname n+ n- resistance",
    "l": "Lname n+ n- inductance",
    "c": "Cname n+ n- capacitance",
    "v": "Vname n+ n- [DC v] [AC [mag [phase]]]",
    "i": "Iname n+ n- [DC v] [AC [mag [phase]]]",
    "e": "Ename n+ n- nc+ nc- gain",
    "g": "Gname n+ n- nc+ nc- transconductance",
    "f": "Fname n+ n- Vcontrol gain",
    "h": "Hname n+ n- Vcontrol transresistance",
    "k": "Kname Lname1 Lname2 coupling",
    "x": "Xname node1 node2 ... SUBCKTNAME",
}
#: The key=value spellings of an R, L or C value.
VALUE_KEYS = {"r": ("r", "resistance"), "l": ("l", "inductance"), "c": ("c", "capacitance")}

#: Parasitic keys some simulators take on L, C and V cards; ngspice does not, so they are refused with the fix.
PARASITIC_KEYS = {
    "rser": "a series resistance: write it as its own R card in series",
    "lser": "a series inductance: write it as its own L card in series",
    "rpar": "a parallel resistance: write it as its own R card across the part",
    "cpar": "a parallel capacitance: write it as its own C card across the part",
}
