"""Write a Network as a netlist that ``read_netlist`` reads back to an equal Network.

The writer produces the only text ngspice ever sees from crosscheck, so it refuses names that could
smuggle a second card into the netlist.
"""

from __future__ import annotations

from crosscheck.errors import NetworkError
from crosscheck.model.netlist_subset import CONTROL_CHAR, NAME, NAME_CHARS
from crosscheck.model.network import Element, Network

__all__ = ["format_element", "write_netlist"]


def format_element(e: Element) -> str:
    """One card for ``e``, in the form ``read_netlist`` reads back to an equal element."""
    names = [("name", e.name), *(("node", n) for n in e.nodes), *(("inductor", n) for n in e.coupled or ())]
    if e.kind in "FH":
        names.append(("controlling source", e.control or ""))
    for label, name in names:
        if not NAME.match(name) or name != name.lower():
            raise NetworkError(
                f"{e.name!r}: {label} {name!r} cannot be written to a netlist; use lower-case {NAME_CHARS}", e.where
            )
    if e.name[0] != e.kind.lower():
        raise NetworkError(
            f"{e.name!r}: a {e.kind} element's name must start with {e.kind.lower()!r}, "
            "because SPICE takes the kind from the first letter",
            e.where,
        )
    head = " ".join((e.name, *e.nodes))
    if e.kind in "VI":
        # The DC value once the model carries it (``Element.dc_value``); "0" when it is zero, as before.
        dc = float(getattr(e, "dc_value", 0.0))
        return f"{head} DC {repr(dc) if dc else '0'} AC {e.ac_mag!r} {e.ac_phase_deg!r}"
    if e.kind in "FH":
        return f"{head} {e.control} {e.value!r}"
    if e.kind == "K":
        assert e.coupled is not None
        return f"{e.name} {e.coupled[0]} {e.coupled[1]} {e.value!r}"
    return f"{head} {e.value!r}"


def write_netlist(network: Network) -> str:
    """A clean netlist: the title, one card per element, ``.end``."""
    if "\n" in network.title or "\r" in network.title or CONTROL_CHAR.search(network.title):
        raise NetworkError(
            f"the title {network.title!r} contains a line break or control character; use a one-line title"
        )
    cards = [network.title, *(format_element(e) for e in network.elements), ".end"]
    return "\n".join(cards) + "\n"
